package certificate

import (
	"fmt"
	"math"
	"regexp"
	"slices"
	"sort"
	"strconv"
	"strings"

	"trimline/reports/internal/pdfdoc"
	"trimline/sequencer"
)

// detail is the measurement detail: the decision statements of the toleranced
// limits, results no limit judged, the straight-line fits, the error plots and
// every sweep point. On page 1 it follows on the same page only when all of it
// fits there, so that page 1 stays the certificate proper; on a later page (page 1
// already overflowed) it flows on, each heading kept with its first rows.
func (d *doc) detail() {
	sCols, sRows := d.statements()
	oCols, oRows, oBands := d.otherResults()
	fCols, fRows, fBands := d.fits()
	bCols, bRows, bBands, bNote := d.budgets()
	plotted, plotH := d.plotSeries()
	pts := d.pointTables()

	total := 0.0
	if len(sRows) > 0 {
		total += headingH + d.TableHeight(sCols, sRows, nil)
	}
	if len(oRows) > 0 {
		total += headingH + d.TableHeight(oCols, oRows, oBands)
	}
	if len(fRows) > 0 {
		total += headingH + d.TableHeight(fCols, fRows, fBands) + d.fitsNotesH()
	}
	if len(bRows) > 0 {
		total += headingH + d.TableHeight(bCols, bRows, bBands) + 3*pdfdoc.Small.LineH()
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
		d.tableSection("Other results (not judged by a limit)", oCols, oRows, oBands)
	}
	if len(fRows) > 0 {
		d.tableSection(d.fitsTitle(), fCols, fRows, fBands)
		d.fitsNotes()
	}
	if len(bRows) > 0 {
		d.tableSection("Uncertainty budget", bCols, bRows, bBands)
		d.note(bNote)
	}
	d.plots(plotted, plotH)
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
		about := stageWord(outcomeStage(d.rec, o))
		if dd.Result != "" && about == "—" && d.rec.ResultStage(dd.Result) == sequencer.Adjustment {
			about = "adjustment"
		}
		if ch := outcomeChannel(o); ch != "" {
			about += " · " + chanWord(ch)
		}
		name := pdfdoc.Cell{{Text: o.Name, St: pdfdoc.Bold}, {Text: about, St: pdfdoc.Small}}
		text := statementText(dd.Statement, o.Unit)
		if so := d.shownOutcome(o); so.Unit != o.Unit {
			text = perDegreeText(text, so.Unit)
		}
		rows = append(rows, pdfdoc.Row{name, c1(text, pdfdoc.Body), d.zoneCell(o)})
	}
	return []pdfdoc.Column{{Title: "Limit", W: 40, Align: "L"}, {Title: "Statement", W: 116, Align: "L"}, {Title: "Decision", W: 24, Align: "C"}}, rows
}

// otherResults lists the results that no limit uses.
func (d *doc) otherResults() ([]pdfdoc.Column, []pdfdoc.Row, []pdfdoc.Band) {
	// An outcome of a channel uses the results of that channel; one of the
	// whole unit (or made before outcomes named their channel) those of its
	// names on every channel.
	type key struct{ name, ch string }
	used := map[key]bool{}
	for _, o := range d.rec.Outcomes {
		for _, u := range o.Uses {
			used[key{u, outcomeChannel(o)}] = true
		}
		for k := range o.Values {
			used[key{k, outcomeChannel(o)}] = true
		}
	}
	var rows []pdfdoc.Row
	var bands channelBands
	for _, r := range byChannel(d, d.rec.Results, func(r sequencer.Result) string { return r.Channel }) {
		if used[key{r.Name, r.Channel}] || used[key{r.Name, ""}] {
			continue
		}
		bands.row(len(rows), r.Channel)
		st := pdfdoc.Body
		if !r.Valid {
			st = pdfdoc.Body.With(pdfdoc.Muted)
		}
		note := r.Note
		if n := d.retrimNote(r); n != "" {
			note = strings.TrimSpace(n + "   " + note)
		}
		if r.Valid && finite(r.Value) && !exact(r) {
			note = strings.TrimSpace(uncNote(r.Unc.Expanded, r.Unc.K, r.Unc.DOF, r.Unc) + "   " + note)
		}
		if m := d.measurand(r); m != "" {
			note = strings.TrimSpace(m + "   " + note)
		}
		when := stageWord(stageOf(d.rec, r.Name))
		if when == "—" && r.StageOf() == sequencer.Adjustment {
			when = "adjustment" // a code or coefficient the adjustment wrote
		}
		rows = append(rows, pdfdoc.Row{c1(r.Name, pdfdoc.Bold), c1(when, pdfdoc.Body), c1(d.shown(r).withU, st), c1(note, pdfdoc.Small)})
	}
	return []pdfdoc.Column{
		{Title: "Result", W: 48, Align: "L"},
		{Title: "Stage", W: 20, Align: "L"},
		{Title: "Value ± U", W: 46, Align: "R"},
		{Title: "Uncertainty · note", W: 66, Align: "L", Gap: 4},
	}, rows, bands.get()
}

// fits is the table of straight-line fits of the sweeps.
func (d *doc) fits() ([]pdfdoc.Column, []pdfdoc.Row, []pdfdoc.Band) {
	r := d.rec
	// The line's value at 0 in and its offset are the best-fit line's, not the
	// output measured there (the terminal offset, in the sweep points): the
	// titles say so.
	cols := []pdfdoc.Column{
		{Title: "Sweep", W: 20, Align: "L"},
		{Title: "DOF", W: 8, Align: "R"},
		{Title: "Gain", W: 24, Align: "R"},
		{Title: "Gain error", W: 18, Align: "R"},
		{Title: "Line at 0 " + d.stim().zeroName() + " in", W: 22, Align: "R"},
		{Title: "Best-fit-line offset", W: 26, Align: "R"},
		{Title: "Residual s", W: 17, Align: "R"},
		{Title: "Nonlinearity", W: 23, Align: "R"},
		{Title: "Lack of fit", W: 22, Align: "R"},
	}
	perSweep := map[[2]string]int{}
	for _, f := range r.Fits {
		perSweep[[2]string{f.Sweep, f.Channel}]++
	}
	resp := d.resp()
	var rows []pdfdoc.Row
	var bands channelBands
	for _, f := range d.fitsByStage() {
		bands.row(len(rows), f.Channel)
		// The fit's results are written as the results table writes them (one
		// quantity, one number: shown.go); a fit whose step declared no such
		// result keeps the fit's own digits.
		gainErr := "—"
		if res, ok := d.fitResult(f, "gain_error"); ok {
			gainErr = d.shown(res).value
		} else if r.IdealGain != 0 {
			gainErr = fmtResult(sequencer.Result{Value: f.Slope/r.IdealGain - 1, Unit: "ratio", Valid: finite(f.Slope)})
		}
		var nl string
		if res, ok := d.fitResult(f, "nonlinearity"); ok {
			nl = d.shown(res).value
		} else if nl = fmtResult(sequencer.Result{Value: f.Nonlinearity, Unit: "ratio", Valid: finite(f.Nonlinearity)}); nl != "not valid" {
			nl += " FS"
		}
		at0, offset := fitOutput(resp, f.Intercept, 7), fitOutput(resp, f.Intercept-r.IdealOffset, 3)
		if res, ok := d.fitResult(f, "offset"); ok {
			offset = d.shown(res).value
			if r.IdealOffset == 0 { // the line at 0 in is the offset itself
				at0 = offset
			}
		}
		slope := "—"
		if finite(f.Slope) {
			slope = gain(f.Slope, resp, d.stim())
		}
		var parts []string
		if w := stageWord(d.fitStage(f)); w != f.Sweep { // a sweep named "as found" says it once
			parts = append(parts, w)
		}
		if perSweep[[2]string{f.Sweep, f.Channel}] > 1 && f.Step != "" {
			parts = append(parts, f.Step)
		}
		if f.Order == 2 {
			parts = append(parts, "quadratic")
		}
		if c, ok := d.sweepTemp(f.Sweep, f.Channel); ok {
			parts = append(parts, fmtCelsius(c))
		}
		about := strings.Join(parts, " · ")
		sweep := pdfdoc.Cell{{Text: dash(f.Sweep), St: pdfdoc.Bold}}
		if about != "" {
			sweep = append(sweep, pdfdoc.Span{Text: about, St: pdfdoc.Small})
		}
		rows = append(rows, pdfdoc.Row{
			sweep,
			c1(strconv.Itoa(f.DOF), pdfdoc.Body),
			c1(slope, pdfdoc.Body),
			c1(gainErr, pdfdoc.Body),
			c1(at0, pdfdoc.Body),
			c1(offset, pdfdoc.Body),
			c1(resp.format(f.ResidualSD, 3), pdfdoc.Body),
			c1(nl, pdfdoc.Body),
			lackOfFitCell(f.LackOfFit),
		})
	}
	return cols, rows, bands.get()
}

// fitOutput writes a fit's output (at 0 V, or its offset error) with digits
// significant digits; in counts to three decimals at most, a thousandth of
// the unit's step being below anything a fit of counts can tell (a fit that
// met its ideal to 1.6e-12 counts reads "0.000 counts", not "1.552874e−12").
func fitOutput(q quantity, v float64, digits int) string {
	if q != qCount || !finite(v) {
		return q.format(v, digits)
	}
	dec := 0
	if a := math.Abs(v); a > 0 {
		dec = digits - 1 - int(math.Floor(math.Log10(a)))
	}
	dec = max(0, min(dec, 3))
	p := math.Pow(10, float64(dec))
	r := math.Round(v*p) / p
	if r == 0 {
		r = 0 // no "−0.000"
	}
	return countText(pdfdoc.Minus(strconv.FormatFloat(r, 'f', dec, 64)))
}

// fitsTitle is the heading of the fits table: "Straight-line fits" unless a fit
// is a quadratic, whose gain and output at 0 V are its b1 and b0.
func (d *doc) fitsTitle() string {
	for _, f := range d.rec.Fits {
		if f.Order == 2 {
			z := "0 " + d.stim().zeroName()
			return "Fits of the sweeps (a quadratic's gain and line at " + z + " in: its slope and value at " + z + ")"
		}
	}
	return "Straight-line fits"
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

// certStage is the certificate's grouping of a stage the record declares.
func certStage(s sequencer.Stage) stage {
	switch s {
	case sequencer.AsFound:
		return stageFound
	case sequencer.AsLeft:
		return stageLeft
	}
	return stageOther
}

// sweepTitle names a sweep with its recorded stage: "Sweep “pre-trim” (as found)".
func sweepTitle(sw sequencer.Sweep) string {
	t := "Sweep “" + sw.Name + "”"
	if st := certStage(sw.StageOf()); st != stageOther && stageWord(st) != sw.Name { // a sweep named "as found" says it once
		t += " (" + stageWord(st) + ")"
	}
	if sw.Channel != "" {
		t += " · " + chanWord(sw.Channel)
	}
	if sw.TempKnown {
		t += " · " + fmtCelsius(sw.TempC)
	}
	return t
}

// sweepTemp is the temperature a soak left the unit at for the record's sweep
// name on channel ch, and whether one did.
func (d *doc) sweepTemp(name, ch string) (float64, bool) {
	for _, sw := range d.rec.Sweeps {
		if sw.Name == name && sw.Channel == ch {
			return sw.TempC, sw.TempKnown
		}
	}
	return 0, false
}

// sweepsByStage returns the record's sweeps as found, then as left, then the
// others, each group in record order; with channels, channel by channel, so
// that a channel's sweeps before and after trim stand side by side.
func (d *doc) sweepsByStage() []sequencer.Sweep {
	out := append([]sequencer.Sweep(nil), d.rec.Sweeps...)
	chans := d.channels()
	sort.SliceStable(out, func(i, j int) bool {
		ci, cj := chanIndex(chans, out[i].Channel), chanIndex(chans, out[j].Channel)
		if ci != cj {
			return ci < cj
		}
		return certStage(out[i].StageOf()) < certStage(out[j].StageOf())
	})
	return out
}

// curve reports whether a sweep has a curve to draw: more than one point. A
// single point (a measure step's, recorded as a sweep of one point) has none; it
// shows as a row of the point tables only, and names no band or plot.
func curve(sw sequencer.Sweep) bool { return len(sw.Points) > 1 }

// fitStage is the stage of the sweep a fit was made over, as the record gives
// it; a fit of a sweep the record does not hold takes the stage its name says
// in a record of schema 1.
func (d *doc) fitStage(f sequencer.FitSummary) stage {
	for _, sw := range d.rec.Sweeps {
		if sw.Name == f.Sweep && sw.Channel == f.Channel {
			return certStage(sw.StageOf())
		}
	}
	return certStage(sequencer.Sweep{Name: f.Sweep}.StageOf())
}

// fitsByStage returns the record's fits grouped by the stage of their sweeps,
// as sweepsByStage orders the sweeps.
func (d *doc) fitsByStage() []sequencer.FitSummary {
	out := append([]sequencer.FitSummary(nil), d.rec.Fits...)
	chans := d.channels()
	sort.SliceStable(out, func(i, j int) bool {
		ci, cj := chanIndex(chans, out[i].Channel), chanIndex(chans, out[j].Channel)
		if ci != cj {
			return ci < cj
		}
		return d.fitStage(out[i]) < d.fitStage(out[j])
	})
	return out
}

// sweepNames joins the names of the sweeps of a stage for a band title:
// "pre-trim sweep", "verify and check sweeps"; "" when there is none.
func (d *doc) sweepNames(st stage) string {
	var names []string
	for _, sw := range d.rec.Sweeps {
		if curve(sw) && certStage(sw.StageOf()) == st && !slices.Contains(names, sw.Name) {
			names = append(names, sw.Name)
		}
	}
	switch len(names) {
	case 0:
		return ""
	case 1:
		return names[0] + " sweep"
	}
	return andList(names) + " sweeps"
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

// plotLook is how the plots draw the sweeps of a stage: title, legend label,
// colour and marker. adjust names the adjustment: "trim" or "correction".
func plotLook(st stage, adjust string) (title, label string, c pdfdoc.Color, marker int) {
	switch st {
	case stageFound:
		return "Before " + adjust + ", as found", "before " + adjust, colPre, markerCircle
	case stageLeft:
		return "After " + adjust + ", as left", "after " + adjust, colPost, markerSquare
	}
	return "Sweep, stage not declared", "sweep", pdfdoc.Ink, markerCircle
}

// plotSeries is one series per sweep, as found first, then as left, then the
// others, and the height of the plots section.
func (d *doc) plotSeries() (ss []series, h float64) {
	data := false
	for _, sw := range d.sweepsByStage() {
		if !curve(sw) || d.isRetrimPass(sw) { // a pass is a row of its table, not a plot
			continue
		}
		title, label, c, m := plotLook(certStage(sw.StageOf()), d.adjustNoun())
		if sw.Channel != "" {
			title += " · " + chanWord(sw.Channel)
		}
		s := series{title: title, label: label, sweep: sw.Name, pts: d.errPoints(&sw), color: c, marker: m}
		data = data || len(s.pts) > 0
		ss = append(ss, s)
	}
	if !data {
		return nil, 2 * (pdfdoc.Small.LineH() + 0.8)
	}
	rows := (len(ss) + 1) / 2
	return ss, float64(rows)*(plotHeight(len(ss))+1.5) + float64(len(d.legendLines(ss)))*legendH + 2*(pdfdoc.Small.LineH()+0.8)
}

// plotH is the height of one plot (plotHeight: of a short one); legendH of one
// line of the legend.
const (
	plotH   = 64.0
	legendH = 4.0
	plotGap = 8.0
	// plotShortH is the height of a plot when there are four rows of them (a
	// unit of four channels, before and after): four rows of it fit one page
	// below a heading, where four of plotH take two pages.
	plotShortH = 54.0
)

// plotHeight is the height of each of n plots, two to a row: plotH for up to
// three rows, plotShortH for more.
func plotHeight(n int) float64 {
	if (n+1)/2 > 3 {
		return plotShortH
	}
	return plotH
}

// legendEntry is one series' entry in the legend: its text, where it starts on
// its line, and its series.
type legendEntry struct {
	s     series
	x     float64
	label string
	bar   bool // the error bar's entry, not a series'
}

// legendLines lays out the legend: one entry per series, then the error bar's,
// wrapped to the width of the page.
func (d *doc) legendLines(ss []series) [][]legendEntry {
	var lines [][]legendEntry
	var line []legendEntry
	x := marginL
	add := func(e legendEntry, w float64) {
		if len(line) > 0 && x+w > marginL+contentW {
			lines, line, x = append(lines, line), nil, marginL
		}
		e.x = x
		line = append(line, e)
		x += w + 8
	}
	st := pdfdoc.Body.Sized(7.5)
	var seen []string
	for _, s := range ss {
		label := fmt.Sprintf("%s (sweep “%s”)", s.label, s.sweep)
		if slices.Contains(seen, label) { // the same sweep of another channel
			continue
		}
		seen = append(seen, label)
		add(legendEntry{s: s, label: label}, 4.5+d.TextWidth(label, st))
	}
	const bar = "±1 s of the readings"
	add(legendEntry{label: bar, bar: true}, 4.5+d.TextWidth(bar, st))
	return append(lines, line)
}

// plots draws the error of every sweep from the ideal transfer, two side by
// side, each on its own scale. h is the height of the section from plotSeries.
func (d *doc) plots(ss []series, h float64) {
	follow := h
	ph := plotHeight(len(ss))
	if follow > bottom-marginT-headingH {
		follow = ph + 1.5
	}
	d.heading("Error from the ideal transfer", follow)
	if len(ss) == 0 {
		d.note("No data: no sweep has a valid point to plot.")
		return
	}
	w := (contentW - plotGap) / 2
	for k := 0; k < len(ss); k += 2 {
		if k > 0 {
			d.need(ph + 1.5)
		}
		for j, s := range ss[k:min(k+2, len(ss))] {
			d.plot(marginL+float64(j)*(w+plotGap), d.Y, w, ph, s)
		}
		d.Y += ph + 1.5
	}

	// Legend, shared by the plots.
	st := pdfdoc.Body.Sized(7.5)
	for _, line := range d.legendLines(ss) {
		d.need(legendH)
		for _, e := range line {
			if e.bar {
				d.errorBarGlyph(e.x+1.5, d.Y+legendH/2)
			} else {
				d.marker(e.x+1.5, d.Y+legendH/2, e.s.marker, e.s.color)
				d.Stroke(e.s.color)
				d.PDF.SetLineWidth(0.35)
				d.PDF.Line(e.x, d.Y+legendH/2, e.x+3, d.Y+legendH/2)
			}
			d.Cell(e.x+4.5, d.Y, 60, legendH, e.label, st, "L")
		}
		d.Y += legendH
	}
	d.note("Error = mean output − (G · stimulus + b), with G and b the ideal transfer above. Each plot has its own vertical scale.")
}

// pointTable is one table of sweep points: two sweeps side by side.
type pointTable struct {
	cols   []pdfdoc.Column
	rows   []pdfdoc.Row
	groups []pdfdoc.Group
}

// pointTables lays the sweeps out in pairs, as found first, then as left;
// the measurements at one level (a measure step's) and the re-trim passes
// follow in one table of their own, a row a level.
func (d *doc) pointTables() (out []pointTable) {
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
	var sweeps, singles []sequencer.Sweep
	for _, sw := range d.sweepsByStage() {
		if len(sw.Points) == 1 || d.isRetrimPass(sw) {
			singles = append(singles, sw)
		} else {
			sweeps = append(sweeps, sw)
		}
	}
	defer func() {
		if t, ok := d.singlesTable(singles); ok {
			out = append(out, t)
		}
	}()
	for k := 0; k < len(sweeps); k += 2 {
		pair := sweeps[k:min(k+2, len(sweeps))]
		if len(pair[0].Points) == 0 && (len(pair) == 1 || len(pair[1].Points) == 0) {
			continue
		}
		groups := []pdfdoc.Group{{Title: sweepTitle(pair[0]), N: 6}}
		if len(pair) == 2 {
			groups = append(groups, pdfdoc.Group{Title: sweepTitle(pair[1]), N: 6})
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
		tcols := cols
		if len(pair) == 1 {
			// A sweep without a partner: no column titles over the empty half.
			tcols = append(half(false), make([]pdfdoc.Column, 6)...)
			for j, c := range half(false) {
				tcols[6+j] = pdfdoc.Column{W: c.W, Align: c.Align}
			}
		}
		out = append(out, pointTable{tcols, rows, groups})
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
	note := "Error = mean output − ideal output; s is the standard deviation of the valid readings at the point."
	applied := d.appliedZeros()
	if d.hasFits() && d.hasZeroPoint() {
		z := "0 " + d.stim().zeroName()
		if applied == "" {
			note += " † At " + z + " in the error is the terminal offset (the output measured at zero input less the ideal offset), not the best-fit-line offset of the fits table."
		} else {
			note += " † At " + z + " in the error is the output at the programmed zero less the ideal offset: the terminal offset result corrects it for the station zero; neither is the best-fit-line offset of the fits table."
		}
	}
	if applied != "" {
		note += " Stimulus is the level programmed; the fits correct every level by the station zero " + applied +
			" (the zero check), so the errors here are the uncorrected ones."
	}
	if d.otherQuantity() {
		note += " A measurement of another quantity than the unit's output (a supply current) has no ideal and no error."
	}
	if d.resp() == qCount {
		note += " Mean output, error and s are in counts, the numbers the unit reports."
	}
	d.note(note)
}

// pointCells are the six cells of one sweep point.
func (d *doc) pointCells(i int, p sequencer.Point) []pdfdoc.Cell {
	r := d.rec
	ideal := r.IdealGain*p.Stimulus + r.IdealOffset
	mean, errS, sd := "—", "—", "—"
	if p.Valid > 0 {
		mean = d.resp().cell(p.Mean, 7)
		errS = d.resp().cell(p.Mean-ideal, 3)
		if p.Stimulus == 0 && d.hasFits() {
			errS += " †" // the terminal offset (fitsNotes)
		}
		if p.Valid > 1 {
			sd = d.resp().cell(p.SD, 2)
		}
	}
	valid := c1(fmt.Sprintf("%d/%d", p.Valid, len(p.Readings)), pdfdoc.Body)
	if p.Valid < len(p.Readings) || p.Valid == 0 {
		valid = c1(fmt.Sprintf("%d/%d", p.Valid, len(p.Readings)), pdfdoc.Bold.With(pdfdoc.Fail))
	}
	return []pdfdoc.Cell{
		c1(strconv.Itoa(i+1), pdfdoc.Small),
		c1(d.stim().format(p.Stimulus, 5), pdfdoc.Body),
		c1(mean, pdfdoc.Body),
		c1(errS, pdfdoc.Bold),
		c1(sd, pdfdoc.Body),
		valid,
	}
}

// singlesTable is the table of the measurements at one level and of the
// re-trim passes: a row each (a pass at several levels, a row a level), named
// by its step (a re-trim pass with the code in the DAC), in the unit of the
// quantity it read. ok is false when there are none.
func (d *doc) singlesTable(sws []sequencer.Sweep) (pointTable, bool) {
	if len(sws) == 0 {
		return pointTable{}, false
	}
	cols := []pdfdoc.Column{
		{Title: "Measurement", W: 56, Align: "L"},
		{Title: "Stage", W: 20, Align: "L"},
		{Title: "Stimulus", W: 20, Align: "R"},
		{Title: "Mean", W: 28, Align: "R"},
		{Title: "Error", W: 22, Align: "R"},
		{Title: "s", W: 20, Align: "R"},
		{Title: "Valid", W: 14, Align: "R"},
	}
	var rows []pdfdoc.Row
	for _, sw := range sws {
		name := pdfdoc.Cell{{Text: sw.Name, St: pdfdoc.Bold}}
		var about []string
		if sw.Channel != "" {
			about = append(about, chanWord(sw.Channel))
		}
		if rp, ok := d.retrimPassOf(sw); ok {
			about = append(about, "re-trim pass "+strconv.Itoa(rp.Pass)+", code "+fmtCode(rp.Code)+" in the "+dash(rp.DAC)+" DAC")
		}
		if sw.TempKnown {
			about = append(about, fmtCelsius(sw.TempC))
		}
		if len(about) > 0 {
			name = append(name, pdfdoc.Span{Text: strings.Join(about, " · "), St: pdfdoc.Small})
		}
		when := stageWord(certStage(sw.StageOf()))
		if sw.StageOf() == sequencer.Adjustment {
			when = "adjustment"
		}
		q := d.sweepUnit(sw)
		for i, p := range sw.Points {
			mean, errS, sd := "—", "—", "—"
			if p.Valid > 0 {
				mean = q.format(p.Mean, 7)
				if q == d.resp() {
					errS = q.format(p.Mean-(d.rec.IdealGain*p.Stimulus+d.rec.IdealOffset), 3)
				}
				if p.Valid > 1 {
					sd = q.format(p.SD, 2)
				}
			}
			valid := c1(fmt.Sprintf("%d/%d", p.Valid, len(p.Readings)), pdfdoc.Body)
			if p.Valid < len(p.Readings) || p.Valid == 0 {
				valid = c1(fmt.Sprintf("%d/%d", p.Valid, len(p.Readings)), pdfdoc.Bold.With(pdfdoc.Fail))
			}
			first, stage := name, c1(when, pdfdoc.Body)
			if i > 0 { // the same measurement at its next level
				first, stage = pdfdoc.Cell{}, pdfdoc.Cell{}
			}
			rows = append(rows, pdfdoc.Row{first, stage, c1(d.stim().format(p.Stimulus, 5), pdfdoc.Body),
				c1(mean, pdfdoc.Body), c1(errS, pdfdoc.Bold), c1(sd, pdfdoc.Body), valid})
		}
	}
	return pointTable{cols, rows, []pdfdoc.Group{{Title: "Measurements at fixed levels", N: len(cols)}}}, true
}

// retrimPassOf is the re-trim pass whose measurement sw is: the sweep the
// re-trim step records as "<step> pass N" on the pass's channel.
func (d *doc) retrimPassOf(sw sequencer.Sweep) (sequencer.RetrimPass, bool) {
	for _, p := range d.rec.Retrims {
		if p.Channel == sw.Channel && sw.Name == p.SweepName() {
			return p, true
		}
	}
	return sequencer.RetrimPass{}, false
}

// isRetrimPass reports whether sw is the measurement of a re-trim pass.
func (d *doc) isRetrimPass(sw sequencer.Sweep) bool {
	_, ok := d.retrimPassOf(sw)
	return ok
}

// sweepUnit is the quantity a sweep read: the record's response, or for a
// measure step of another quantity (a supply current read by a second meter)
// the unit of the results its step gave on its channel.
func (d *doc) sweepUnit(sw sequencer.Sweep) quantity {
	for _, r := range d.rec.Results {
		if r.Step != sw.Name || r.Channel != sw.Channel {
			continue
		}
		switch r.Unit {
		case "V", "A", "count":
			return quantityOf(r.Unit)
		}
	}
	return d.resp()
}

// otherQuantity reports whether a sweep of the record read another quantity
// than the unit's response.
func (d *doc) otherQuantity() bool {
	for _, sw := range d.rec.Sweeps {
		if d.sweepUnit(sw) != d.resp() {
			return true
		}
	}
	return false
}

// fmtCode writes a DAC code, a negative one with a minus sign: "−14".
func fmtCode(c int) string { return pdfdoc.Minus(strconv.Itoa(c)) }

// retrimNote says of a trim step's code that a closed-loop re-trim later
// moved it: "written by the trim; re-trimmed to −14 by “offset re-trim”", so
// that the code beside the final one in the trim table does not read as a
// contradiction. "" for any other result.
func (d *doc) retrimNote(r sequencer.Result) string {
	if r.Unit != "code" || !r.Valid || !d.stepKindIs(r.Step, r.Channel, "trim") {
		return ""
	}
	for _, g := range d.retrimGroups() {
		first, last := g.passes[0], g.passes[len(g.passes)-1]
		if g.channel == r.Channel && float64(first.Code) == r.Value && last.Next != first.Code {
			return "written by the trim; re-trimmed to " + fmtCode(last.Next) + " by “" + g.step + "”"
		}
	}
	return ""
}

// stepKindIs reports whether the record's step of that name (on channel ch,
// or of the whole unit) is of kind.
func (d *doc) stepKindIs(name, ch, kind string) bool {
	for _, s := range d.rec.Steps {
		if s.Name == name && (s.Channel == "" || s.Channel == ch) {
			return s.Kind == kind
		}
	}
	return false
}

// countsWord matches a number followed by the word "count" in a decision
// statement (the limits package writes the limit file's unit as it is):
// group 1 is the number.
var countsWord = regexp.MustCompile(`([−-]?[0-9][0-9.]*(?:e[−+-]?[0-9]+)?) count\b`)

// statementText is a decision statement as the certificate prints it: in a
// limit whose unit is "count", a number of counts reads "0.222 counts", as
// the tables write it; "1 count" stays one.
func statementText(s, unit string) string {
	if strings.TrimSpace(unit) != "count" {
		return s
	}
	return countsWord.ReplaceAllStringFunc(s, func(m string) string {
		n := countsWord.FindStringSubmatch(m)[1]
		if n == "1" || n == "−1" || n == "-1" {
			return m
		}
		return m + "s"
	})
}

// appliedZeros lists the station zeros the record's fits applied ("ô_s =
// −0.12 µV"), "" when none.
func (d *doc) appliedZeros() string {
	var out []string
	for _, z := range d.rec.Zeros {
		if !z.Applied {
			continue
		}
		for _, f := range d.rec.Fits {
			if f.SourceZero == z.Name && f.Channel == z.Channel {
				v := d.stim().format(z.Offset, 3)
				if r, ok := d.zeroResult(z); ok { // as every table writes the result
					v = d.shown(r).withU
				}
				out = append(out, "ô_s = "+v)
				break
			}
		}
	}
	return strings.Join(out, ", ")
}
