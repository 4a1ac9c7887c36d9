package limits_test

import (
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
