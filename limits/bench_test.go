package limits_test

import (
	"os"
	"testing"

	"trimline/limits"
	"trimline/limits/limitstest"
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
	r := limitstest.Passing()
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

// BenchmarkVerdicts judges the unit of BenchmarkJudgeToleranced with Verdicts:
// the same verdicts without statements, reasons or probabilities.
func BenchmarkVerdicts(b *testing.B) {
	set, err := limits.LoadFile("../sequences/brx200-limits.yaml", catalog)
	if err != nil {
		b.Fatal(detail(err))
	}
	r := limitstest.Passing()
	vs := make([]string, len(set.Limits))
	b.ReportAllocs()
	for b.Loop() {
		if set.Verdicts(r, vs) != limits.VerdictPass {
			b.Fatal("demo unit did not pass")
		}
	}
}
