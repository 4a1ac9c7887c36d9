// Package plan writes the trim planner's report (sequencer/plan): as text for a
// terminal (WriteText) and as an A4 PDF with the histograms (WritePDF,
// WriteFile).
package plan

import (
	"fmt"
	"io"
	"maps"
	"math"
	"slices"
	"strconv"
	"strings"
	"text/tabwriter"

	"trimline/instruments/budget"
	"trimline/instruments/numfmt"
	"trimline/instruments/units"
	"trimline/limits"
	"trimline/sequencer"
	planner "trimline/sequencer/plan"
)

// WriteText writes r for a designer at a terminal: the Monte Carlo run, the
// pre-trim quantities (Monte Carlo beside the law of propagation and the worst
// case, and the largest contributions), the codes each DAC will need and how
// often it saturates, what is left after trim (with the common-practice ½ LSB
// figure beside, labelled so), the predicted yield against the limit file and
// the recommendation. Errors of w are not reported: w is a terminal or a buffer.
func WriteText(w io.Writer, r *planner.Report) {
	b := r.Budget
	title := "Trim plan of " + orNone(b.Product)
	if b.Revision != "" {
		title += " rev " + b.Revision
	}
	fmt.Fprintf(w, "%s (budget %s)\n", title, b.Path)
	fmt.Fprintf(w, "Monte Carlo: %d units drawn, seed %d; the adaptive rule (JCGM 101:2008 §7.9) held the pre-trim\n", r.Trials, r.Seed)
	fmt.Fprintf(w, "quantities to %d significant digits after %d", r.Digits, r.AdaptiveTrials)
	if r.Trials > r.AdaptiveTrials {
		fmt.Fprintf(w, "; drawn on to %d for the yield", r.Trials)
	}
	fmt.Fprintln(w, ".")

	fmt.Fprintln(w, "\nBefore trim (as the station's pre-trim fit measures it)")
	t := table(w)
	fmt.Fprintln(t, "  \tmean\tsd\t95 % interval (Monte Carlo)\t95 % interval (law of propagation)\tworst case¹")
	for _, q := range r.Pre {
		s := scaleOf(q)
		fmt.Fprintf(t, "  %s\t%s\t%s\t%s\t%s\t%s\n", q.Name, s.f(q.Mean), s.f(q.SD), s.pair(&q.Interval95), s.pair(q.GUM95), s.pair(q.WorstCase))
	}
	t.Flush()
	fmt.Fprintln(w, "  ¹ every bounded source at an end of its range, every normal one at ±3σ")
	for _, q := range r.Pre {
		if len(q.Shares) > 0 && q.SD > 0 { // no spread, no shares (only rounding noise)
			fmt.Fprintf(w, "  %s, share of the variance (law of propagation): %s\n", q.Name, sharesText(q.Shares, 5))
		}
	}

	if len(r.DACs) > 0 {
		fmt.Fprintln(w, "\nTrim DACs (the design in the budget)")
		t = table(w)
		fmt.Fprintln(t, "  DAC\tadjusts\tbits\tLSB\trange\tcodes needed (95 %)\tworst case (unclamped)\tsaturates")
		for i, d := range r.DACs {
			x, c := d.DAC, r.Codes[i]
			fmt.Fprintf(t, "  %s\t%s\t%d\t%s\t%s\t%s\t%s\t%s\n", x.Name, adjustsText(x), x.Bits, lsbText(r, x),
				rangeText(r, x.Bits, x.LSB, x.NoCorrection, x), codePair(&c.Interval95), codePair(c.WorstCase),
				percentSE(d.Saturation, d.SaturationSE))
		}
		t.Flush()
	}
	if len(r.Coefficients) > 0 {
		fmt.Fprintf(w, "\nFirmware coefficients: %s (corrected = k·raw + m)\n", coefficientsText(r.Coefficients))
	}

	left, rule := "rounding to a code, saturation, DNL", "u = LSB/√12"
	if len(r.Coefficients) > 0 {
		left, rule = "the rounding of the coefficients", "u = step/√12"
	}
	fmt.Fprintf(w, "\nAfter trim (what is left: %s)\n", left)
	t = table(w)
	fmt.Fprintf(t, "  \tmean\tsd\t95 %% interval (Monte Carlo)\t±1.96·u, %s (common practice)²\tparts of the variance\n", rule)
	for _, q := range r.Post {
		s := scaleOf(q)
		fmt.Fprintf(t, "  %s\t%s\t%s\t%s\t%s\t%s\n", q.Name, s.f(q.Mean), s.f(q.SD), s.pair(&q.Interval95), s.pair(q.GUM95), sharesText(q.Shares, 3))
	}
	t.Flush()
	fmt.Fprintln(w, "  ² the rounding of the finest DAC (or coefficient) alone, uniform over ±½ LSB; DNL and saturation left out")

	defer func() {
		if len(r.Notes) > 0 {
			fmt.Fprintln(w, "\nNotes")
			for _, n := range r.Notes {
				fmt.Fprintf(w, "  - %s\n", n)
			}
		}
	}()
	tol := r.Tolerances
	if tol == nil {
		fmt.Fprintln(w, "\nYield: not predicted (the budget names no limit file)")
		return
	}
	fmt.Fprintf(w, "\nPredicted yield against %s\n", tol.File)
	fmt.Fprintf(w, "  Only %s and %s are predicted; each judged on its tolerance itself (no guard band, no\n", sequencer.ResPostOffset, sequencer.ResPostGainError)
	fmt.Fprintln(w, "  measurement uncertainty: the units as they are, not as the station would measure them).")
	t = table(w)
	for _, x := range []struct {
		band planner.Band
		name string
		pass float64
		q    planner.Quantity
	}{{tol.Offset, sequencer.ResPostOffset, r.OffsetPass, r.Post[0]}, {tol.Gain, sequencer.ResPostGainError, r.GainPass, r.Post[1]}} {
		lim := "no limit"
		if len(x.band.Limits) > 0 {
			lim = strings.Join(x.band.Limits, ", ")
		}
		fmt.Fprintf(t, "  %s\t%s\t%s\tpass %s\n", x.name, lim, bandText(x.band), percent(x.pass))
	}
	fmt.Fprintf(t, "  all judged (%s)\t\t\t%s\n", strings.Join(r.Judged, ", "), yieldText(r.Yield, r.YieldSE, r.Trials))
	t.Flush()
	if len(tol.ExpressionOnly) > 0 {
		fmt.Fprintf(w, "  not read as bounds (judged by an expression): %s\n", strings.Join(tol.ExpressionOnly, ", "))
	}
	if len(tol.NotPredicted) > 0 {
		fmt.Fprintf(w, "  not predicted (other results): %s\n", strings.Join(tol.NotPredicted, ", "))
	}

	if r.TargetYield > 0 && len(r.Recommendations) > 0 {
		fmt.Fprintf(w, "\nRecommendation for a yield of %s: per DAC the fewest bits, then the smallest range,\n", percent(r.TargetYield))
		fmt.Fprintf(w, "for which the result it trims passes in %s of units, its share of the allowed failures so that\n", percent(r.PerDACTarget))
		fmt.Fprintln(w, "together they meet the target (the other DACs as designed, no-correction code at mid-scale;")
		fmt.Fprintf(w, "judged on the first %d units drawn)\n", r.Recommendations[0].Trials)
		t = table(w)
		fmt.Fprintln(t, "  DAC\tbits\tLSB\trange\tresult\tpasses\tsaturates")
		for i, rec := range r.Recommendations {
			if !rec.Found {
				fmt.Fprintf(t, "  %s\t%s\n", rec.DAC, rec.Reason)
				continue
			}
			x := r.DACs[i].DAC
			fmt.Fprintf(t, "  %s\t%d\t%s\t%s\t%s\t%s\t%s\n", rec.DAC, rec.Bits, lsbValue(r, x, rec.LSB),
				rangeText(r, rec.Bits, rec.LSB, rec.NoCorrection, x), rec.Result, percentSE(rec.Pass, rec.PassSE), percent(rec.Saturation))
		}
		t.Flush()
		if !math.IsNaN(r.AllRecommended) {
			fmt.Fprintf(w, "  every DAC as recommended: all predicted results pass in %s\n", percentSE(r.AllRecommended, r.AllRecommendedSE))
		}
	}
}

type (
	budgetDAC = budget.DAC
)

func inUnit(v float64, unit string) float64 { return limits.InUnit(v, unit) }

func table(w io.Writer) *tabwriter.Writer { return tabwriter.NewWriter(w, 0, 0, 2, ' ', 0) }

// scale writes the numbers of one quantity in one display unit, each with
// the decimals that give its spread three significant digits (dec < 0: three
// significant digits of each number).
type scale struct {
	factor float64
	unit   string
	dec    int
}

// scaleOf picks the display unit of q from its spread: an SI prefix for volts
// and amperes, ppm or % for a ratio, none for a code; and the decimals from
// its standard deviation (or, with none, the common-practice interval).
func scaleOf(q planner.Quantity) scale {
	spread := q.SD
	if spread == 0 && q.GUM95 != nil {
		spread = q.GUM95[1] - q.GUM95[0]
	}
	s := scaleFor(q.Unit, math.Max(spread, math.Abs(q.Mean)))
	if spread > 0 && spread/s.factor >= 1e-6 { // below, the spread is rounding noise
		s.dec = min(9, max(0, 2-int(math.Floor(math.Log10(spread/s.factor)))))
	}
	return s
}

func scaleFor(unit string, mag float64) scale {
	switch unit {
	case "ratio":
		if mag >= 1e-3 {
			return scale{1e-2, "%", -1}
		}
		return scale{1e-6, "ppm", -1}
	case "code", "":
		return scale{1, "", -1}
	}
	p, f := units.SIPrefix(mag)
	return scale{f, p + unit, -1}
}

// num writes v in the scale's unit, without the unit.
func (s scale) num(v float64) string {
	if math.Abs(v/s.factor) < 1e-9 { // rounding noise of a quantity no source moves
		v = 0
	}
	if s.dec < 0 {
		return units.FormatSig(v/s.factor, 3)
	}
	t := strconv.FormatFloat(v/s.factor, 'f', s.dec, 64)
	if strings.Trim(t, "-0.") == "" {
		t = strings.TrimPrefix(t, "-")
	}
	return strings.Replace(t, "-", "−", 1)
}

// f writes v in the scale's unit.
func (s scale) f(v float64) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return dash
	}
	return strings.TrimSpace(s.num(v) + " " + s.unit)
}

func (s scale) pair(p *[2]float64) string {
	if p == nil {
		return dash
	}
	return s.num(p[0]) + " … " + s.f(p[1])
}

func codePair(p *[2]float64) string {
	if p == nil {
		return dash
	}
	return fmt.Sprintf("%s … %s", units.FormatSig(math.Round(p[0]), 6), units.FormatSig(math.Round(p[1]), 6))
}

// lsbText is the DAC's LSB as its file writes it: in the output's unit after
// the gain, the input's before it, a fraction for gain.
func lsbText(r *planner.Report, x budgetDAC) string { return lsbValue(r, x, x.LSB) }

func lsbValue(r *planner.Report, x budgetDAC, lsb float64) string {
	return scaleFor(lsbUnit(r, x), lsb).f(lsb)
}

// lsbUnit is the unit of an LSB of x.
func lsbUnit(r *planner.Report, x budgetDAC) string { return planner.LSBUnit(r.Budget, x) }

// rangeText is the correction the DAC can apply, from code 0 to 2^bits − 1
// about the no-correction code n.
func rangeText(r *planner.Report, bits int, lsb float64, n int, x budgetDAC) string {
	c := budget.DAC{Bits: bits, TwosComplement: x.TwosComplement}
	lo, hi := float64(c.MinCode()-n)*lsb, float64(c.MaxCode()-n)*lsb
	s := scaleFor(lsbUnit(r, x), math.Max(-lo, hi))
	return s.pair(&[2]float64{lo, hi})
}

func adjustsText(x budgetDAC) string {
	if x.Adjusts == sequencer.AdjustGain {
		return "gain"
	}
	if x.Placement == "before_gain" {
		return "offset, before gain"
	}
	return "offset, after gain"
}

// coefficientsText names each coefficient with its format, the offset's unit
// and the fraction of units that saturate it.
func coefficientsText(cs []planner.CoefficientPlan) string {
	var parts []string
	for _, c := range cs {
		x := c.Coefficient
		t := x.Name + " " + x.FormatName
		if x.Unit != "" {
			t += " in " + x.Unit
		}
		if x.Format.Kind != numfmt.Float32 {
			lo, _ := x.Format.Range()
			t += fmt.Sprintf(" from %s to %s − 2^−%d", units.FormatSig(lo, 6), units.FormatSig(-lo, 6), x.Format.Frac)
			if x.Unit != "" {
				t += " " + x.Unit
			}
			t += ", saturates " + percentSE(c.Saturation, c.SaturationSE)
		}
		parts = append(parts, t)
	}
	return strings.Join(parts, "; ")
}

// bandText is what a band accepts, in the unit of its first limit.
func bandText(b planner.Band) string {
	if !b.Bounded() {
		return "any"
	}
	u := b.Unit
	f := func(v float64) string { return units.FormatSig(inUnit(v, u), 4) }
	switch {
	case math.IsInf(b.Lo, -1):
		return "≤ " + f(b.Hi) + " " + units.Display(u)
	case math.IsInf(b.Hi, 1):
		return "≥ " + f(b.Lo) + " " + units.Display(u)
	}
	return f(b.Lo) + " … " + f(b.Hi) + " " + units.Display(u)
}

// sharesText lists the n largest shares, largest first, as percentages.
func sharesText(sh map[string]float64, n int) string {
	if len(sh) == 0 {
		return dash
	}
	names := slices.Sorted(maps.Keys(sh))
	slices.SortStableFunc(names, func(a, b string) int {
		switch {
		case sh[a] > sh[b]:
			return -1
		case sh[a] < sh[b]:
			return 1
		}
		return 0
	})
	var parts []string
	rest := 0
	for _, k := range names {
		if len(parts) == n || math.Abs(sh[k]) < 5e-5 {
			rest++
			continue
		}
		parts = append(parts, k+" "+shareText(sh[k]))
	}
	if rest > 0 {
		parts = append(parts, fmt.Sprintf("%d more", rest))
	}
	return strings.Join(parts, ", ")
}

// shareText writes a share of the variance with two significant digits.
func shareText(v float64) string {
	if v >= 0.995 {
		return "100 %"
	}
	return units.FormatSig(100*v, 2) + " %"
}

// percent writes a fraction as a percentage: near 100 % with enough decimals
// that what fails shows two significant digits (99.97 %, 99.9982 %), at most
// four; below 10 % with two significant digits.
func percent(p float64) string {
	if math.IsNaN(p) {
		return dash
	}
	v := 100 * p
	if v < 10 {
		return units.FormatSig(v, 2) + " %"
	}
	if p == 1 {
		return "100 %"
	}
	dec := 2
	if miss := 100 - v; miss > 0 {
		dec = min(4, max(2, 1-int(math.Floor(math.Log10(miss)))))
	}
	return strconv.FormatFloat(v, 'f', dec, 64) + " %"
}

// percentSE writes a fraction with its standard error; one estimated as 0 or
// 1 has none (its standard error is 0), and is written as such.
func percentSE(p, se float64) string {
	switch {
	case math.IsNaN(p):
		return dash
	case p == 0:
		return "0 % (none)"
	case p == 1:
		return "100 % (all)"
	}
	return percent(p) + " ± " + units.FormatSig(100*se, 2) + " %"
}

func orNone(s string) string { return orDefault(s, "(no product)") }

func orDefault(s, d string) string {
	if s == "" {
		return d
	}
	return s
}

// yieldText is a predicted yield over m units with its standard error, or in
// words when every unit or none passed (its standard error is then 0).
func yieldText(p, se float64, m int) string {
	switch {
	case math.IsNaN(p):
		return dash
	case p == 1:
		return fmt.Sprintf("100 %% (every one of the %d units drawn passed)", m)
	case p == 0:
		return fmt.Sprintf("0 %% (none of the %d units drawn passed)", m)
	}
	return percentSE(p, se) + " (± one standard error, √(p(1 − p)/M))"
}
