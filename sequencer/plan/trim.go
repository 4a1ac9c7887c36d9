package plan

// The trim arithmetic of the planner: the codes one unit needs from its
// pre-trim offset and gain error, and what is left after writing them. It is the
// arithmetic sequencer.ComputeTrim does at the station (a test checks they give
// the same codes), with what the station cannot see added: each DAC's own
// errors (DNL) and the rounding of firmware coefficients.
//
// The unit is measured with every DAC at its no-correction code; its transfer is
// y = Y0 + off + G·(1 + ge)·x. The gain DACs scale the output about Y0 (the pivot
// the demo sequences use), so y' = Y0 + g·(off + a·Din + a·x) + Dout with
// a = G·(1 + ge), g = Π (1 + (c − N)·LSB) over the gain DACs, Din and Dout the
// sums of (c − N)·LSB over the offset DACs before and after the gain stage.

import (
	"cmp"
	"math"
	"math/bits"
	"slices"

	"trimline/instruments/budget"
	"trimline/sequencer"
)

// design is a trim design as the planner solves it: the DACs in the order the
// station solves them, or the coefficient format.
type design struct {
	dacs    []budget.DAC
	gains   []int // indexes of the gain DACs, largest step first
	offsets []int // of the offset DACs: before the gain first, then largest step first
	coef    *budget.CoefficientFormat
	gain    float64 // nominal gain G (output unit per input unit)
	zero    float64 // nominal output at zero input Y0
}

// newDesign orders the DACs of t as the station's trim does (gain DACs, then
// the offset DACs before the gain stage and then those after it, each group
// largest step first, stable). With DACs the coefficients are not used (the
// station writes one or the other).
func newDesign(t budget.Trim, gain, zero float64) *design {
	d := &design{dacs: t.DACs, gain: gain, zero: zero}
	for i, x := range t.DACs {
		if x.Adjusts == sequencer.AdjustGain {
			d.gains = append(d.gains, i)
		} else {
			d.offsets = append(d.offsets, i)
		}
	}
	larger := func(a, b int) int { return cmp.Compare(t.DACs[b].LSB, t.DACs[a].LSB) }
	slices.SortStableFunc(d.gains, larger)
	slices.SortStableFunc(d.offsets, func(a, b int) int {
		if pa, pb := t.DACs[a].Placement == placementBefore, t.DACs[b].Placement == placementBefore; pa != pb {
			if pa {
				return -1
			}
			return 1
		}
		return larger(a, b)
	})
	if len(t.DACs) == 0 {
		d.coef = t.Coefficients
	}
	return d
}

const placementBefore = "before_gain"

// maxCode is the largest code of an n-bit DAC (codes run 0 … 2^n − 1).
func maxCode(n int) int { return 1<<n - 1 }

// step is what one DAC does to one unit: the exact code the arithmetic asks
// for, the code written (rounded, and clamped to the DAC's range unless the
// solve is told not to) and whether it had to clamp.
type step struct {
	Ideal     float64
	Code      int
	Saturated bool
}

// after is one unit after trim: its post-trim offset (output unit) and gain
// error (fraction), and each DAC's step (in the design's DAC order).
type after struct {
	Offset, GainError float64
	Steps             []step
}

// how says which of the real effects a solve includes: clamping to the DAC's
// range, and the DAC's own errors. Dropping them one at a time splits the
// residual into its parts (quantisation, saturation, DNL).
type how struct{ clamp, dnl bool }

// solve trims one unit measured with pre-trim offset off (output unit) and gain
// error ge (fraction). z holds the unit's DAC errors as normal scores: bit k's
// weight of DAC i is off by DNL·z[i][k] LSB (nil: ideal DACs). out.Steps must
// have one entry per DAC.
func (d *design) solve(off, ge float64, z [][]float32, h how, out *after) {
	if d.coef != nil {
		out.Offset, out.GainError = d.coefficients(off, ge)
		return
	}
	a := d.gain * (1 + ge) // the slope measured with no correction
	// round picks the code for the exact ideal, as the station does.
	round := func(i int, ideal float64) (int, bool) {
		c := math.Round(ideal)
		if !h.clamp {
			return int(c), false
		}
		switch top := float64(maxCode(d.dacs[i].Bits)); {
		case c < 0 || math.IsNaN(c):
			return 0, true
		case c > top:
			return int(top), true
		}
		return int(c), false
	}
	// moved is the correction of DAC i at code c in its LSB, with its errors.
	moved := func(i, c int) float64 {
		x := d.dacs[i]
		v := float64(c - x.NoCorrection)
		if h.dnl && z != nil && z[i] != nil && c >= 0 && c <= maxCode(x.Bits) {
			v += x.DNL * bitError(c, x.NoCorrection, z[i])
		}
		return v
	}
	// Gain: the product of the factors must be G/a, the largest step first.
	want := 1 / (1 + ge)
	g, gReal := 1.0, 1.0
	for _, i := range d.gains {
		x := d.dacs[i]
		s := &out.Steps[i]
		s.Ideal = float64(x.NoCorrection) + (want/g-1)/x.LSB
		s.Code, s.Saturated = round(i, s.Ideal)
		g *= 1 + float64(s.Code-x.NoCorrection)*x.LSB
		gReal *= 1 + moved(i, s.Code)*x.LSB
	}
	// Offset: before the gain stage first (its LSB input-referred), then after.
	var dIn, dOut, dInReal, dOutReal float64
	for _, i := range d.offsets {
		x := d.dacs[i]
		s := &out.Steps[i]
		if x.Placement == placementBefore {
			s.Ideal = float64(x.NoCorrection) + (-dOut/g-off-a*dIn)/(a*x.LSB)
			s.Code, s.Saturated = round(i, s.Ideal)
			dIn += float64(s.Code-x.NoCorrection) * x.LSB
			dInReal += moved(i, s.Code) * x.LSB
		} else {
			s.Ideal = float64(x.NoCorrection) + (-g*(off+a*dIn)-dOut)/x.LSB
			s.Code, s.Saturated = round(i, s.Ideal)
			dOut += float64(s.Code-x.NoCorrection) * x.LSB
			dOutReal += moved(i, s.Code) * x.LSB
		}
	}
	out.Offset = gReal*(off+a*dInReal) + dOutReal
	out.GainError = (1+ge)*gReal - 1
}

// bitError is how far the correction of code c from the no-correction code n
// is off, in units of the DNL σ, for an R-2R DAC whose bit k weighs
// 2^k + DNL·e[k] LSB: the sum of ±e[k] over the bits in which c and n differ.
// With each e[k] standard normal, its standard deviation is √(bits that differ). (Read as the simulated
// bench reads its dnl setting: the σ of each bit weight's error, which is the
// step error of a code that changes only the lowest bit.)
func bitError(c, n int, e []float32) float64 {
	var v float32
	for x := uint(c ^ n); x != 0; x &= x - 1 {
		k := bits.TrailingZeros(x)
		if k >= len(e) {
			break
		}
		if c>>k&1 == 1 {
			v += e[k]
		} else {
			v -= e[k]
		}
	}
	return float64(v)
}

// coefficients trims by firmware correction: the unit computes k·y + m with
// k = G/a and m = Y0 − k·(Y0 + off), each computed exactly and then rounded to
// the coefficient format on its own, as the station's coefficients step does
// (sequencer.CoefficientPlan.Values, then the format's encoding).
func (d *design) coefficients(off, ge float64) (offset, gainError float64) {
	k := 1 / (1 + ge)
	m := d.zero - k*(d.zero+off)
	k, m = roundCoefficient(*d.coef, k), roundCoefficient(*d.coef, m)
	return k*(d.zero+off) + m - d.zero, k*(1+ge) - 1
}

// roundCoefficient is v as the firmware holds it in format f: for fixed, the
// nearest multiple of 2^−FractionBits (of the SI value: volts, amperes or a
// plain factor); for float32, the nearest float32 (24 significant bits).
func roundCoefficient(f budget.CoefficientFormat, v float64) float64 {
	switch f.Format {
	case "fixed":
		s := math.Ldexp(1, f.FractionBits)
		return math.Round(v*s) / s
	case "float32":
		return float64(float32(v))
	}
	return v
}

// coefficientStep is the rounding step of format f near v: 2^−FractionBits for
// fixed, one unit in the last place of a float32 for float32.
func coefficientStep(f budget.CoefficientFormat, v float64) float64 {
	if f.Format == "fixed" {
		return math.Ldexp(1, -f.FractionBits)
	}
	x := float32(v)
	return float64(math.Nextafter32(x, float32(math.Inf(1))) - x)
}
