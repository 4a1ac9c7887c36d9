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

// BenchmarkMonteCarloAdaptive is one line fit of the noisy 11-point sweep by
// the adaptive procedure of JCGM 101 §7.9 (n_dig = 2, p = 95.45 %), watching
// b0, b1 and the gain error b1/200 as the sequencer does; it reports the
// trials M it took.
func BenchmarkMonteCarloAdaptive(b *testing.B) {
	s := noisySweep(8)
	b.ReportAllocs()
	var m int
	for b.Loop() {
		run, err := uncertainty.MonteCarloLine(s, uncertainty.MCOptions{P: 0.9545, Seed: 22}, [2]float64{0, 1.0 / 200})
		if err != nil {
			b.Fatal(err)
		}
		m = run.Trials
	}
	b.ReportMetric(float64(m), "trials")
}

// BenchmarkMonteCarloLine10k is 10⁴ trials of the pooled draw, to compare
// with BenchmarkMonteCarlo10k (the revision-0 draw).
func BenchmarkMonteCarloLine10k(b *testing.B) {
	s := realisticSweep()
	b.ReportAllocs()
	for b.Loop() {
		if _, err := uncertainty.MonteCarloLine(s, uncertainty.MCOptions{P: 0.95, Seed: 1, Trials: 10_000}); err != nil {
			b.Fatal(err)
		}
	}
}
