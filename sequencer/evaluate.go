package sequencer

// The arithmetic of one run: results, trim codes, limits and verdict from the
// sweeps. Nothing here does I/O, so Replay runs the very code the engine ran.

import (
	"fmt"
	"math"

	"trimline/limits"
)

// evalPre computes the pre-trim results and the trim codes from the pre-trim sweep
// into rec and res. It reports false when the run cannot go on (no usable fit, no
// trim possible, a saturated trim); the reasons are then in rec and res. It does
// no I/O, so a replay of a stored record runs the very same arithmetic.
func (e *Engine) evalPre(rec *Record, res *results, pre Sweep, trims []TrimCode) bool {
	seq := e.cfg.Sequence
	rec.Trims = trims // at least what the unit held before; codes follow when computed
	preA, ferr := e.analyse(pre, rec.RunID)
	if ferr != nil {
		res.invalidStages("pre-trim sweep: " + ferr.Error())
		return false
	}
	preFit := preA.sum
	rec.Fits = append(rec.Fits, preFit)
	e.fitResults(res, preA, ResPreOffset, ResPreGainError, ResPreNonlinearity)

	sol, err := ComputeTrim(seq.Trim, preFit.Slope, preFit.Intercept, seq.Trim.Gain.NoCorrection, seq.Trim.Offset.NoCorrection, seq.IdealGain, seq.IdealOffset)
	if err != nil {
		res.invalidStages("cannot compute trim: "+err.Error(), Adjustment, AsLeft)
		rec.Reasons = append(rec.Reasons, "cannot compute trim codes: "+err.Error())
		return false
	}
	gainU, offsetU := idealCodeU(seq.Trim, preA, sol)
	idealU := map[string]float64{DACGain: gainU, DACOffset: offsetU}
	for i := range trims {
		t := &trims[i]
		t.Ideal, t.Code, t.Saturated = sol.forDAC(t.DAC)
		t.IdealU = idealU[t.DAC]
	}
	rec.Trims = trims
	res.set(ResGainCode, float64(sol.Gain))
	res.set(ResOffsetCode, float64(sol.Offset))
	var sat []string
	for i, d := range seq.Trim.DACs() {
		if t := trims[i]; t.Saturated {
			sat = append(sat, fmt.Sprintf("%s trim needs code %.1f, outside the DAC's range 0..%d", t.DAC, t.Ideal, d.MaxCode()))
		}
	}
	if len(sat) > 0 {
		rec.Reasons = append(rec.Reasons, sat...)
		res.invalidStages("not measured: trim saturated", AsLeft)
		res.values[ResGainCode] = limits.Value{V: float64(sol.Gain), Valid: !sol.GainSat, Why: "gain trim saturated"}
		res.values[ResOffsetCode] = limits.Value{V: float64(sol.Offset), Valid: !sol.OffsetSat, Why: "offset trim saturated"}
		return false
	}
	return true
}

// evalPost computes the post-trim results from the verification sweep.
func (e *Engine) evalPost(rec *Record, res *results, post Sweep) {
	seq := e.cfg.Sequence
	postA, ferr := e.analyse(post, rec.RunID)
	if ferr != nil {
		res.invalidStages("verification sweep: "+ferr.Error(), AsLeft)
	} else {
		rec.Fits = append(rec.Fits, postA.sum)
		e.fitResults(res, postA, ResPostOffset, ResPostGainError, ResPostNonlinearity)
		// The largest deviation from the ideal transfer, with that point's own
		// uncertainty; the noise as the pooled standard deviation of the
		// readings, with u(s) ≈ s/√(2ν) (JCGM 100 E.4.3).
		imax := 0
		dev := func(p Point) float64 { return math.Abs(p.Mean - (seq.IdealGain*p.Stimulus + seq.IdealOffset)) }
		for i, p := range post.Points {
			if dev(p) > dev(post.Points[imax]) {
				imax = i
			}
		}
		u, dof := pointErrorU(post.Points[imax], postA.poolDOF)
		res.setU(ResPostMaxError, dev(post.Points[imax]), e.unc(u, dof))
		if sp, nu := pooledSD(post.Points); nu > 0 {
			res.setU(ResPostNoise, sp, e.unc(sp/math.Sqrt(2*nu), nu))
		} else {
			res.invalid(ResPostNoise, "one reading per point: no noise estimate")
		}
	}
}

// finish stores the results and judges them.
func (e *Engine) finish(rec *Record, res *results) {
	rec.Results = res.list()
	e.judge(rec, res)
}

// judge evaluates every limit and sets the verdict following the limit file's
// policy for conditional zones; earlier reasons (a saturated trim) make it FAIL.
func (e *Engine) judge(rec *Record, res *results) {
	set := e.cfg.Sequence.Limits
	rec.Coverage = e.coverage()
	rec.Outcomes = set.Judge(res.values)
	failedBefore := len(rec.Reasons) > 0
	// As-found limits first (an untrimmed value far out names an assembly fault, the
	// real cause), then what stopped the run (a saturated trim), then the rest.
	var asFound, later []string
	for _, o := range rec.Outcomes {
		if o.Pass {
			continue
		}
		r := fmt.Sprintf("limit %q: %s", o.Name, o.Reason)
		if usesStage(o.Uses, AsFound) {
			asFound = append(asFound, r)
		} else {
			later = append(later, r)
		}
	}
	rec.Reasons = append(append(asFound, rec.Reasons...), later...)
	switch overall := set.Overall(rec.Outcomes); {
	case failedBefore || overall == limits.VerdictFail:
		rec.Verdict = Fail
	case overall == limits.VerdictReview:
		rec.Verdict = Review
	default:
		rec.Verdict = Pass
	}
}

// usesStage reports whether any of the named results is of stage s.
func usesStage(names []string, s Stage) bool {
	for _, n := range names {
		if ResultStage(n) == s {
			return true
		}
	}
	return false
}

// idealCodeU propagates the pre-trim fit's uncertainty to the exact codes, to first
// order: the gain code depends on the slope, the offset code on the intercept.
func idealCodeU(t TrimPlan, a analysis, sol TrimSolution) (gainU, offsetU float64) {
	u0, u1 := math.Sqrt(a.lf.Cov[0][0]), math.Sqrt(a.lf.Cov[1][1])
	slope := a.sum.Slope
	g0 := gainFactor(t.Gain, float64(t.Gain.NoCorrection))
	g1 := gainFactor(t.Gain, float64(sol.Gain))
	// ∂(gain code)/∂a = −G·g0/(a²·LSB); with G·g0/a ≈ 1 after trim: ≈ 1/(a·LSB).
	gainU = u1 * (slope * g1 / g0) / (slope * slope * t.Gain.LSB)
	if t.OffsetBeforeGain {
		offsetU = u0 / (g0 * (slope / g0) * t.Offset.LSB)
	} else {
		offsetU = u0 * g1 / (g0 * t.Offset.LSB)
	}
	return math.Abs(gainU), math.Abs(offsetU)
}
