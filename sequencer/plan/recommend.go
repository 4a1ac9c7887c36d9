package plan

import (
	"context"
	"fmt"
	"math"
	"slices"

	"trimline/instruments/budget"
	"trimline/sequencer"
)

// The recommendation: for each DAC of the design, the fewest bits, and with
// those the smallest range (2^bits·LSB), for which the result the DAC trims
// passes its tolerance in at least the target fraction of the units, the other
// DACs as designed and the no-correction code at mid-scale. Each candidate is
// judged on the same drawn units (the first SearchTrials), trimmed as the
// station would, with the DAC's DNL (in LSB) as designed.
//
// For a given width the pass fraction grows with the LSB while the range is
// what fails (saturation) and falls once ½ LSB of rounding no longer fits the
// tolerance, so the largest useful LSB is twice the distance from zero to the
// nearer end of the tolerance: the search tries LSBs below that one for each
// width (lsbFactors), from 1 bit up; at the first width where one passes it
// steps down to a failing LSB and bisects between the two.

// searchSet is the units the search judges candidates on.
type searchSet struct {
	off, ge []float64
	z       [][][]float32
}

func (p *planner) recommend(ctx context.Context, rep *Report, target float64) error {
	s := p.searchUnits()
	// Each DAC is sized for its own result; together their failures add up
	// (at most, on the same units: the union bound). So each is sized for a
	// share of the allowed failures, 1 − (1 − target)/k with k DACs, and
	// tightened, halving the share, while the DACs together still fall short.
	perDAC := 1 - (1-target)/float64(max(len(p.d.dacs), 1))
	for round := 0; ; round++ {
		rep.Recommendations = rep.Recommendations[:0]
		for j, x := range p.d.dacs {
			r, err := p.recommendDAC(ctx, s, j, x, perDAC)
			if err != nil {
				return err
			}
			rep.Recommendations = append(rep.Recommendations, r)
		}
		rep.PerDACTarget = perDAC
		if len(rep.Recommendations) == 0 || slices.ContainsFunc(rep.Recommendations, func(r Recommendation) bool { return !r.Found }) {
			return nil
		}
		rep.AllRecommended = p.allRecommended(s, rep.Recommendations)
		rep.AllRecommendedSE = YieldSE(rep.AllRecommended, len(s.off))
		if rep.AllRecommended >= target || round == 3 {
			return nil
		}
		perDAC = 1 - (1-perDAC)/2
	}
}

// allRecommended is the fraction of the search's units that pass with every
// DAC as recommended.
func (p *planner) allRecommended(s searchSet, recs []Recommendation) float64 {
	dacs := slices.Clone(p.d.dacs)
	for j, r := range recs {
		dacs[j].Bits, dacs[j].LSB, dacs[j].NoCorrection = r.Bits, r.LSB, r.NoCorrection
	}
	d := newDesign(budget.Trim{DACs: dacs}, p.d.gain, p.d.zero)
	var out after
	out.Steps = make([]step, len(dacs))
	pass := 0
	for t := range s.off {
		d.solve(s.off[t], s.ge[t], s.z[t], how{clamp: true, dnl: true}, &out)
		if p.tol.Judge(out.Offset, out.GainError) {
			pass++
		}
	}
	return float64(pass) / float64(len(s.off))
}

// searchUnits are the first units drawn, in the order drawn.
func (p *planner) searchUnits() searchSet {
	n := len(p.z)
	return searchSet{off: p.raw[0][:n], ge: p.raw[1][:n], z: p.z}
}

// recommendDAC searches the smallest design of DAC j (designed as x).
func (p *planner) recommendDAC(ctx context.Context, s searchSet, j int, x budget.DAC, target float64) (Recommendation, error) {
	r := Recommendation{DAC: x.Name, Result: sequencer.ResPostOffset, Trials: len(s.off)}
	band, pre := p.tol.Offset, s.off
	if x.Adjusts == sequencer.AdjustGain {
		r.Result, band, pre = sequencer.ResPostGainError, p.tol.Gain, s.ge
	}
	switch {
	case !band.Bounded():
		r.Reason = fmt.Sprintf("the limit file has no tolerance on %s to size it against", r.Result)
		return r, nil
	case !band.Pass(0):
		r.Reason = fmt.Sprintf("the tolerance on %s does not include zero: no trim can centre it", r.Result)
		return r, nil
	}
	untrimmed := 0
	for _, v := range pre {
		if band.Pass(v) {
			untrimmed++
		}
	}
	if f := float64(untrimmed) / float64(len(pre)); f >= target {
		r.Reason = fmt.Sprintf("%s passes in %.2f %% of units untrimmed: this DAC is not needed for the target", r.Result, 100*f)
		return r, nil
	}
	// The largest useful LSB: ±½ LSB of rounding fits the tolerance.
	top := 2 * math.Min(-band.Lo, band.Hi)
	if x.Adjusts == sequencer.AdjustOffset && x.Placement == placementBefore {
		top /= math.Abs(p.b.Transfer.Gain)
	}
	allowed := int(math.Floor((1 - target) * float64(len(s.off))))
	try := func(bits int, lsb float64, early bool) (ok bool, pass, sat int, err error) {
		if err := ctx.Err(); err != nil {
			return false, 0, 0, err
		}
		c := x
		c.Bits, c.LSB = bits, lsb
		c.NoCorrection = c.MidCode()
		pass, sat = p.judgeDAC(s, j, c, band, early, allowed)
		return pass >= len(s.off)-allowed, pass, sat, nil
	}
	for bits := 1; bits <= sequencer.MaxDACBits; bits++ {
		hi := math.NaN()
		for _, f := range lsbFactors {
			ok, _, _, err := try(bits, top*f, true)
			if err != nil {
				return r, err
			}
			if ok {
				hi = top * f
				break
			}
		}
		if math.IsNaN(hi) {
			continue
		}
		lo := hi
		for range 80 { // step down to a failing LSB
			lo /= math.Pow(2, 0.25)
			ok, _, _, err := try(bits, lo, true)
			if err != nil {
				return r, err
			}
			if !ok {
				break
			}
			hi = lo
		}
		for range 14 {
			mid := math.Sqrt(lo * hi)
			ok, _, _, err := try(bits, mid, true)
			if err != nil {
				return r, err
			}
			if ok {
				hi = mid
			} else {
				lo = mid
			}
		}
		// Three significant digits, rounded up (a wider range), if that still passes.
		lsb := hi
		if up := roundUp3(hi); up != hi {
			if ok, _, _, err := try(bits, up, true); err != nil {
				return r, err
			} else if ok {
				lsb = up
			}
		}
		_, pass, sat, err := try(bits, lsb, false)
		if err != nil {
			return r, err
		}
		n := float64(len(s.off))
		r.Found, r.Bits, r.LSB, r.Range = true, bits, lsb, math.Ldexp(lsb, bits)
		r.NoCorrection = budget.DAC{Bits: bits, TwosComplement: x.TwosComplement}.MidCode()
		r.Pass, r.Saturation = float64(pass)/n, float64(sat)/n
		r.PassSE = YieldSE(r.Pass, len(s.off))
		return r, nil
	}
	r.Reason = fmt.Sprintf("no DAC of up to %d bits passes %s in %.2f %% of units", sequencer.MaxDACBits, r.Result, 100*target)
	return r, nil
}

// judgeDAC trims the search units with DAC j replaced by c and counts the units
// whose result (the one c trims) is inside band, and those that saturate c.
// With early it stops once more than allowed have failed.
func (p *planner) judgeDAC(s searchSet, j int, c budget.DAC, band Band, early bool, allowed int) (pass, sat int) {
	dacs := slices.Clone(p.d.dacs)
	dacs[j] = c
	d := newDesign(budget.Trim{DACs: dacs}, p.d.gain, p.d.zero)
	var out after
	out.Steps = make([]step, len(dacs))
	gain := c.Adjusts == sequencer.AdjustGain
	failed := 0
	for t := range s.off {
		d.solve(s.off[t], s.ge[t], s.z[t], how{clamp: true, dnl: true}, &out)
		v := out.Offset
		if gain {
			v = out.GainError
		}
		if band.Pass(v) {
			pass++
		} else if failed++; early && failed > allowed {
			return pass, sat
		}
		if out.Steps[j].Saturated {
			sat++
		}
	}
	return pass, sat
}

// lsbFactors are the fractions of the largest useful LSB the search tries at
// each width: finely near it, then by √2 down to 1/1000 of it (DNL, which
// grows with the LSB, or another DAC's residual can leave room only for much
// finer steps).
var lsbFactors = func() []float64 {
	fs := []float64{1, 0.9, 0.8, 0.7, 0.6, 0.5}
	for f := 0.5 / math.Sqrt2; f > 1e-3; f /= math.Sqrt2 {
		fs = append(fs, f)
	}
	return fs
}()

// roundUp3 is v rounded up to three significant digits.
func roundUp3(v float64) float64 {
	if v <= 0 || math.IsInf(v, 0) || math.IsNaN(v) {
		return v
	}
	e := math.Pow(10, math.Floor(math.Log10(v))-2)
	return math.Ceil(v/e-1e-9) * e
}
