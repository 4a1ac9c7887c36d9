package certificate

import (
	"fmt"
	"math"
	"strconv"
	"strings"

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
		total += headingH + d.tableHeight(sCols, sRows)
	}
	if len(oRows) > 0 {
		total += headingH + d.tableHeight(oCols, oRows)
	}
	if len(fRows) > 0 {
		total += headingH + d.tableHeight(fCols, fRows)
	}
	total += headingH + plotH
	total += headingH + 4
	for _, t := range pts {
		total += d.tableHeight(t.cols, t.rows, t.groups...) + 3
	}
	if d.pdf.PageNo() == 1 && d.y+total > d.bottom() {
		d.newPage()
	}

	if len(sRows) > 0 {
		d.heading("Decision statements", keep(d.tableHeight(sCols, sRows)))
		d.table(sCols, sRows)
	}
	if len(oRows) > 0 {
		d.heading("Other results (not judged by a limit)", keep(d.tableHeight(oCols, oRows)))
		d.table(oCols, oRows)
	}
	if len(fRows) > 0 {
		d.heading("Straight-line fits", keep(d.tableHeight(fCols, fRows)))
		d.table(fCols, fRows)
	}
	d.plots(pre, post, plotH)
	d.sweepPoints(pts)
}

// statements lists the decision statement of every toleranced limit, in words, as
// the limits package gave it.
func (d *doc) statements() ([]column, []row) {
	var rows []row
	for _, o := range d.outcomesByStage() {
		dd := o.Decision
		if dd == nil || strings.TrimSpace(dd.Statement) == "" {
			continue
		}
		name := cell{{o.Name, stBold}, {stageWord(outcomeStage(o)), stSmall}}
		rows = append(rows, row{name, c1(dd.Statement, stBody), d.zoneCell(o)})
	}
	return []column{{title: "Limit", w: 40, align: "L"}, {title: "Statement", w: 116, align: "L"}, {title: "Decision", w: 24, align: "C"}}, rows
}

// otherResults lists the results that no limit uses.
func (d *doc) otherResults() ([]column, []row) {
	used := map[string]bool{}
	for _, o := range d.rec.Outcomes {
		for _, u := range o.Uses {
			used[u] = true
		}
		for k := range o.Values {
			used[k] = true
		}
	}
	var rows []row
	for _, r := range d.rec.Results {
		if used[r.Name] {
			continue
		}
		st := stBody
		if !r.Valid {
			st = stBody.with(colMuted)
		}
		note := r.Note
		if r.Valid && finite(r.Value) && r.Unit != "code" {
			note = strings.TrimSpace(uncLine(r.Unc.Expanded, r.Unc.K, r.Unc.DOF, r.Unc.Method) + "   " + note)
		}
		rows = append(rows, row{c1(r.Name, stBold), c1(stageWord(stageOf(r.Name)), stBody), c1(fmtResultU(r), st), c1(note, stSmall)})
	}
	return []column{
		{title: "Result", w: 48, align: "L"},
		{title: "Stage", w: 20, align: "L"},
		{title: "Value ± U", w: 46, align: "R"},
		{title: "Uncertainty · note", w: 66, align: "L", gap: 4},
	}, rows
}

// fits is the table of straight-line fits of the sweeps.
func (d *doc) fits() ([]column, []row) {
	r := d.rec
	cols := []column{
		{title: "Sweep", w: 22, align: "L"},
		{title: "DOF", w: 12, align: "R"},
		{title: "Gain", w: 26, align: "R"},
		{title: "Gain error", w: 22, align: "R"},
		{title: "Output at 0 V in", w: 26, align: "R"},
		{title: "Offset error", w: 24, align: "R"},
		{title: "Residual s", w: 24, align: "R"},
		{title: "Nonlinearity", w: 24, align: "R"},
	}
	var rows []row
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
		rows = append(rows, row{
			cell{{dash(f.Sweep), stBold}, {stageWord(sweepStage(f.Sweep)), stSmall}},
			c1(strconv.Itoa(f.DOF), stBody),
			c1(slope, stBody),
			c1(gainErr, stBody),
			c1(fmtVolts(f.Intercept, 7), stBody),
			c1(fmtVolts(f.Intercept-r.IdealOffset, 3), stBody),
			c1(fmtVolts(f.ResidualSD, 3), stBody),
			c1(nl, stBody),
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
		return pre, post, 2 * (stSmall.lineH() + 0.8)
	}
	return pre, post, plotH + 1.5 + 4 + 2*(stSmall.lineH()+0.8)
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
	d.plot(marginL, d.y, w, plotH, "Before trim, as found", sPre)
	d.plot(marginL+w+gap, d.y, w, plotH, "After trim, as left", sPost)
	d.y += plotH + 1.5

	// Legend, shared by the two plots.
	x := marginL
	lh := 4.0
	for _, s := range []series{sPre, sPost} {
		d.marker(x+1.5, d.y+lh/2, s.marker, s.color)
		d.draw(s.color)
		d.pdf.SetLineWidth(0.35)
		d.pdf.Line(x, d.y+lh/2, x+3, d.y+lh/2)
		label := fmt.Sprintf("%s (sweep “%s”)", s.label, s.sweep)
		d.text(x+4.5, d.y, 60, lh, label, stBody.sized(7.5), "L")
		x += 4.5 + d.width(label, stBody.sized(7.5)) + 8
	}
	d.errorBarGlyph(x+1.5, d.y+lh/2)
	d.text(x+4.5, d.y, 60, lh, "±1 s of the readings", stBody.sized(7.5), "L")
	d.y += lh
	d.note("Error = mean output − (G · stimulus + b), with G and b the ideal transfer above. Each plot has its own vertical scale.")
}

// pointTable is one table of sweep points: two sweeps side by side.
type pointTable struct {
	cols   []column
	rows   []row
	groups []group
}

// pointTables lays the sweeps out in pairs.
func (d *doc) pointTables() []pointTable {
	r := d.rec
	half := func(sep bool) []column {
		return []column{
			{title: "#", w: 8, align: "R", sep: sep},
			{title: "Stimulus", w: 17, align: "R"},
			{title: "Mean output", w: 22, align: "R"},
			{title: "Error", w: 16, align: "R"},
			{title: "s", w: 13, align: "R"},
			{title: "Valid", w: 14, align: "R"},
		}
	}
	cols := append(half(false), half(true)...)
	var out []pointTable
	for k := 0; k < len(r.Sweeps); k += 2 {
		pair := r.Sweeps[k:min(k+2, len(r.Sweeps))]
		if len(pair[0].Points) == 0 && (len(pair) == 1 || len(pair[1].Points) == 0) {
			continue
		}
		groups := []group{{sweepTitle(pair[0].Name), 6}}
		if len(pair) == 2 {
			groups = append(groups, group{sweepTitle(pair[1].Name), 6})
		}
		var rows []row
		for i := 0; i < len(pair[0].Points) || len(pair) == 2 && i < len(pair[1].Points); i++ {
			var rw row
			for _, s := range pair {
				if i < len(s.Points) {
					rw = append(rw, d.pointCells(i, s.Points[i])...)
				} else {
					rw = append(rw, make(row, 6)...)
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
			d.heading("Sweep points", keep(d.tableHeight(t.cols, t.rows, t.groups...)))
		} else {
			d.y += 3
		}
		d.table(t.cols, t.rows, t.groups...)
	}
	d.note("Error = mean output − ideal output; s is the standard deviation of the valid readings at the point.")
}

// pointCells are the six cells of one sweep point.
func (d *doc) pointCells(i int, p sequencer.Point) []cell {
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
	valid := c1(fmt.Sprintf("%d/%d", p.Valid, len(p.Readings)), stBody)
	if p.Valid < len(p.Readings) || p.Valid == 0 {
		valid = c1(fmt.Sprintf("%d/%d", p.Valid, len(p.Readings)), stBold.with(colFail))
	}
	return []cell{
		c1(strconv.Itoa(i+1), stSmall),
		c1(fmtVolts(p.Stimulus, 5), stBody),
		c1(mean, stBody),
		c1(errS, stBold),
		c1(sd, stBody),
		valid,
	}
}
