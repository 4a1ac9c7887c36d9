package uncertainty_test

import (
	"testing"

	"trimline/sequencer/uncertainty"
)

func BenchmarkFitLine(b *testing.B) {
	s := realisticSweep() // 11 points
	b.ReportAllocs()
	for b.Loop() {
		if _, err := uncertainty.FitLine(s); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkMonteCarlo10k(b *testing.B) {
	s := realisticSweep()
	b.ReportAllocs()
	for b.Loop() {
		if _, err := uncertainty.MonteCarlo(s, 10_000, 1); err != nil {
			b.Fatal(err)
		}
	}
}
