package uncertainty

import (
	"math"
	"math/rand/v2"
	"testing"
)

// The χ² draw behind the pooled scale (2·Gamma(ν/2)), mean ν and
// variance 2ν (NIST/SEMATECH e-Handbook §1.3.6.6.6).
func TestChiSquareMoments(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for _, nu := range []float64{1, 4, 77} {
		const m = 200_000
		var s, ss float64
		for range m {
			c := ChiSquare(rng, nu)
			s += c
			ss += c * c
		}
		mean := s / m
		vr := ss/m - mean*mean
		if math.Abs(mean-nu) > 5*math.Sqrt(2*nu/m) || math.Abs(vr-2*nu) > 0.03*2*nu {
			t.Errorf("ν = %g: mean %.4g variance %.4g, want %g and %g", nu, mean, vr, nu, 2*nu)
		}
	}
}
