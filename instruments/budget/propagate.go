package budget

import "math"

// Propagation is one pre-trim quantity by the law of propagation of uncertainty
// (JCGM 100:2008 §5) and by the worst case.
type Propagation struct {
	Name string // PreOffset or PreGainError
	Unit string // the output's unit ("V" or "A") for the offset, "1" (a plain fraction) for the gain error
	// Mean is the quantity at the nominal unit (every source at its mean); U is
	// its standard uncertainty u(y), correlations included (§5.2.2).
	Mean, U float64
	// Interval95 is Mean ± 1.96·U: the 95 % interval of a normal output.
	Interval95 [2]float64
	// WorstCase is Mean plus the linearised extremes: every source at the end of
	// [Low, High] (a bounded source at ± its half-width, a normal source at ±3σ,
	// a derived one at the extremes of its formula) that moves the quantity
	// furthest down, then up. Correlations do not narrow it.
	WorstCase [2]float64
	// Shares is each source's share of u²(y): cᵢuᵢ·Σⱼ r(xᵢ, xⱼ)·cⱼuⱼ / u²(y). The
	// shares sum to 1; with a negative correlation a share may be negative. All 0
	// when u(y) is 0.
	Shares map[string]float64
	// Sensitivities are ∂y/∂xᵢ at the nominal unit, by source name (numerical,
	// central differences).
	Sensitivities map[string]float64
}

// Propagate evaluates the two pre-trim quantities of Unit.PreTrim (PreOffset,
// then PreGainError) by the law of propagation of uncertainty (JCGM 100:2008
// §5.1.2, §5.2.2), linearised at the nominal unit: the input quantities are the
// sources' values, each with its mean and standard deviation (Dist), the
// sensitivities numerical (central differences of ±10⁻³·uᵢ), the correlations
// those of the file. A model far from linear over the sources' spread (a large
// gain error times a large offset) is better judged by Monte Carlo
// (sequencer/plan.Simulate).
func (b *Budget) Propagate() []Propagation {
	n := len(b.Sources)
	x0 := b.Nominal().Values
	f := func(x []float64) [2]float64 {
		o, g := b.UnitOf(x).PreTrim(b)
		return [2]float64{o, g}
	}
	y0 := f(x0)
	var c [2][]float64
	c[0], c[1] = make([]float64, n), make([]float64, n)
	x := make([]float64, n)
	for i, s := range b.Sources {
		u := s.Dist.Sigma
		h := 1e-3 * u
		if h == 0 {
			// No spread: the sensitivity still places the worst case.
			h = 1e-3 * math.Max(math.Abs(s.High-s.Low)/2, math.Abs(s.Dist.Mean))
		}
		if h == 0 {
			continue
		}
		copy(x, x0)
		x[i] = x0[i] + h
		up := f(x)
		x[i] = x0[i] - h
		down := f(x)
		for q := range 2 {
			c[q][i] = (up[q] - down[q]) / (2 * h)
		}
	}
	r := make([][]float64, n)
	for i := range r {
		r[i] = make([]float64, n)
		r[i][i] = 1
	}
	for _, k := range b.Correlations {
		r[k.A][k.B], r[k.B][k.A] = k.Coefficient, k.Coefficient
	}
	out := make([]Propagation, 2)
	for q := range 2 {
		p := Propagation{Name: PreOffset, Unit: b.Transfer.OutputUnit, Mean: y0[q],
			Shares: map[string]float64{}, Sensitivities: map[string]float64{}}
		if q == 1 {
			p.Name, p.Unit = PreGainError, "1"
		}
		cu := make([]float64, n)
		for i, s := range b.Sources {
			cu[i] = c[q][i] * s.Dist.Sigma
		}
		var v float64
		part := make([]float64, n)
		for i := range n {
			for j := range n {
				part[i] += r[i][j] * cu[i] * cu[j]
			}
			v += part[i]
		}
		p.U = math.Sqrt(math.Max(v, 0))
		p.Interval95 = [2]float64{p.Mean - 1.96*p.U, p.Mean + 1.96*p.U}
		lo, hi := p.Mean, p.Mean
		for i, s := range b.Sources {
			a, z := c[q][i]*(s.Low-s.Dist.Mean), c[q][i]*(s.High-s.Dist.Mean)
			lo += math.Min(a, z)
			hi += math.Max(a, z)
			share := 0.0
			if v > 0 {
				share = part[i] / v
			}
			if math.Abs(share) < 1e-12 {
				share = 0 // round-off of a source this quantity does not see (1e-32 is not a share)
			}
			p.Shares[s.Name] += share
			p.Sensitivities[s.Name] = c[q][i]
		}
		p.WorstCase = [2]float64{lo, hi}
		out[q] = p
	}
	return out
}
