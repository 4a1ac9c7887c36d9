package certificate

import (
	"fmt"
	"math"
	"strconv"
	"strings"

	"trimline/reports/internal/pdfdoc"
	"trimline/sequencer"
)

// Sweep names the plot looks for.
const (
	sweepPre    = sequencer.SweepPreTrim
	sweepVerify = sequencer.SweepVerify
)

// detail is the measurement detail: the decision statements of the toleranced
// limits, results no limit judged, the straight-line fits, the error plots and
// every sweep point. On page 1 it follows on the same page only when all of it
// fits there, so that page 1 stays the certificate proper; on a later page (page 1
// already overflowed) it flows on, each heading kept with its first rows.
func (d *doc) detail() {
	sCols, sRows := d.statements()
	oCols, oRows := d.otherResults()
	fCols, fRows := d.fits()
	pre, post, plotH := d.plotSeries()
	pts := d.pointTables()

	total := 0.0
	if len(sRows) > 0 {
		total += headingH + d.TableHeight(sCols, sRows, nil)
	}
	if len(oRows) > 0 {
		total += headingH + d.TableHeight(oCols, oRows, nil)
	}
	if len(fRows) > 0 {
		total += headingH + d.TableHeight(fCols, fRows, nil)
	}
	total += headingH + plotH
	total += headingH + 4
	for _, t := range pts {
		total += d.TableHeight(t.cols, t.rows, nil, t.groups...) + 3
	}
	if d.PDF.PageNo() == 1 && d.Y+total > d.bottom() {
		d.newPage()
	}

	if len(sRows) > 0 {
		d.tableSection("Decision statements", sCols, sRows, nil)
	}
	if len(oRows) > 0 {
		d.tableSection("Other results (not judged by a limit)", oCols, oRows, nil)
	}
	if len(fRows) > 0 {
		d.tableSection("Straight-line fits", fCols, fRows, nil)
	}
	d.plots(pre, post, plotH)
	d.sweepPoints(pts)
}

// statements lists the decision statement of every toleranced limit, in words, as
// the limits package gave it.
func (d *doc) statements() ([]pdfdoc.Column, []pdfdoc.Row) {
	var rows []pdfdoc.Row
	for _, o := range d.outcomesByStage() {
		dd := o.Decision
		if dd == nil || strings.TrimSpace(dd.Statement) == "" {
			continue
		}
		name := pdfdoc.Cell{{Text: o.Name, St: pdfdoc.Bold}, {Text: stageWord(outcomeStage(d.rec, o)), St: pdfdoc.Small}}
		rows = append(rows, pdfdoc.Row{name, c1(dd.Statement, pdfdoc.Body), d.zoneCell(o)})
	}
	return []pdfdoc.Column{{Title: "Limit", W: 40, Align: "L"}, {Title: "Statement", W: 116, Align: "L"}, {Title: "Decision", W: 24, Align: "C"}}, rows
}

// otherResults lists the results that no limit uses.
func (d *doc) otherResults() ([]pdfdoc.Column, []pdfdoc.Row) {
	used := map[string]bool{}
	for _, o := range d.rec.Outcomes {
		for _, u := range o.Uses {
			used[u] = true
		}
		for k := range o.Values {
			used[k] = true
		}
	}
	var rows []pdfdoc.Row
	for _, r := range d.rec.Results {
		if used[r.Name] {
			continue
		}
		st := pdfdoc.Body
		if !r.Valid {
			st = pdfdoc.Body.With(pdfdoc.Muted)
		}
		note := r.Note
		if r.Valid && finite(r.Value) && r.Unit != "code" {
			note = strings.TrimSpace(uncLine(r.Unc.Expanded, r.Unc.K, r.Unc.DOF, r.Unc.Method) + "   " + note)
		}
		rows = append(rows, pdfdoc.Row{c1(r.Name, pdfdoc.Bold), c1(stageWord(stageOf(d.rec, r.Name)), pdfdoc.Body), c1(fmtResultU(r), st), c1(note, pdfdoc.Small)})
	}
	return []pdfdoc.Column{
		{Title: "Result", W: 48, Align: "L"},
		{Title: "Stage", W: 20, Align: "L"},
		{Title: "Value ± U", W: 46, Align: "R"},
		{Title: "Uncertainty · note", W: 66, Align: "L", Gap: 4},
	}, rows
}

// fits is the table of straight-line fits of the sweeps.
func (d *doc) fits() ([]pdfdoc.Column, []pdfdoc.Row) {
	r := d.rec
	cols := []pdfdoc.Column{
		{Title: "Sweep", W: 22, Align: "L"},
		{Title: "DOF", W: 12, Align: "R"},
		{Title: "Gain", W: 26, Align: "R"},
		{Title: "Gain error", W: 22, Align: "R"},
		{Title: "Output at 0 V in", W: 26, Align: "R"},
		{Title: "Offset error", W: 24, Align: "R"},
		{Title: "Residual s", W: 24, Align: "R"},
		{Title: "Nonlinearity", W: 24, Align: "R"},
	}
	var rows []pdfdoc.Row
	for _, f := range r.Fits {
		gainErr := "—"
		if r.IdealGain != 0 {
			gainErr = fmtResult(sequencer.Result{Value: f.Slope/r.IdealGain - 1, Unit: "ratio", Valid: finite(f.Slope)})
		}
		nl := fmtResult(sequencer.Result{Value: f.Nonlinearity, Unit: "ratio", Valid: finite(f.Nonlinearity)})
		if nl != "not valid" {
			nl += " FS"
		}
		slope := "—"
		if finite(f.Slope) {
			slope = strconv.FormatFloat(f.Slope, 'g', 7, 64) + " V/V"
		}
		rows = append(rows, pdfdoc.Row{
			pdfdoc.Cell{{Text: dash(f.Sweep), St: pdfdoc.Bold}, {Text: stageWord(sweepStage(f.Sweep)), St: pdfdoc.Small}},
			c1(strconv.Itoa(f.DOF), pdfdoc.Body),
			c1(slope, pdfdoc.Body),
			c1(gainErr, pdfdoc.Body),
			c1(fmtVolts(f.Intercept, 7), pdfdoc.Body),
			c1(fmtVolts(f.Intercept-r.IdealOffset, 3), pdfdoc.Body),
			c1(fmtVolts(f.ResidualSD, 3), pdfdoc.Body),
			c1(nl, pdfdoc.Body),
		})
	}
	return cols, rows
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

// sweepStage is the stage of a sweep, as the sequencer declares it: the pre-trim
// sweep finds the unit as it came, the verify sweep leaves it as it ships.
func sweepStage(name string) stage {
	switch sequencer.SweepStage(name) {
	case sequencer.AsFound:
		return stageFound
	case sequencer.AsLeft:
		return stageLeft
	}
	return stageOther
}

// sweepTitle names a sweep with its stage: "Sweep “pre-trim” (as found)".
func sweepTitle(name string) string {
	t := "Sweep “" + name + "”"
	if st := sweepStage(name); st != stageOther {
		t += " (" + stageWord(st) + ")"
	}
	return t
}

// sweepByName returns the first sweep with the given name, or nil.
func (d *doc) sweepByName(name string) *sequencer.Sweep {
	for i := range d.rec.Sweeps {
		if d.rec.Sweeps[i].Name == name {
			return &d.rec.Sweeps[i]
		}
	}
	return nil
}

// errPoints turns a sweep's valid points into (stimulus, error, s) in volts.
func (d *doc) errPoints(s *sequencer.Sweep) []xy {
	if s == nil {
		return nil
	}
	var out []xy
	for _, p := range s.Points {
		if p.Valid <= 0 || !finite(p.Mean) || !finite(p.Stimulus) {
			continue
		}
		e := p.Mean - (d.rec.IdealGain*p.Stimulus + d.rec.IdealOffset)
		if !finite(e) {
			continue
		}
		sd := p.SD
		if !finite(sd) || sd < 0 {
			sd = 0
		}
		out = append(out, xy{p.Stimulus, e, sd})
	}
	return out
}

// plots draws the error before and after trim side by side, each on its own
// scale (millivolts before, microvolts after).
func (d *doc) plotSeries() (pre, post series, h float64) {
	ps, vs := d.sweepByName(sweepPre), d.sweepByName(sweepVerify)
	pre = series{label: "before trim", sweep: sweepPre, pts: d.errPoints(ps), color: colPre, marker: markerCircle, missing: ps == nil}
	post = series{label: "after trim", sweep: sweepVerify, pts: d.errPoints(vs), color: colPost, marker: markerSquare, missing: vs == nil}
	if len(pre.pts) == 0 && len(post.pts) == 0 {
		return pre, post, 2 * (pdfdoc.Small.LineH() + 0.8)
	}
	return pre, post, plotH + 1.5 + 4 + 2*(pdfdoc.Small.LineH()+0.8)
}

// plotH is the height of one plot.
const plotH = 64.0

// plots draws the error before and after trim side by side, each on its own
// scale (millivolts before, microvolts after). h is the height of the section
// from plotSeries.
func (d *doc) plots(sPre, sPost series, h float64) {
	const gap = 8.0
	d.heading("Error from the ideal transfer", h)
	if len(sPre.pts) == 0 && len(sPost.pts) == 0 {
		d.note("No data: neither the “" + sweepPre + "” nor the “" + sweepVerify + "” sweep has a valid point to plot.")
		return
	}
	w := (contentW - gap) / 2
	d.plot(marginL, d.Y, w, plotH, "Before trim, as found", sPre)
	d.plot(marginL+w+gap, d.Y, w, plotH, "After trim, as left", sPost)
	d.Y += plotH + 1.5

	// Legend, shared by the two plots.
	x := marginL
	lh := 4.0
	for _, s := range []series{sPre, sPost} {
		d.marker(x+1.5, d.Y+lh/2, s.marker, s.color)
		d.Stroke(s.color)
		d.PDF.SetLineWidth(0.35)
		d.PDF.Line(x, d.Y+lh/2, x+3, d.Y+lh/2)
		label := fmt.Sprintf("%s (sweep “%s”)", s.label, s.sweep)
		d.Cell(x+4.5, d.Y, 60, lh, label, pdfdoc.Body.Sized(7.5), "L")
		x += 4.5 + d.TextWidth(label, pdfdoc.Body.Sized(7.5)) + 8
	}
	d.errorBarGlyph(x+1.5, d.Y+lh/2)
	d.Cell(x+4.5, d.Y, 60, lh, "±1 s of the readings", pdfdoc.Body.Sized(7.5), "L")
	d.Y += lh
	d.note("Error = mean output − (G · stimulus + b), with G and b the ideal transfer above. Each plot has its own vertical scale.")
}

// pointTable is one table of sweep points: two sweeps side by side.
type pointTable struct {
	cols   []pdfdoc.Column
	rows   []pdfdoc.Row
	groups []pdfdoc.Group
}

// pointTables lays the sweeps out in pairs.
func (d *doc) pointTables() []pointTable {
	r := d.rec
	half := func(sep bool) []pdfdoc.Column {
		return []pdfdoc.Column{
			{Title: "#", W: 8, Align: "R", Sep: sep},
			{Title: "Stimulus", W: 17, Align: "R"},
			{Title: "Mean output", W: 22, Align: "R"},
			{Title: "Error", W: 16, Align: "R"},
			{Title: "s", W: 13, Align: "R"},
			{Title: "Valid", W: 14, Align: "R"},
		}
	}
	cols := append(half(false), half(true)...)
	var out []pointTable
	for k := 0; k < len(r.Sweeps); k += 2 {
		pair := r.Sweeps[k:min(k+2, len(r.Sweeps))]
		if len(pair[0].Points) == 0 && (len(pair) == 1 || len(pair[1].Points) == 0) {
			continue
		}
		groups := []pdfdoc.Group{{Title: sweepTitle(pair[0].Name), N: 6}}
		if len(pair) == 2 {
			groups = append(groups, pdfdoc.Group{Title: sweepTitle(pair[1].Name), N: 6})
		}
		var rows []pdfdoc.Row
		for i := 0; i < len(pair[0].Points) || len(pair) == 2 && i < len(pair[1].Points); i++ {
			var rw pdfdoc.Row
			for _, s := range pair {
				if i < len(s.Points) {
					rw = append(rw, d.pointCells(i, s.Points[i])...)
				} else {
					rw = append(rw, make(pdfdoc.Row, 6)...)
				}
			}
			rows = append(rows, rw)
		}
		out = append(out, pointTable{cols, rows, groups})
	}
	return out
}

// sweepPoints lists every point of every sweep.
func (d *doc) sweepPoints(ts []pointTable) {
	if len(ts) == 0 {
		d.heading("Sweep points", 8)
		d.note("No sweep points were recorded.")
		return
	}
	for k, t := range ts {
		if k == 0 {
			d.heading("Sweep points", keep(d.TableHeight(t.cols, t.rows, nil, t.groups...)))
		} else {
			d.Y += 3
		}
		d.Table(t.cols, t.rows, nil, t.groups...)
	}
	d.note("Error = mean output − ideal output; s is the standard deviation of the valid readings at the point.")
}

// pointCells are the six cells of one sweep point.
func (d *doc) pointCells(i int, p sequencer.Point) []pdfdoc.Cell {
	r := d.rec
	ideal := r.IdealGain*p.Stimulus + r.IdealOffset
	mean, errS, sd := "—", "—", "—"
	if p.Valid > 0 {
		mean = fmtVolts(p.Mean, 7)
		errS = fmtVolts(p.Mean-ideal, 3)
		if p.Valid > 1 {
			sd = fmtVolts(p.SD, 2)
		}
	}
	valid := c1(fmt.Sprintf("%d/%d", p.Valid, len(p.Readings)), pdfdoc.Body)
	if p.Valid < len(p.Readings) || p.Valid == 0 {
		valid = c1(fmt.Sprintf("%d/%d", p.Valid, len(p.Readings)), pdfdoc.Bold.With(pdfdoc.Fail))
	}
	return []pdfdoc.Cell{
		c1(strconv.Itoa(i+1), pdfdoc.Small),
		c1(fmtVolts(p.Stimulus, 5), pdfdoc.Body),
		c1(mean, pdfdoc.Body),
		c1(errS, pdfdoc.Bold),
		c1(sd, pdfdoc.Body),
		valid,
	}
}
