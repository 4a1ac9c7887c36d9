package sequencer

import (
	"fmt"
	"math"
)

// Transfer model the trim arithmetic assumes (and the simulated DUT implements):
//
//	y = P + g(cg)·(core(x) − P) + d(co)
//
// with P the gain pivot, g(c) = 1 + (c − Ng)·LSBg the gain trim factor, and the offset
// trim d(co) = (co − No)·LSBo added at the output (after the gain stage). When the
// offset DAC sits before the gain stage its LSB is input-referred and it adds
// (co − No)·LSBo to the input, so its output effect is multiplied by the whole gain
// including the gain trim.
//
// The sweep measured with codes (cg0, co0) gives slope a and intercept b. The codes
// that give the ideal transfer y = G·x + Y0 follow from it in closed form.

// gainFactor is g(c).
func gainFactor(d DAC, code float64) float64 {
	return 1 + (code-float64(d.NoCorrection))*d.LSB
}

// TrimSolution is what ComputeTrim found.
type TrimSolution struct {
	GainIdeal, OffsetIdeal float64 // exact codes the fit asks for
	Gain, Offset           int     // nearest codes, clamped to the DAC range
	GainSat, OffsetSat     bool    // the ideal code is outside the DAC range
	// Predicted transfer after writing Gain and Offset (from the model, not measured).
	PredSlope, PredIntercept float64
}

// forDAC is what the solution asks of the named DAC (DACGain or DACOffset): the
// exact code, the nearest code in range and whether it had to clamp.
func (s TrimSolution) forDAC(name string) (ideal float64, code int, saturated bool) {
	if name == DACGain {
		return s.GainIdeal, s.Gain, s.GainSat
	}
	return s.OffsetIdeal, s.Offset, s.OffsetSat
}

// ComputeTrim returns the gain and offset codes that bring a unit measured with
// slope (V/V) and intercept (V at x = 0) while its DACs held gainCode0 and
// offsetCode0 to the ideal gain (V/V) and offset (V). It is pure arithmetic; a
// non-finite or non-positive-gain input gives an error.
func ComputeTrim(t TrimPlan, slope, intercept float64, gainCode0, offsetCode0 int, idealGain, idealOffset float64) (TrimSolution, error) {
	var s TrimSolution
	if !finite(slope) || !finite(intercept) {
		return s, fmt.Errorf("fit is not finite (slope %g, intercept %g)", slope, intercept)
	}
	if slope == 0 || math.Signbit(slope) != math.Signbit(idealGain) {
		return s, fmt.Errorf("measured gain %.6g V/V has the wrong sign or is zero: the output does not follow the input", slope)
	}
	g0 := gainFactor(t.Gain, float64(gainCode0))
	// Gain: g(cg)·(a/g0) = G.
	s.GainIdeal = float64(t.Gain.NoCorrection) + (idealGain*g0/slope-1)/t.Gain.LSB
	s.Gain, s.GainSat = nearestCode(s.GainIdeal, t.Gain)
	g1 := gainFactor(t.Gain, float64(s.Gain))
	aCore := slope / g0 // slope without gain trim
	s.PredSlope = aCore * g1

	P := t.GainPivot
	dOff0 := float64(offsetCode0 - t.Offset.NoCorrection)
	if !t.OffsetBeforeGain {
		// b = P + g0·bCore + d(co0)  →  bCore = (b − P − d0)/g0
		bCore := (intercept - P - dOff0*t.Offset.LSB) / g0
		// want P + g1·bCore + (co − No)·LSB = Y0
		s.OffsetIdeal = float64(t.Offset.NoCorrection) + (idealOffset-P-g1*bCore)/t.Offset.LSB
		s.Offset, s.OffsetSat = nearestCode(s.OffsetIdeal, t.Offset)
		s.PredIntercept = P + g1*bCore + float64(s.Offset-t.Offset.NoCorrection)*t.Offset.LSB
	} else {
		// b = P + g0·(B0 + aCore·d0·LSB)  →  B0 = (b − P)/g0 − aCore·d0·LSB
		B0 := (intercept-P)/g0 - aCore*dOff0*t.Offset.LSB
		// want P + g1·(B0 + aCore·(co − No)·LSB) = Y0
		s.OffsetIdeal = float64(t.Offset.NoCorrection) + ((idealOffset-P)/g1-B0)/(aCore*t.Offset.LSB)
		s.Offset, s.OffsetSat = nearestCode(s.OffsetIdeal, t.Offset)
		s.PredIntercept = P + g1*(B0+aCore*float64(s.Offset-t.Offset.NoCorrection)*t.Offset.LSB)
	}
	return s, nil
}

// nearestCode rounds ideal to the nearest code and clamps it to 0..MaxCode,
// reporting whether it had to clamp.
func nearestCode(ideal float64, d DAC) (int, bool) {
	r := math.Round(ideal)
	switch {
	case r < 0:
		return 0, true
	case r > float64(d.MaxCode()):
		return d.MaxCode(), true
	}
	return int(r), false
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
