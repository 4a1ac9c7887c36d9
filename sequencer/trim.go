package sequencer

import (
	"fmt"
	"math"
	"slices"
)

// Transfer model the trim arithmetic assumes (and the simulated DUT implements):
//
//	y = P + g·(core(x) + a·Din − P) + Dout
//
// with P the trim's pivot, g = Π g_i the product of the gain DACs' factors
// g_i(c) = 1 + (c − N_i)·LSB_i, Dout = Σ (c − N_i)·LSB_i over the offset DACs at
// the output and Din the same sum over the offset DACs before the gain stage
// (input-referred, so multiplied by the core slope a and by g).
//
// The sweep measured with codes c0 gives slope and intercept. The codes that give
// the ideal transfer y = G·x + Y0 follow in closed form; where several DACs trim
// the same quantity (a coarse and a fine one), the one with the largest step is
// solved first and rounded, and the next takes up what is left.

// gainFactor is g(c).
func gainFactor(d DAC, code float64) float64 {
	return 1 + (code-float64(d.NoCorrection))*d.LSB
}

// TrimPlan is the DACs one trim adjusts, about which pivot the gain DACs scale.
type TrimPlan struct {
	DACs  []DAC
	Pivot float64 // output about which the gain trim scales the signal, in the response's unit (V, A or count)
}

// DACCode is what ComputeTrim asks of one DAC.
type DACCode struct {
	Ideal     float64 // exact code the fit asks for
	Code      int     // nearest code, clamped to the DAC's range
	Saturated bool    // the ideal code is outside the DAC's range
}

// TrimSolution is what ComputeTrim found.
type TrimSolution struct {
	Codes []DACCode // one per plan DAC, in plan order
	// Predicted transfer after writing the codes (from the model, not measured).
	PredSlope, PredIntercept float64
}

// ComputeTrim returns the codes that bring a unit measured with slope (V/V) and
// intercept (V at x = 0), while its DACs held before (one code per plan DAC, in
// plan order), to the ideal gain (V/V) and offset (V); V stands for the
// stimulus's and the response's units (A or count where the product says so). A quantity no DAC adjusts
// is left as it is. It is pure arithmetic; a non-finite or non-positive-gain input
// gives an error.
func ComputeTrim(t TrimPlan, slope, intercept float64, before []int, idealGain, idealOffset float64) (TrimSolution, error) {
	s := TrimSolution{Codes: make([]DACCode, len(t.DACs))}
	if len(before) != len(t.DACs) {
		return s, fmt.Errorf("%d codes before trim for %d DACs", len(before), len(t.DACs))
	}
	if !finite(slope) || !finite(intercept) {
		return s, fmt.Errorf("fit is not finite (slope %g, intercept %g)", slope, intercept)
	}
	if slope == 0 || math.Signbit(slope) != math.Signbit(idealGain) {
		return s, fmt.Errorf("measured gain %.6g V/V has the wrong sign or is zero: the output does not follow the input", slope)
	}
	gains, offsets := t.byStep()
	g0 := 1.0
	first := true
	for _, i := range gains {
		if first {
			g0, first = gainFactor(t.DACs[i], float64(before[i])), false
		} else {
			g0 *= gainFactor(t.DACs[i], float64(before[i]))
		}
	}
	// Gain: g1·(a/g0) = G, the largest step first.
	g1 := 1.0
	if len(gains) > 0 {
		want := idealGain * g0 / slope
		first = true
		for _, i := range gains {
			d := t.DACs[i]
			rest := want
			if !first {
				rest = want / g1
			}
			c := &s.Codes[i]
			c.Ideal = float64(d.NoCorrection) + (rest-1)/d.LSB
			c.Code, c.Saturated = nearestCode(c.Ideal, d)
			if first {
				g1, first = gainFactor(d, float64(c.Code)), false
			} else {
				g1 *= gainFactor(d, float64(c.Code))
			}
		}
	} else {
		g1 = g0
	}
	aCore := slope / g0 // slope without gain trim
	s.PredSlope = aCore * g1

	P := t.Pivot
	var dOut0, dIn0 float64
	for _, i := range offsets {
		d := t.DACs[i]
		if d.BeforeGain {
			dIn0 += float64(before[i]-d.NoCorrection) * d.LSB
		} else {
			dOut0 += float64(before[i]-d.NoCorrection) * d.LSB
		}
	}
	// b = P + g0·(B0 + aCore·Din0) + Dout0  →  B0
	B0 := (intercept - P - dOut0) / g0
	if dIn0 != 0 {
		B0 -= aCore * dIn0
	}
	var dIn, dOut float64
	for _, i := range offsets {
		d := t.DACs[i]
		c := &s.Codes[i]
		if d.BeforeGain {
			// want P + g1·(B0 + aCore·Din) + Dout = Y0
			c.Ideal = float64(d.NoCorrection) + ((idealOffset-P-dOut)/g1-B0-aCore*dIn)/(aCore*d.LSB)
			c.Code, c.Saturated = nearestCode(c.Ideal, d)
			dIn += float64(c.Code-d.NoCorrection) * d.LSB
		} else {
			c.Ideal = float64(d.NoCorrection) + (idealOffset-P-g1*(B0+aCore*dIn)-dOut)/d.LSB
			c.Code, c.Saturated = nearestCode(c.Ideal, d)
			dOut += float64(c.Code-d.NoCorrection) * d.LSB
		}
	}
	if len(offsets) == 0 {
		dIn, dOut = dIn0, dOut0
	}
	s.PredIntercept = P + g1*(B0+aCore*dIn) + dOut
	return s, nil
}

// byStep returns the indexes of the gain DACs and of the offset DACs, each in
// the order they are solved: largest output step first (stable for equal steps).
func (t TrimPlan) byStep() (gains, offsets []int) {
	for i, d := range t.DACs {
		if d.Adjusts == AdjustGain {
			gains = append(gains, i)
		} else {
			offsets = append(offsets, i)
		}
	}
	// An input-referred step is compared at the output through the nominal gain
	// the DAC sees; only the order matters, so the unit's own gain is not needed.
	step := func(i int) float64 { return t.DACs[i].LSB }
	slices.SortStableFunc(gains, func(a, b int) int { return cmpDesc(step(a), step(b)) })
	slices.SortStableFunc(offsets, func(a, b int) int {
		if t.DACs[a].BeforeGain != t.DACs[b].BeforeGain {
			if t.DACs[a].BeforeGain {
				return -1 // input-referred DACs (the coarser, as a rule) first
			}
			return 1
		}
		return cmpDesc(step(a), step(b))
	})
	return gains, offsets
}

func cmpDesc(a, b float64) int {
	switch {
	case a > b:
		return -1
	case a < b:
		return 1
	}
	return 0
}

// nearestCode rounds ideal to the nearest code and clamps it to the DAC's
// range, reporting whether it had to clamp.
func nearestCode(ideal float64, d DAC) (int, bool) {
	r := math.Round(ideal)
	switch {
	case r < float64(d.MinCode()):
		return d.MinCode(), true
	case r > float64(d.MaxCode()):
		return d.MaxCode(), true
	}
	return int(r), false
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
