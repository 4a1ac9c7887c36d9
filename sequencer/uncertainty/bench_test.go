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

func BenchmarkFitQuadratic(b *testing.B) {
	s := realisticSweep() // 11 points
	b.ReportAllocs()
	for b.Loop() {
		if _, err := uncertainty.FitQuadratic(s); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkLackOfFit(b *testing.B) {
	s := realisticSweep()
	x := append(append([]float64(nil), s.X...), s.X...) // every level twice
	y := append(append([]float64(nil), s.Y...), s.Y...)
	for i := range s.Y {
		y[i] += 1e-6
	}
	f, err := uncertainty.FitLine(uncertainty.Sweep{X: x, Y: y})
	if err != nil {
		b.Fatal(err)
	}
	yhat := make([]float64, len(x))
	for i, xi := range x {
		yhat[i], _ = f.Predict(xi)
	}
	b.ReportAllocs()
	for b.Loop() {
		if _, err := uncertainty.LackOfFit(x, y, nil, yhat, 2); err != nil {
			b.Fatal(err)
		}
	}
}
