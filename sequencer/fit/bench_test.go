package fit_test

import (
	"math"
	"testing"

	"trimline/sequencer/fit"
)

// benchData returns n points of a slightly curved, slightly noisy response
// on x = 0 … n−1 (deterministic, no RNG).
func benchData(n int) (x, y []float64) {
	x, y = make([]float64, n), make([]float64, n)
	for i := range n {
		v := float64(i)
		x[i] = v
		y[i] = 0.25 + 1.5*v - 1e-3*v*v + 0.01*math.Sin(7*v)
	}
	return x, y
}

// BenchmarkPolyLine11 is a typical trim: an 11-point straight line.
func BenchmarkPolyLine11(b *testing.B) {
	x, y := benchData(11)
	b.ReportAllocs()
	for b.Loop() {
		if _, err := fit.Poly(x, y, 1, 5); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkPoly101 is a 101-point quadratic characterisation fit.
func BenchmarkPoly101(b *testing.B) {
	x, y := benchData(101)
	b.ReportAllocs()
	for b.Loop() {
		if _, err := fit.Poly(x, y, 2, 50); err != nil {
			b.Fatal(err)
		}
	}
}
