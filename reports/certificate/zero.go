package certificate

import (
	"fmt"
	"strings"

	"trimline/reports/internal/pdfdoc"
	"trimline/sequencer"
)

// zeros is the table of the run's zero checks (sequencer.Record.Zeros), shown
// when there are any: per check, the source checked, the readings in each state,
// the measured source offset ô_s at the input with its expanded uncertainty, the
// same at the output, and the fits that used it in place of the source's offset
// spec. It prints what the record says; it computes nothing but ô_s·G.
func (d *doc) zeros() {
	cols, rows := d.zeroTable()
	if len(rows) == 0 {
		return
	}
	d.tableSection("Station zero", cols, rows, nil)
	d.note("ô_s: the stimulus the station delivers at a programmed 0 (the source's own offset and the thermal EMFs " +
		"of its wiring), from the unit's output at 0 V programmed less its output with the input shorted (source output " +
		"off), divided by the ideal gain G; the unit's and the meter's offsets cancel in the difference. Its uncertainty: the " +
		"readings' scatter (Type A, JCGM 100 §4.2) and the meter's resolution, Welch–Satterthwaite degrees of freedom. In the fits listed the levels were corrected by ô_s and its " +
		"uncertainty replaced the source's offset specification (rectangular, JCGM 100 §4.3.7) in the budget; the meter's " +
		"offset and both instruments' gains are not covered by the check and stay in it.")
}

// zeroTable is the columns and rows of the station-zero table. ô_s at the
// input, when the check's step recorded it as a result (source_zero), is
// written as every table writes that result (shown.go).
func (d *doc) zeroTable() ([]pdfdoc.Column, []pdfdoc.Row) {
	zs, fits := d.rec.Zeros, d.rec.Fits
	cols := []pdfdoc.Column{
		{Title: "Step", W: 36, Align: "L"},
		{Title: "Readings (off, at 0)", W: 20, Align: "R"},
		{Title: "ô_s at the input", W: 38, Align: "R"},
		{Title: "ô_s·G at the output", W: 34, Align: "R"},
		{Title: "Replaced the source offset spec in", W: 52, Align: "L"},
	}
	var rows []pdfdoc.Row
	for _, z := range zs {
		step := dash(z.Name) + " (" + dash(z.Source) + ")"
		if z.Channel != "" {
			step += " @" + z.Channel
		}
		reads := fmt.Sprintf("%d + %d", len(z.Shorted), len(z.AtZero))
		if len(z.Shorted) == len(z.AtZero) {
			reads = fmt.Sprintf("%d each", len(z.Shorted))
		}
		if !z.Valid {
			rows = append(rows, pdfdoc.Row{c1(step, pdfdoc.Body), c1(reads, pdfdoc.Body),
				c1("not valid", pdfdoc.Bold.With(pdfdoc.Fail)), c1("—", pdfdoc.Body), c1(dash(z.Note), pdfdoc.Body)})
			continue
		}
		var used []string
		for _, f := range fits {
			if f.SourceZero == z.Name && f.Channel == z.Channel {
				used = append(used, dash(f.Step))
			}
		}
		applied := c1(dash(strings.Join(used, ", ")), pdfdoc.Body)
		if !z.Applied {
			applied = pdfdoc.Cell{{Text: "not applied: " + dash(strings.Join(used, ", ")), St: pdfdoc.Body},
				{Text: "its u is not below the spec's " + fmtWithU(z.SpecU/1e-6, 0, "uV") + ": no correction; the fits budget the spec, the uncorrected zero and its u", St: pdfdoc.Small}}
		}
		in := fmtWithU(z.Offset/1e-6, z.Unc.Expanded/1e-6, "uV")
		if r, ok := d.zeroResult(z); ok {
			in = d.shown(r).withU
		}
		out := fmtWithU(z.Offset*z.Gain/1e-6, z.Unc.Expanded*abs(z.Gain)/1e-6, "uV")
		rows = append(rows, pdfdoc.Row{
			c1(step, pdfdoc.Body),
			c1(reads, pdfdoc.Body),
			pdfdoc.Cell{{Text: in, St: pdfdoc.Body}, {Text: uncLine(z.Unc.Expanded, z.Unc.K, z.Unc.DOF, ""), St: pdfdoc.Small}},
			c1(out, pdfdoc.Body),
			applied,
		})
	}
	return cols, rows
}

func abs(v float64) float64 {
	if v < 0 {
		return -v
	}
	return v
}

// zeroResult is the result of zero check z's ô_s (quantity source_zero) with
// the check's value; false when its step recorded none.
func (d *doc) zeroResult(z sequencer.ZeroCheck) (sequencer.Result, bool) {
	for _, r := range d.rec.Results {
		if r.Step == z.Name && r.Channel == z.Channel && r.QuantityOf() == "source_zero" && r.Valid && r.Value == z.Offset {
			return r, true
		}
	}
	return sequencer.Result{}, false
}
