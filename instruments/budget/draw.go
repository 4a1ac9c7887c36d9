package budget

import (
	"math"
	"math/rand/v2"
)

// Unit is one drawn unit: the value of every source (same order as Sources, SI: V,
// A or a fraction) and the transfer it gives, the values summed by where they act.
type Unit struct {
	Values       []float64
	InputOffset  float64 // input-referred offset (InputUnit)
	OutputOffset float64 // output-referred offset (OutputUnit)
	// GainError is the relative gain error: the gain sources combine as
	// ∏(1 + gᵢ) − 1.
	GainError float64
	// CrossoverStep is the step in input-referred offset for inputs above
	// CrossoverAt (InputUnit).
	CrossoverStep, CrossoverAt float64
	// Compression is the gain lost at a rail, a fraction (see Output).
	Compression float64
}

// Draw draws one unit, the correlations honoured: the sources' normal scores are
// drawn correlated (Cholesky) and each mapped through Φ to its own distribution
// (a Gaussian copula), the values correlating as the file states. It draws a
// fixed count of normals from r per call, so a unit is a deterministic function of
// r's state. It is safe for concurrent use with distinct generators.
func (b *Budget) Draw(r *rand.Rand) Unit {
	lm := &b.latent
	buf := make([]float64, 2*lm.n)
	w := buf[:lm.n]
	for i := range w {
		w[i] = r.NormFloat64()
	}
	z := w
	if lm.chol != nil {
		z = buf[lm.n:]
		for i, row := range lm.chol {
			var s float64
			for k := 0; k <= i; k++ {
				s += row[k] * w[k]
			}
			z[i] = s
		}
	}
	values := make([]float64, len(b.Sources))
	for i := range b.Sources {
		s := &b.Sources[i]
		f := lm.first[i]
		if f < 0 {
			values[i] = valueAt(s, nil)
			continue
		}
		values[i] = valueAt(s, z[f:f+scores(s)])
	}
	return b.UnitOf(values)
}

// UnitOf is the unit whose sources take values (one per source, in order): their
// sums by where they act.
func (b *Budget) UnitOf(values []float64) Unit {
	u := Unit{Values: values}
	gain := 1.0
	for i, v := range values {
		s := &b.Sources[i]
		switch s.Acts {
		case ActsInputOffset:
			u.InputOffset += v
		case ActsOutputOffset:
			u.OutputOffset += v
		case ActsGain:
			gain *= 1 + v
		case ActsCrossoverStep:
			u.CrossoverStep += v
			u.CrossoverAt = s.At
		case ActsRailCompression:
			u.Compression += v
		}
	}
	u.GainError = gain - 1
	return u
}

// Nominal is the unit whose every source takes its mean (Dist.Mean): the point
// Propagate linearises at.
func (b *Budget) Nominal() Unit {
	values := make([]float64, len(b.Sources))
	for i, s := range b.Sources {
		values[i] = s.Dist.Mean
	}
	return b.UnitOf(values)
}

// Output is the unit's output at input x before trim (OutputUnit):
// OutputAtZero + OutputOffset + Gain·(1 + GainError)·(x + InputOffset [+
// CrossoverStep when x > CrossoverAt]), then, with rails, compressed within the
// knee of a rail — the incremental gain falls linearly from 1 at Knee from the rail
// to 1 − Compression at Knee past that edge, and stays there — and held between
// the rails.
func (u Unit) Output(b *Budget, x float64) float64 {
	return b.Transfer.OutputAtZero + u.deviation(b, x) + b.Transfer.Gain*x
}

// deviation is Output minus the nominal line Gain·x + OutputAtZero, computed
// without that line's rounding (the station's fit sees the same).
func (u Unit) deviation(b *Budget, x float64) float64 {
	t := &b.Transfer
	xin := u.InputOffset
	if u.CrossoverStep != 0 && x > u.CrossoverAt {
		xin += u.CrossoverStep
	}
	d := u.OutputOffset + t.Gain*u.GainError*x + t.Gain*(1+u.GainError)*xin
	if t.Rails == nil {
		return d
	}
	y := t.OutputAtZero + t.Gain*x + d
	return t.Rails.compress(y, u.Compression) - (t.OutputAtZero + t.Gain*x)
}

// compress is the rail model of Unit.Output.
func (r *Rails) compress(y, c float64) float64 {
	k := r.Knee
	soft := func(e float64) float64 { // e ≥ 0 past the edge of the knee
		if e <= k {
			return e - c*e*e/(2*k)
		}
		return k*(1-c/2) + (1-c)*(e-k)
	}
	switch hi, lo := r.High-k, r.Low+k; {
	case k > 0 && y > hi:
		y = hi + soft(y-hi)
	case k > 0 && y < lo:
		y = lo - soft(lo-y)
	}
	return math.Min(math.Max(y, r.Low), r.High)
}

// PreTrim returns the pre-trim offset and gain error as the station measures
// them: the least-squares line through the unit's output at Transfer.Points
// equally spaced inputs over [InputLow, InputHigh]; offset is its value at x = 0
// minus OutputAtZero (OutputUnit), gainError its slope/Gain − 1 (a fraction).
func (u Unit) PreTrim(b *Budget) (offset, gainError float64) {
	t := &b.Transfer
	n := t.Points
	if n < 2 {
		n = 11
	}
	// The fit of the deviation from the nominal line: its intercept is the
	// offset and its slope Gain·gainError.
	var sx, sy, sxx, sxy float64
	step := (t.InputHigh - t.InputLow) / float64(n-1)
	for i := range n {
		x := t.InputLow + float64(i)*step
		if i == n-1 {
			x = t.InputHigh
		}
		y := u.deviation(b, x)
		sx += x
		sy += y
		sxx += x * x
		sxy += x * y
	}
	fn := float64(n)
	den := fn*sxx - sx*sx
	slope := (fn*sxy - sx*sy) / den
	offset = (sy - slope*sx) / fn
	return offset, slope / t.Gain
}
