package budget

import (
	"math"
	"testing"
)

// Two rectangular values whose normal scores correlate ρ_z correlate
// (6/π)·asin(ρ_z/2) (Pearson 1907; common practice in copula sampling), so a
// stated value correlation ρ needs scores correlated 2·sin(πρ/6): 0.9 → 0.9080.
// Normal with normal is the identity; normal with rectangular scales by
// √(3/π) = 0.9772.
func TestScoreCorrelation(t *testing.T) {
	rect := rectCoefs()
	norm := coefsOf(&Source{Dist: Dist{Kind: KindNormal, Sigma: 1}})
	for _, rho := range []float64{-0.9, -0.3, 0, 0.3, 0.5, 0.9, 0.99} {
		if got, want := scoreCorrelation(rect, rect, rho), 2*math.Sin(math.Pi*rho/6); math.Abs(got-want) > 1e-5 {
			t.Errorf("rect–rect %v: score correlation %.6f, want %.6f", rho, got, want)
		}
		if got := scoreCorrelation(norm, norm, rho); math.Abs(got-rho) > 1e-9 {
			t.Errorf("normal–normal %v: %v", rho, got)
		}
		if got, want := valueCorrelation(norm, rect, rho), rho*math.Sqrt(3/math.Pi); math.Abs(got-want) > 1e-5 {
			t.Errorf("normal–rect at score %v: %.6f, want %.6f", rho, got, want)
		}
	}
	if got := scoreCorrelation(rect, rect, 0.9); math.Abs(got-0.9080) > 5e-5 {
		t.Errorf("0.9 → %.5f, want 0.9080", got)
	}
}
