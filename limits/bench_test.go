package limits_test

import (
	"math"
	"os"
	"testing"

	"trimline/limits"
)

// BenchmarkJudge judges one unit against the 8-limit demo set (good.yaml).
func BenchmarkJudge(b *testing.B) {
	set := loadGood(b)
	r := goodResults()
	b.ReportAllocs()
	for b.Loop() {
		if outs := set.Judge(r); !limits.Passed(outs) {
			b.Fatal("demo unit failed")
		}
	}
}

// BenchmarkLoad loads and compiles the 8-limit demo set.
func BenchmarkLoad(b *testing.B) {
	data, err := os.ReadFile(goodPath)
	if err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	for b.Loop() {
		if _, err := limits.Load("good.yaml", data, catalog); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkJudgeToleranced judges one unit against the demo limit file
// (sequences/brx200-limits.yaml: 7 toleranced limits, guarded, non-binary, and one
// expression), every result with an uncertainty; half at k = 2, half with ν = 12
// (Student's t for the coverage factor, the re-expansion and the probability).
func BenchmarkJudgeToleranced(b *testing.B) {
	set, err := limits.LoadFile("../sequences/brx200-limits.yaml", catalog)
	if err != nil {
		b.Fatal(detail(err))
	}
	inf := math.Inf(1)
	r := map[string]limits.Value{
		"pre_offset":        {V: 3.1e-3, Valid: true, U: 20e-6, K: 2, DOF: inf},
		"pre_gain_error":    {V: 0.013, Valid: true, U: 50e-6, K: 2, DOF: inf},
		"pre_nonlinearity":  {V: 0.001, Valid: true},
		"offset_code":       {V: 512, Valid: true},
		"gain_code":         {V: 2048, Valid: true},
		"post_offset":       {V: 1.23e-5, Valid: true, U: 8e-6, K: 2, DOF: inf},
		"post_gain_error":   {V: 12e-6, Valid: true, U: 6e-6, DOF: 12},
		"post_nonlinearity": {V: 5e-5, Valid: true, U: 5e-6, DOF: 12},
		"post_max_error":    {V: 1.2e-4, Valid: true, U: 30e-6, DOF: 12},
		"post_noise":        {V: 8e-6, Valid: true, Std: 1e-6, DOF: 12},
	}
	if outs := set.Judge(r); set.Overall(outs) != limits.VerdictPass {
		for _, o := range outs {
			b.Log(o.Name, o.Reason)
		}
		b.Fatal("demo unit did not pass")
	}
	b.ReportAllocs()
	for b.Loop() {
		if outs := set.Judge(r); !limits.Passed(outs) {
			b.Fatal("demo unit failed")
		}
	}
}
