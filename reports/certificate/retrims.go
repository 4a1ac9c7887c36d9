package certificate

import (
	"fmt"
	"math"
	"strconv"

	"trimline/reports/internal/pdfdoc"
	"trimline/sequencer"
	"trimline/sequencer/uncertainty"
)

// retrims is the table of the passes of every closed-loop re-trim
// (sequencer.Record.Retrims), shown when there are any: one band per re-trim
// step, DAC and channel, one row per pass, and under the table how each re-trim
// ended.
func (d *doc) retrims() {
	cols, rows, bands, ends := d.retrimTable()
	if len(rows) == 0 {
		return
	}
	d.tableSection("Re-trim passes", cols, rows, bands)
	for _, e := range ends {
		d.note(e)
	}
	d.note(retrimNote(d.retrimK()))
}

// retrimGroup is the passes of one re-trim of one DAC on one channel.
type retrimGroup struct {
	step, dac, channel string
	passes             []sequencer.RetrimPass
}

// retrimGroups groups the record's passes by step, DAC and channel, in the
// order each first appears.
func (d *doc) retrimGroups() []retrimGroup {
	var gs []retrimGroup
	for _, p := range d.rec.Retrims {
		i := 0
		for i < len(gs) && (gs[i].step != p.Step || gs[i].dac != p.DAC || gs[i].channel != p.Channel) {
			i++
		}
		if i == len(gs) {
			gs = append(gs, retrimGroup{step: p.Step, dac: p.DAC, channel: p.Channel})
		}
		gs[i].passes = append(gs[i].passes, p)
	}
	return gs
}

// retrimK is the coverage factor of a pass's expanded uncertainty: that of the
// record's coverage probability for a normal distribution (a pass's degrees of
// freedom are not recorded), to three decimals as JCGM 100 Table G.2 gives it
// (2.000 for 95.45 %, 1.960 for 95 %), or 2 when the record states no coverage.
func (d *doc) retrimK() float64 {
	k := uncertainty.CoverageFactor(d.rec.Coverage, math.Inf(1))
	if !finite(k) || k <= 0 {
		return 2
	}
	return math.Round(k*1000) / 1000
}

// retrimNote is the small print under the re-trim table.
func retrimNote(k float64) string {
	return "Error: mean output error at the re-trim's points with the code in the DAC, with its expanded uncertainty U = k·u, " +
		fmtK(k) + " (normal distribution; the record's coverage probability). " +
		"Sensitivity: output change per code used to choose the next code, the DAC's nominal LSB until two codes were measured. " +
		"Within: the error was within the step's bound."
}

// retrimTable is the columns, rows, bands and endings of the re-trim table.
func (d *doc) retrimTable() ([]pdfdoc.Column, []pdfdoc.Row, []pdfdoc.Band, []string) {
	cols := []pdfdoc.Column{
		{Title: "Pass", W: 14, Align: "C"},
		{Title: "Code in DAC", W: 24, Align: "R"},
		{Title: "Measured error ± U", W: 46, Align: "R"},
		{Title: "Sensitivity", W: 38, Align: "R"},
		{Title: "Within bound", W: 26, Align: "C"},
		{Title: "Next code", W: 32, Align: "R"},
	}
	resp, k := d.resp(), d.retrimK()
	var rows []pdfdoc.Row
	var bands []pdfdoc.Band
	var ends []string
	for _, g := range d.retrimGroups() {
		title := "Re-trim “" + dash(g.step) + "” of the " + dash(g.dac) + " DAC"
		if g.channel != "" {
			title += " — " + chanWord(g.channel)
		}
		bands = append(bands, pdfdoc.Band{At: len(rows), Title: title})
		for i, p := range g.passes {
			errU := fmtResultU(sequencer.Result{Value: p.Error, Unit: string(resp), Valid: finite(p.Error),
				Unc: sequencer.Uncertainty{Std: p.ErrorU, K: k, Expanded: k * p.ErrorU}})
			sens := c1("—", pdfdoc.Body)
			if finite(p.Sensitivity) && p.Sensitivity != 0 {
				how := "nominal LSB"
				if p.Measured {
					how = "measured"
				}
				sens = pdfdoc.Cell{{Text: resp.format(p.Sensitivity, 4) + "/code", St: pdfdoc.Body}, {Text: how, St: pdfdoc.Small}}
			}
			within := c1("no", pdfdoc.Body)
			if p.Within {
				within = c1("yes", pdfdoc.Bold.With(pdfdoc.Pass))
			}
			next := c1(fmtCode(p.Next), pdfdoc.Body)
			if i == len(g.passes)-1 {
				next = pdfdoc.Cell{{Text: fmtCode(p.Next), St: pdfdoc.Bold}, {Text: "left in the DAC", St: pdfdoc.Small}}
			}
			rows = append(rows, pdfdoc.Row{
				c1(strconv.Itoa(p.Pass), pdfdoc.Body),
				c1(fmtCode(p.Code), pdfdoc.Body),
				c1(errU, pdfdoc.Body),
				sens,
				within,
				next,
			})
		}
		ends = append(ends, retrimEnd(g, resp))
	}
	return cols, rows, bands, ends
}

// retrimEnd says in a sentence how one re-trim ended: within the bound on its
// last pass, or not within it, with the best code tried left in the DAC.
func retrimEnd(g retrimGroup, resp quantity) string {
	who := "Re-trim “" + dash(g.step) + "” of the " + dash(g.dac) + " DAC"
	if g.channel != "" {
		who += ", " + chanWord(g.channel)
	}
	last := g.passes[len(g.passes)-1]
	if last.Within {
		return fmt.Sprintf("%s: within the bound on pass %d with code %s (error %s); code %s left in the DAC.",
			who, last.Pass, fmtCode(last.Code), resp.format(last.Error, 3), fmtCode(last.Next))
	}
	best := g.passes[0]
	for _, p := range g.passes[1:] {
		if finite(p.Error) && (!finite(best.Error) || math.Abs(p.Error) < math.Abs(best.Error)) {
			best = p
		}
	}
	if best.Code == last.Next {
		return fmt.Sprintf("%s: not within the bound after %s; the best code tried, %s (error %s), was left in the DAC.",
			who, plural(len(g.passes), "pass", "passes"), fmtCode(best.Code), resp.format(best.Error, 3))
	}
	return fmt.Sprintf("%s: not within the bound after %s; the best code tried was %s (error %s); code %s left in the DAC.",
		who, plural(len(g.passes), "pass", "passes"), fmtCode(best.Code), resp.format(best.Error, 3), fmtCode(last.Next))
}
