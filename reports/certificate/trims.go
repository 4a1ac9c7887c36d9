package certificate

import (
	"math"
	"slices"
	"strconv"

	"trimline/reports/internal/pdfdoc"
	"trimline/sequencer"
)

// trims is the table of trim codes written to the unit; with channels, a first
// column names each code's channel (a unit of four channels with one or two
// DACs each reads better so than in bands of a row or two). A unit corrected by
// firmware coefficients alone has no trim DAC: the section is left out rather
// than saying "none recorded" of codes it could never have.
func (d *doc) trims() {
	if d.byCoefficients() {
		return
	}
	cols := []pdfdoc.Column{
		{Title: "Trim DAC", W: 30, Align: "L"},
		{Title: "Code before", W: 24, Align: "R"},
		{Title: "Ideal (unrounded)", W: 30, Align: "R"},
		{Title: "Written", W: 22, Align: "R"},
		{Title: "Read back", W: 24, Align: "R"},
		{Title: "Stored", W: 24, Align: "C"},
		{Title: "Saturated", W: 26, Align: "C"},
	}
	perChannel := slices.ContainsFunc(d.rec.Trims, func(t sequencer.TrimCode) bool { return t.Channel != "" })
	if perChannel {
		cols = []pdfdoc.Column{
			{Title: "Channel", W: 16, Align: "L"},
			{Title: "Trim DAC", W: 24, Align: "L"},
			{Title: "Code before", W: 22, Align: "R"},
			{Title: "Ideal (unrounded)", W: 28, Align: "R"},
			{Title: "Written", W: 20, Align: "R"},
			{Title: "Read back", W: 22, Align: "R"},
			{Title: "Stored", W: 22, Align: "C"},
			{Title: "Saturated", W: 26, Align: "C"},
		}
	}
	var rows []pdfdoc.Row
	retrimmed := false
	for _, t := range byChannel(d, d.rec.Trims, func(t sequencer.TrimCode) string { return t.Channel }) {
		ideal := "—"
		if !math.IsNaN(t.Ideal) && !math.IsInf(t.Ideal, 0) {
			ideal = pdfdoc.Minus(strconv.FormatFloat(t.Ideal, 'f', 3, 64))
		}
		written := c1(fmtCode(t.Code), pdfdoc.Bold)
		if first, ok := d.retrimmedFrom(t); ok {
			// The trim wrote the code the fit asked for; a closed-loop re-trim
			// then moved it: the ideal beside it is the first code's.
			written = append(written, pdfdoc.Span{Text: "re-trimmed", St: pdfdoc.Small}, pdfdoc.Span{Text: "from " + fmtCode(first), St: pdfdoc.Small})
			retrimmed = true
		}
		rb := c1(fmtCode(t.Readback), pdfdoc.Body)
		switch {
		case !t.Written && !t.Stored && t.Readback == 0:
			// The run stopped before the code was written (a saturated trim, no fit):
			// the unit still holds its code from before.
			written = pdfdoc.Cell{{Text: "—", St: pdfdoc.Body}, {Text: "not written", St: pdfdoc.Small.With(pdfdoc.Muted)}}
			rb = c1("—", pdfdoc.Body)
		case t.Readback != t.Code:
			rb = pdfdoc.Cell{{Text: fmtCode(t.Readback), St: pdfdoc.Bold.With(pdfdoc.Fail)}, {Text: "differs from written", St: pdfdoc.Small.With(pdfdoc.Fail)}}
		}
		sat := c1("no", pdfdoc.Body)
		if t.Saturated {
			sat = c1("yes", pdfdoc.Bold.With(pdfdoc.Fail))
		}
		dac := c1(dash(t.DAC), pdfdoc.Bold)
		if t.Offset == sequencer.OffsetTerminal {
			dac = append(dac, pdfdoc.Span{Text: "to the terminal offset", St: pdfdoc.Small})
		}
		row := pdfdoc.Row{
			dac,
			c1(fmtCode(t.Before), pdfdoc.Body),
			c1(ideal, pdfdoc.Body),
			written,
			rb,
			c1(yesNo(t.Stored), pdfdoc.Body),
			sat,
		}
		if perChannel {
			row = append(pdfdoc.Row{c1(dash(t.Channel), pdfdoc.Body)}, row...)
		}
		rows = append(rows, row)
	}
	d.tableSection("Trim codes written", cols, rows, nil)
	if retrimmed {
		d.note("Ideal: the code the fit asked for, which the trim wrote rounded; a closed-loop re-trim then moved the code " +
			"by measuring the output (see “Re-trim passes”). Written, read back and stored: the code the unit was left with.")
	}
}

// retrimmedFrom is the code a closed-loop re-trim of t's DAC started from
// (its first pass's), when a re-trim moved t's code away from it.
func (d *doc) retrimmedFrom(t sequencer.TrimCode) (int, bool) {
	for _, p := range d.rec.Retrims {
		if p.DAC == t.DAC && p.Channel == t.Channel {
			return p.Code, p.Code != t.Code
		}
	}
	return 0, false
}
