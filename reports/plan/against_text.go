package plan

import (
	"fmt"
	"io"
	"math"
	"strings"

	"trimline/instruments/units"
)

// dash stands for a number that cannot be computed (NaN) in the text.
const dash = "—"

// WriteText writes the comparison for a terminal: a heading, per quantity the
// two sides' n, mean, SD and quantiles in one display unit (µV, ppm, codes…),
// the tests, and the finding; then the yield and saturation, and the notes. A
// number that cannot be computed is "—". Errors of w are not reported: w is a
// terminal or a buffer.
func (c Comparison) WriteText(w io.Writer) {
	fmt.Fprintf(w, "Plan against measured: %s", cmpOrDash(c.Product))
	if c.Ledger != "" {
		fmt.Fprintf(w, ", ledger %s", c.Ledger)
	}
	fmt.Fprintf(w, "\n%d unit(s) measured (each unit's latest attempt); every test at the %s level\n", c.Units, formatPercent(c.Alpha))

	for _, q := range c.Quantities {
		unit, scale := displayUnit(q)
		fmt.Fprintf(w, "\n%s — %s [%s]\n", q.Name, Describe(q.Name), unit)
		fmt.Fprintf(w, "  %-6s %12s %12s\n", "", "predicted", "measured")
		row := func(label string, p, m string) { fmt.Fprintf(w, "  %-6s %12s %12s\n", label, p, m) }
		row("n", fmt.Sprint(q.Predicted.N), fmt.Sprint(q.Measured.N))
		num := func(v float64) string { return formatNum(v / scale) }
		row("mean", num(q.Predicted.Mean), num(q.Measured.Mean))
		row("SD", num(q.Predicted.SD), num(q.Measured.SD))
		for i, p := range c.QuantileProbs {
			row(formatPercent(p), num(at(q.Predicted.Quantiles, i)), num(at(q.Measured.Quantiles, i)))
		}
		fmt.Fprintf(w, "  KS D = %s, %s; SD ratio %s, F test %s; mean difference %s, Welch %s\n",
			formatRatio(q.KSD), formatP(q.KSP), formatRatio(q.SDRatio), formatP(q.FP), formatValue(q.MeanDifference, q.Unit), formatP(q.MeanP))
		fmt.Fprintf(w, "  %s: %s\n", strings.ToUpper(q.Verdict), q.Finding)
	}

	if len(c.Proportions) > 0 {
		fmt.Fprintln(w, "\nYield and saturation")
		for _, p := range c.Proportions {
			fmt.Fprintf(w, "  %s: predicted %s", p.Name, formatPercent(p.Predicted))
			if !math.IsNaN(p.PredictedSE) {
				fmt.Fprintf(w, " ± %s", formatPercent(p.PredictedSE))
			}
			fmt.Fprintf(w, ", measured %s (%d of %d)\n", formatPercent(p.Measured), p.Count, p.N)
			fmt.Fprintf(w, "    %s: %s\n", strings.ToUpper(p.Verdict), p.Finding)
		}
	}
	if len(c.Notes) > 0 {
		fmt.Fprintln(w, "\nNotes")
		for _, n := range c.Notes {
			fmt.Fprintf(w, "  - %s\n", n)
		}
	}
}

func cmpOrDash(s string) string {
	if s == "" {
		return dash
	}
	return s
}

func at(xs []float64, i int) float64 {
	if i < len(xs) {
		return xs[i]
	}
	return math.NaN()
}

// displayUnit is the unit a quantity's table is written in and its size in
// the quantity's SI unit: a voltage with the SI prefix of the larger of its
// 5 % and 95 % quantiles (an outlier does not choose it), a ratio in ppm,
// anything else as it is.
func displayUnit(q Quantity) (string, float64) {
	switch q.Unit {
	case "ratio":
		return "ppm", 1e-6
	case "V", "A":
		mag := 0.0
		for _, s := range []Summary{q.Predicted, q.Measured} {
			for _, v := range []float64{at(s.Quantiles, 1), at(s.Quantiles, len(QuantileProbs)-2), s.Mean} {
				if !math.IsNaN(v) && !math.IsInf(v, 0) {
					mag = max(mag, math.Abs(v))
				}
			}
		}
		prefix, f := units.SIPrefix(mag)
		return prefix + q.Unit, f
	case "":
		return "number", 1
	}
	return q.Unit, 1
}

// formatNum writes a table number with four significant digits, "—" for NaN.
func formatNum(v float64) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return dash
	}
	return units.FormatSig(v, 4)
}

// formatValue writes v (SI, in unit) for a sentence: "35.2 µV", "120 ppm",
// "3 codes".
func formatValue(v float64, unit string) string {
	switch {
	case math.IsNaN(v) || math.IsInf(v, 0):
		return dash
	case canonUnit(unit) == "ratio":
		return units.FormatSig(v*1e6, 3) + " ppm"
	case unit == "code":
		return units.FormatSig(v, 3) + " codes"
	case unit == "V" || unit == "A":
		return strings.Replace(units.Format(v, unit, 3), "-", "−", 1)
	}
	return strings.TrimSpace(units.FormatSig(v, 3) + " " + unit)
}

// formatRatio writes a ratio or a statistic with two significant digits.
func formatRatio(v float64) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return dash
	}
	return units.FormatSig(v, 2)
}

// formatP writes a p-value for a sentence with two significant digits:
// "p = 0.61", "p < 0.001".
func formatP(p float64) string {
	switch {
	case math.IsNaN(p):
		return "p = " + dash
	case p < 0.001:
		return "p < 0.001"
	}
	return "p = " + units.FormatSig(p, 2)
}

// formatPercent writes a fraction as a percentage, "—" for NaN.
func formatPercent(p float64) string {
	if math.IsNaN(p) {
		return dash
	}
	return units.FormatPercent(p)
}
