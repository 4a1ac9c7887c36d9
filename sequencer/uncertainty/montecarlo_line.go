package uncertainty

import (
	"math"
	"math/rand/v2"
)

// MonteCarloLine propagates distributions (JCGM 101:2008) through the line
// fit of the package doc's model and keeps the model values of (b0, b1)
// (outputs 0 and 1 of the MCRun, V and V/V), so that any linear combination
// of them has its own coverage interval (MCRun.Linear). Trials, interval,
// probability and the adaptive procedure are opt's (MonteCarloModel). Each
// trial draws
//
//   - the random errors of the point means. Where the URandom_i come from
//     one pooled standard deviation with ν degrees of freedom
//     (s.PooledRandom, ν = DOFRandom_i), one scale factor sqrt(ν/χ²_ν) per
//     trial and e_i = URandom_i·factor·z_i with z_i standard normal: each
//     e_i is then the scaled and shifted t_ν of JCGM 101 §6.4.9 for a Type
//     A evaluation from repeated indications, and all of them share the one
//     estimate of the standard deviation, as the pooled estimate does.
//     Otherwise each point draws its own t with DOFRandom_i (normal for
//     infinite dof);
//   - for each point, the rounding error, rectangular ±MeterResolution/2;
//   - once per trial, the four systematic errors g_m, o_m, g_s, o_s,
//     rectangular within the specs (o_s from SourceZero, t or normal, when
//     it is set);
//
// and refits the line with FitLine's weights and centring, as MonteCarlo
// does. MonteCarlo and MonteCarloCoverage keep the earlier draw (an
// independent t per point whatever PooledRandom says) for records made
// with it.
//
// Each of watch is a linear combination g·(b0, b1) that is reported, kept
// as a further output (2, 3, …) so that the adaptive procedure stabilises it
// to its own δ too: δ follows the digits of each quantity's u, and a scaled
// b1 (a gain error b1/G − 1) can need more trials than b1 itself.
//
// Errors: those of FitLine for an invalid Sweep; those of MonteCarloModel
// for invalid options.
func MonteCarloLine(s Sweep, opt MCOptions, watch ...[2]float64) (*MCRun, error) {
	if _, err := FitLine(s); err != nil {
		return nil, err
	}
	n := len(s.X)
	w := s.mcWeights()
	halfRes := s.MeterResolution / 2
	aGm, aOm := s.Meter.OfReading, s.Meter.OfRange*s.Meter.Range // half-widths
	aGs, aOs := s.Source.OfReading, s.Source.OfRange*s.Source.Range
	pooledNu := math.Inf(1) // ν of the shared scale; +Inf = no shared scale
	if s.PooledRandom {
		for i := range n {
			if s.uRandom(i) > 0 {
				pooledNu = s.DOFRandom[i]
				break
			}
		}
	}
	xc, yc := make([]float64, n), make([]float64, n)
	model := func(rng *rand.Rand, out []float64) {
		rect := func(a float64) float64 { return a * (2*rng.Float64() - 1) }
		egm, eom, egs, eos := rect(aGm), rect(aOm), rect(aGs), rect(aOs)
		if z := s.SourceZero; z != nil {
			if math.IsInf(z.DOF, 1) {
				eos = z.U * rng.NormFloat64()
			} else {
				eos = z.U * studentT(rng, z.DOF)
			}
		}
		scale := 1.0
		if !math.IsInf(pooledNu, 1) {
			scale = math.Sqrt(pooledNu / ChiSquare(rng, pooledNu))
		}
		for i := range n {
			e := 0.0
			if ur := s.uRandom(i); ur > 0 {
				switch nu := s.DOFRandom[i]; {
				case s.PooledRandom, math.IsInf(nu, 1):
					e = ur * scale * rng.NormFloat64()
				default:
					e = ur * studentT(rng, nu)
				}
			}
			if halfRes > 0 {
				e += rect(halfRes)
			}
			xc[i] = s.X[i]*(1+egs) + eos
			yc[i] = (s.Y[i] - e - eom) / (1 + egm)
		}
		out[0], out[1] = lineLS(xc, yc, w, s.X0)
		for j, g := range watch {
			out[2+j] = g[0]*out[0] + g[1]*out[1]
		}
	}
	return MonteCarloModel(2+len(watch), model, opt)
}
