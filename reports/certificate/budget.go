package certificate

import (
	"math"
	"strconv"
	"strings"

	"trimline/instruments/units"
	"trimline/reports/internal/pdfdoc"
	"trimline/sequencer"
)

// The uncertainty budget: for every result whose record carries one
// (sequencer.Result.Budget), each input quantity with its standard uncertainty,
// sensitivity coefficient, contribution and share of the variance (JCGM 100
// §5.1.3, eq. (10)), and the combined, expanded uncertainty the record states.
// The certificate prints the record's numbers; `trimline check` prints the same
// text for the budgets on paper (BudgetText).

// BudgetColumns are the titles of BudgetText's columns.
var BudgetColumns = []string{"Input quantity", "Type", "u(x)", "Sensitivity c", "Contribution |c|·u(x)", "ν", "Share of u²"}

// BudgetText is r's budget as text, a row per input (columns BudgetColumns) in
// the record's order, then the line of the combined uncertainty: "combined u",
// "", "", "", u, νeff, "100 %", u the law of propagation's, the root sum of
// the rows' squares (JCGM 100 §5.1.3, eq. (10)) with its Welch–Satterthwaite
// νeff. For a result whose uncertainty is by Monte Carlo (r.Unc.MC) the rows
// and that line are the GUM's account (MCInterval.GUMStd), and a last line
// "Monte Carlo u", "", "", "", u of the model values, "—", "" gives the u the
// result states, beside no νeff: the Monte Carlo k comes from its coverage
// interval (JCGM 101:2008 §7.7/§7.8), not from ν. An input that does not move the result (a
// sensitivity of 0, such as the source's gain for an offset at zero stimulus)
// is left out; zero is how many. Per-point inputs (repeatability, resolution)
// say "per point (n)" for their sensitivity: each point has its own weight in
// the fit. It returns no rows when r has no budget or no evaluated uncertainty.
func BudgetText(r sequencer.Result) (rows [][]string, zero int) {
	if len(r.Budget) == 0 || !r.Valid || !hasU(r.Unc.Expanded) {
		return nil, 0
	}
	for _, b := range r.Budget {
		if b.U == 0 {
			zero++
			continue
		}
		sens := sensitivityText(b.Sensitivity, r.Unit, b.InputUnit)
		if b.Points > 0 {
			sens = "per point (" + strconv.Itoa(b.Points) + ")"
		}
		rows = append(rows, []string{b.Name, b.Kind, inputText(b.InputU, b.InputUnit), sens,
			contributionText(b.U, r.Unit), dofText(b.DOF), shareText(b.Share)})
	}
	if mc := r.Unc.MC; mc != nil {
		rows = append(rows, []string{"combined u", "", "", "", contributionText(mc.GUMStd, r.Unit), dofText(r.Unc.DOF), "100 %"},
			[]string{"Monte Carlo u", "", "", "", contributionText(r.Unc.Std, r.Unit), "—", ""})
		return rows, zero
	}
	rows = append(rows, []string{"combined u", "", "", "", contributionText(r.Unc.Std, r.Unit), dofText(r.Unc.DOF), "100 %"})
	return rows, zero
}

// BudgetGUMFoot is the law of propagation's expanded uncertainty under a Monte
// Carlo result's combined u: "GUM U = 230 µV, k = 2.03" (the law of propagation), U
// by the one rounding (JCGM 100 §7.2.6), k = U/u with k from νeff. "" for a
// result without a Monte Carlo interval.
func BudgetGUMFoot(r sequencer.Result) string {
	mc := r.Unc.MC
	if mc == nil || !(mc.GUMStd > 0) || !(mc.GUMExpanded > 0) {
		return ""
	}
	res := r
	res.Unc = sequencer.Uncertainty{Std: mc.GUMStd, Expanded: mc.GUMExpanded, K: mc.GUMExpanded / mc.GUMStd}
	return "GUM " + BudgetFoot(res)
}

// BudgetFoot is the expanded uncertainty under r's budget, "U = 160 µV,
// k = 2.00", U written as the certificate states it beside the value (the
// same rounding, JCGM 100 §7.2.6), so that one quantity has one number. For
// a Monte Carlo result it is under the Monte Carlo u and names the interval:
// "U = 110 µV, k = 2.06, symmetric interval".
func BudgetFoot(r sequencer.Result) string {
	u := contributionText(r.Unc.Expanded, r.Unit)
	if s := fmtResultU(r); strings.Contains(s, " ± ") {
		_, u, _ = strings.Cut(s, " ± ")
	}
	foot := "U = " + u + ", " + fmtK(r.Unc.K)
	if mc := r.Unc.MC; mc != nil && mc.Interval != "" {
		foot += ", " + mc.Interval + " interval"
	}
	return foot
}

// budgetFoot is BudgetFoot with U as the results table writes it (sh).
func (d *doc) budgetFoot(r sequencer.Result, sh shown) string {
	foot := BudgetFoot(r)
	if _, u, ok := strings.Cut(sh.withU, " ± "); ok {
		_, rest, _ := strings.Cut(foot, ", ")
		foot = "U = " + u + ", " + rest
	}
	return foot
}

// mcNote is said under a budget whose result's uncertainty is a Monte Carlo
// one (sequencer.Uncertainty.Method "MC").
const mcNote = " Where u is by Monte Carlo (JCGM 101:2008), the rows and the combined u are the law of propagation's account of where it comes from; " +
	"the line “Monte Carlo u” is the standard deviation of the model values, and its U and k come from the coverage interval (JCGM 101:2008 §7.7, §7.8), not from νeff."

// inputText writes an input's standard uncertainty in its unit: volts and
// amperes with an SI prefix, a relative quantity in ppm, counts bare.
func inputText(v float64, unit string) string {
	switch unit {
	case "1":
		return pdfdoc.Minus(units.Format(v*1e6, "ppm", 3))
	case "count":
		return countText(units.FormatSig(v, 3))
	}
	return pdfdoc.Minus(units.Format(v, unit, 3))
}

// contributionText writes a contribution in the result's unit: volts and
// amperes with an SI prefix, ratios in ppm.
func contributionText(v float64, resultUnit string) string {
	if !finite(v) {
		return "—"
	}
	switch resultUnit {
	case "ratio":
		return pdfdoc.Minus(units.Format(v*1e6, "ppm", 3))
	case "count", "code":
		return countText(units.FormatSig(v, 3))
	case "V", "A":
		return pdfdoc.Minus(units.Format(v, resultUnit, 3))
	}
	return pdfdoc.Minus(units.FormatSig(v, 3))
}

// sensitivityText writes a sensitivity coefficient, the result's change per
// unit of the input, in the units its two sides are printed in: "−200 V/V"
// (an output offset per input offset), "−2.5 µV/ppm" (an offset per relative
// gain error), "−1 ppm/ppm" (a gain error per gain error), "0.5 ppm/µV".
func sensitivityText(c float64, resultUnit, inputUnit string) string {
	num := func(v float64) string { return pdfdoc.Minus(units.FormatSig(v, 4)) }
	if c == 0 {
		return "0"
	}
	rel := resultUnit == "ratio"
	switch {
	case inputUnit == "1" && rel:
		return num(c) + " ppm/ppm"
	case inputUnit == "1" && (resultUnit == "V" || resultUnit == "A"):
		return pdfdoc.Minus(units.Format(c*1e-6, resultUnit, 3)) + "/ppm"
	case inputUnit == "1":
		return num(c*1e-6) + " " + dispUnit(resultUnit) + "/ppm"
	case rel && (inputUnit == "V" || inputUnit == "A"):
		return num(c) + " ppm/µ" + inputUnit
	case rel:
		return num(c*1e6) + " ppm/" + dispUnit(inputUnit)
	case resultUnit == "count" && inputUnit == "count":
		return num(c)
	}
	return num(c) + " " + resultUnit + "/" + inputUnit
}

// dofText writes degrees of freedom as the certificate's νeff does: "∞",
// whole numbers below 1000, "≥ 1000" from there on (the coverage factor no
// longer depends on them).
func dofText(dof float64) string {
	switch {
	case math.IsInf(dof, 1):
		return "∞"
	case math.IsNaN(dof) || dof <= 0:
		return "—"
	case dof >= 1000:
		return "≥ 1000"
	}
	return strconv.FormatFloat(math.Floor(dof), 'f', 0, 64)
}

// shareText writes a share of the variance as a percentage with one decimal,
// "< 0.1 %" for a share that would print as 0.0.
func shareText(s float64) string {
	switch {
	case !finite(s):
		return "—"
	case s > 0 && s < 0.0005:
		return "< 0.1 %"
	}
	return strconv.FormatFloat(s*100, 'f', 1, 64) + " %"
}

// budgets is the "Uncertainty budget" table: a band per result with a budget,
// judged results first in the order of the results table, then its inputs and
// its combined uncertainty, whose first cell also says U and k.
func (d *doc) budgets() ([]pdfdoc.Column, []pdfdoc.Row, []pdfdoc.Band, string) {
	cols := []pdfdoc.Column{
		{Title: BudgetColumns[0], W: 40, Align: "L"},
		{Title: BudgetColumns[1], W: 12, Align: "C"},
		{Title: BudgetColumns[2], W: 24, Align: "R"},
		{Title: BudgetColumns[3], W: 30, Align: "R"},
		{Title: BudgetColumns[4], W: 32, Align: "R"},
		{Title: BudgetColumns[5], W: 20, Align: "R"},
		{Title: BudgetColumns[6], W: 22, Align: "R"},
	}
	var rows []pdfdoc.Row
	var bands []pdfdoc.Band
	left, mc := 0, false
	for _, r := range byChannel(d, d.rec.Results, func(r sequencer.Result) string { return r.Channel }) {
		text, zero := BudgetText(r)
		if !r.Valid || len(text) == 0 {
			continue
		}
		left += zero
		mc = mc || r.Unc.Method == "MC"
		title := r.Name + " · " + stageWord(stageOf(d.rec, r.Name))
		if r.Channel != "" {
			title += " · " + chanWord(r.Channel)
		}
		sh := d.shown(r) // the result as the results table writes it
		bands = append(bands, pdfdoc.Band{At: len(rows), Title: title + " · " + sh.withU})
		for _, t := range text {
			row := make(pdfdoc.Row, len(t))
			for j, s := range t {
				row[j] = c1(s, pdfdoc.Body)
			}
			switch {
			case t[0] == "Monte Carlo u": // the result's u, beside no νeff
				row[0] = pdfdoc.Cell{{Text: t[0], St: pdfdoc.Bold}, {Text: d.budgetFoot(r, sh), St: pdfdoc.Small}}
				row[4], row[5] = c1(t[4], pdfdoc.Bold), c1("", pdfdoc.Body)
			case t[0] == "combined u":
				foot := d.budgetFoot(r, sh)
				if g := BudgetGUMFoot(r); g != "" {
					foot = g
				}
				row[0] = pdfdoc.Cell{{Text: t[0], St: pdfdoc.Bold}, {Text: foot, St: pdfdoc.Small}}
				row[4], row[5] = c1(t[4], pdfdoc.Bold), c1("νeff "+t[5], pdfdoc.Body)
			}
			rows = append(rows, row)
		}
	}
	note := "The rows are independent: each contributes |c|·u(x) and u is the root sum of their squares (JCGM 100 §5.1.3, eq. (10)); " +
		"a specification ±a is taken as rectangular, u(x) = a/√3 (JCGM 100 §4.3.7); νeff by Welch–Satterthwaite (JCGM 100 G.2b). "
	if d.rec.Metrology >= 1 {
		note += "Repeatability is one Type A input, the pooled standard deviation of the readings, with ν = Σ(nᵢ − 1) counted once (JCGM 100 G.4.1); " +
			"it enters each sweep point's mean with that point's weight in the fit, and its u(x) is a point's. " +
			"Resolution is an input per sweep point, each with its own weight."
	} else {
		note += "Repeatability and resolution are one input per sweep point, each with its own weight in the fit; their u(x) is a point's."
	}
	if left > 0 {
		note += " Inputs with sensitivity 0 (for an offset at zero input the source's gain; for a gain the offsets) are not listed."
	}
	if mc {
		note += mcNote
	}
	return cols, rows, bands, note
}
