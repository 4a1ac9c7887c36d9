package certificate

import (
	"math"
	"strconv"

	"trimline/instruments/units"

	"trimline/reports/internal/pdfdoc"
	"trimline/sequencer"
)

// coefficients is the table of the firmware correction coefficients written to
// the unit (sequencer.Record.Coefficients), shown when there are any: per
// coefficient and channel, what the fit asked for, the word written in the
// coefficient's number format and the value it stands for, the format's
// resolution, and what the unit read back.
func (d *doc) coefficients() {
	cols, rows, bands := d.coefficientTable()
	if len(rows) == 0 {
		return
	}
	d.tableSection("Correction coefficients written", cols, rows, bands)
	d.note(coefficientNote)
}

// coefficientNote is the small print under the coefficients table.
const coefficientNote = "Asked for: the exact value the fit gave, with its standard uncertainty u from the fit. " +
	"The word written is that value rounded to the nearest step of the coefficient's format (the resolution); " +
	"this rounding (rectangular, resolution/√12) is counted in the uncertainty of the results the coefficients give. " +
	"Read back: the unit's reply, which matches when it is the written word at the format's resolution."

// coefficientTable is the columns and rows of the coefficients table.
func (d *doc) coefficientTable() ([]pdfdoc.Column, []pdfdoc.Row, []pdfdoc.Band) {
	cols := []pdfdoc.Column{
		{Title: "Coefficient", W: 27, Align: "L"},
		{Title: "Format", W: 20, Align: "L"},
		{Title: "Asked for (ideal ± u)", W: 33, Align: "R"},
		{Title: "Word written", W: 21, Align: "L", Gap: 3},
		{Title: "Stands for", W: 23, Align: "R"},
		{Title: "Resolution", W: 18, Align: "R"},
		{Title: "Read back", W: 21, Align: "L", Gap: 3},
		{Title: "Match", W: 17, Align: "C"},
	}
	var rows []pdfdoc.Row
	var bands channelBands
	for _, c := range byChannel(d, d.rec.Coefficients, func(c sequencer.CoefficientWrite) string { return c.Channel }) {
		bands.row(len(rows), c.Channel)
		about := "adjusts " + dash(c.Adjusts)
		if u := dispUnit(c.Unit); u != "" {
			about += ", in " + u
		}
		name := pdfdoc.Cell{{Text: dash(c.Name), St: pdfdoc.Bold}, {Text: about, St: pdfdoc.Small}}

		word := c1(dash(c.Text), stMono)
		stands := c1(fmtCoef(c.Value, c.Resolution), pdfdoc.Body)
		rb := c1(dash(c.Readback), stMono)
		match := c1("yes", pdfdoc.Bold.With(pdfdoc.Pass))
		switch {
		case !c.Written:
			word = pdfdoc.Cell{{Text: "—", St: pdfdoc.Body}, {Text: "not written", St: pdfdoc.Small.With(pdfdoc.Muted)}}
			stands = c1("—", pdfdoc.Body)
			rb, match = c1("—", pdfdoc.Body), c1("—", pdfdoc.Body)
		case !c.Match:
			rb = append(rb, pdfdoc.Span{Text: "= " + fmtCoef(c.ReadbackValue, c.Resolution), St: pdfdoc.Small.With(pdfdoc.Fail)})
			match = pdfdoc.Cell{{Text: "NO", St: pdfdoc.Bold.With(pdfdoc.Fail)}, {Text: "differs from written", St: pdfdoc.Small.With(pdfdoc.Fail)}}
		}
		res := "—"
		if c.Resolution > 0 && finite(c.Resolution) {
			res = units.FormatSig(c.Resolution, 4)
		}
		rows = append(rows, pdfdoc.Row{
			name,
			c1(dash(c.Format), pdfdoc.Body),
			c1(fmtAsked(c), pdfdoc.Body),
			word,
			stands,
			c1(res, pdfdoc.Body),
			rb,
			match,
		})
	}
	return cols, rows, bands.get()
}

// fmtAsked writes what the fit asked of a coefficient: "1.002346 ± 0.000012"
// (u, the standard uncertainty, to two digits), or the value alone to the
// format's resolution when u was not evaluated.
func fmtAsked(c sequencer.CoefficientWrite) string {
	if !finite(c.Ideal) {
		return "not valid"
	}
	if hasU(c.IdealU) {
		return fmtWithU(c.Ideal, c.IdealU, "")
	}
	return fmtCoef(c.Ideal, c.Resolution)
}

// fmtCoef writes a coefficient's value to one decimal finer than the format's
// resolution, so that the rounding to the format shows: 1.0023499 with a
// resolution of 6.1e-5 is "1.002350"; with no resolution, seven significant
// digits.
func fmtCoef(v, res float64) string {
	if !finite(v) {
		return "not valid"
	}
	var s string
	if res > 0 && finite(res) {
		dec := int(math.Ceil(-math.Log10(res))) + 1
		s = fmtDec(v, max(0, min(dec, 15)))
	} else {
		s = pdfdoc.Minus(strconv.FormatFloat(v, 'g', 7, 64))
	}
	return s
}
