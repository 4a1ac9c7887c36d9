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
	gains   []int                // indexes of the gain DACs, largest step first
	offsets []int                // of the offset DACs: before the gain first, then largest step first
	coef    []budget.Coefficient // the firmware's coefficients when it trims by them
	gain    float64              // nominal gain G (output unit per input unit)
	zero    float64              // nominal output at zero input Y0
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
	if len(t.DACs) == 0 && len(t.Coefficients) > 0 {
		d.coef = t.Coefficients
	}
	return d
}

const placementBefore = "before_gain"

// step is what one DAC (or firmware coefficient) does to one unit: the exact
// code the arithmetic asks for, the code written (rounded, and clamped to the
// DAC's range unless the solve is told not to) and whether it had to clamp. For
// a coefficient Ideal is its exact value and Code is not used.
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
// have one entry per DAC (per coefficient when the design has no DACs).
func (d *design) solve(off, ge float64, z [][]float32, h how, out *after) {
	if d.coef != nil {
		out.Offset, out.GainError = d.coefficients(off, ge, h.clamp, out.Steps)
		return
	}
	a := d.gain * (1 + ge) // the slope measured with no correction
	// round picks the code for the exact ideal, as the station does.
	round := func(i int, ideal float64) (int, bool) {
		c := math.Round(ideal)
		if !h.clamp {
			return int(c), false
		}
		switch lo, hi := d.dacs[i].MinCode(), d.dacs[i].MaxCode(); {
		case c < float64(lo) || math.IsNaN(c):
			return lo, true
		case c > float64(hi):
			return hi, true
		}
		return int(c), false
	}
	// moved is the correction of DAC i at code c in its LSB, with its errors.
	moved := func(i, c int) float64 {
		x := d.dacs[i]
		v := float64(c - x.NoCorrection)
		if h.dnl && z != nil && z[i] != nil && c >= x.MinCode() && c <= x.MaxCode() {
			// The bits the analog DAC sees: the code in offset binary (a
			// two's-complement register with its top bit inverted).
			v += x.DNL * bitError(c-x.MinCode(), x.NoCorrection-x.MinCode(), z[i])
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
// k = G/a and m = Y0 − k·(Y0 + off), each computed exactly and then held in its
// own format and unit (rounded, and clamped to the format's range when clamp
// is set: saturated), as the station's coefficients step does
// (sequencer.CoefficientPlan.Values, then the format's encoding). A design with
// no gain coefficient keeps k = 1 (m = −off), one with no offset coefficient
// m = 0. steps gets each coefficient's exact value and whether it saturated.
func (d *design) coefficients(off, ge float64, clamp bool, steps []step) (offset, gainError float64) {
	k, m := 1.0, 0.0
	gi, oi := -1, -1
	for i, c := range d.coef {
		if c.Adjusts == sequencer.AdjustGain {
			gi, k = i, 1/(1+ge)
		} else {
			oi = i
		}
	}
	m = d.zero - k*(d.zero+off) // from the exact k, as the station computes both first
	hold := func(i int, v float64) float64 {
		c := d.coef[i]
		steps[i].Ideal = v
		if !clamp {
			steps[i].Saturated = false
			return c.Round(v)
		}
		held, sat := c.Hold(v)
		steps[i].Saturated = sat
		return held
	}
	if gi >= 0 {
		k = hold(gi, k)
	}
	if oi >= 0 {
		m = hold(oi, m)
	} else {
		m = 0
	}
	return k*(d.zero+off) + m - d.zero, k*(1+ge) - 1
}

// hasCoef reports whether the design has a coefficient for post-trim quantity
// q (0 the offset, 1 the gain error).
func (d *design) hasCoef(q int) bool {
	want := sequencer.AdjustOffset
	if q == 1 {
		want = sequencer.AdjustGain
	}
	return slices.ContainsFunc(d.coef, func(c budget.Coefficient) bool { return c.Adjusts == want })
}
