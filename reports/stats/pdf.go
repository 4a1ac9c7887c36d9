package stats

import (
	"bytes"
	"fmt"
	"io"
	"math"
	"slices"
	"strconv"
	"strings"
	"time"

	"trimline/instruments/units"
	"trimline/reports/chart"
	"trimline/reports/internal/atomicfile"
	"trimline/reports/internal/pdfdoc"
	"trimline/sequencer/spc"
)

// Page geometry of the lot report (A4 portrait), mm.
const (
	pdfMargin = 15.0
	pdfWidth  = pdfdoc.PageW - 2*pdfMargin
	pdfBottom = pdfdoc.PageH - 16 // lowest y the body reaches; the footer is below
)

// Colours of the lot report's plots; the shared ones are pdfdoc's.
var (
	pdfBarFill   = pdfdoc.Color{R: 120, G: 160, B: 210}
	pdfBarEdge   = pdfdoc.Color{R: 70, G: 110, B: 170}
	pdfMeanColor = pdfdoc.Color{R: 40, G: 120, B: 70}
)

// Text styles of the lot report beyond pdfdoc's: the page title, section
// headings, result titles and the labels on plots (the smallest text, 7 pt).
var (
	pdfTitleStyle   = pdfdoc.Style{Family: pdfdoc.Sans, Weight: "B", Size: 14, Color: pdfdoc.Ink}
	pdfSectionStyle = pdfdoc.Style{Family: pdfdoc.Sans, Weight: "B", Size: 11, Color: pdfdoc.Ink}
	pdfResultStyle  = pdfdoc.Style{Family: pdfdoc.Sans, Weight: "B", Size: 9, Color: pdfdoc.Ink}
	pdfPlotStyle    = pdfdoc.Style{Family: pdfdoc.Sans, Size: 7, Color: pdfdoc.Muted}
	pdfSmall        = pdfdoc.Small.Sized(7)
)

// WritePDF writes r as the A4 portrait lot report: the heading (ledger,
// filter, when generated), the population rules, the counts and rates, the
// Pareto of failing limits, then per toleranced result its histogram over
// the tolerance band (under- and overflow written at the ends) beside its
// numbers, the pre-trim results beside the post-trim ones, and each trend's
// charts of group means and spreads. Every number of a result is in its
// limit's unit, written beside it; a number that does not exist is "—". The
// same Report gives the same bytes (the PDF's creation date is r.Generated).
// Safe for concurrent use.
func WritePDF(w io.Writer, r Report) error {
	pdf := pdfdoc.New(r.Generated, pdfMargin, pdfMargin, pdfMargin)
	l := &lotDoc{r: r}
	l.Doc = pdfdoc.Doc{PDF: pdf, Left: pdfMargin, Width: pdfWidth}
	l.Need = func(h float64) bool {
		if l.Y+h <= pdfBottom {
			return false
		}
		l.newPage()
		return true
	}
	l.newPage()
	l.heading()
	l.population()
	l.rates()
	l.notes()
	l.pareto()
	l.results()
	l.pairs()
	l.trends()
	l.footers()
	if err := pdf.Error(); err != nil {
		return fmt.Errorf("stats: lot report: %w", err)
	}
	return pdf.Output(w)
}

// WriteFile writes r as WritePDF does to path atomically (a reader never sees
// half a file), mode 0644.
func WriteFile(path string, r Report) error {
	var b bytes.Buffer
	if err := WritePDF(&b, r); err != nil {
		return err
	}
	return atomicfile.Write(path, b.Bytes(), 0o644)
}

// lotDoc is the lot report being drawn.
type lotDoc struct {
	pdfdoc.Doc
	r Report
}

func (l *lotDoc) newPage() {
	l.PDF.AddPage()
	l.Y = pdfMargin
}

// text writes s in st at (x, baseline y).
func (l *lotDoc) text(x, y float64, s string, st pdfdoc.Style) {
	l.Use(st)
	l.PDF.Text(x, y, s)
}

// para writes s in st wrapped to w mm from x, advancing Y; first is written
// before the first line only (a bullet), the lines after it indented by its
// width.
func (l *lotDoc) para(x, w float64, first, s string, st pdfdoc.Style) {
	ind := 0.0
	if first != "" {
		ind = l.TextWidth(first, st)
	}
	for i, line := range l.Wrap(s, w-ind, st) {
		l.Need(st.LineH())
		if i == 0 && first != "" {
			l.text(x, l.Y+st.LineH()*0.75, first, st)
		}
		l.text(x+ind, l.Y+st.LineH()*0.75, line, st)
		l.Y += st.LineH()
	}
}

// section starts a section with a title over a rule, on a new page when less
// than keep mm (the title and what must follow it) are free.
func (l *lotDoc) section(title string, keep float64) {
	l.Need(keep + 12)
	if l.Y > pdfMargin {
		l.Y += 4
	}
	l.text(l.Left, l.Y+pdfSectionStyle.LineH()*0.75, title, pdfSectionStyle)
	l.Y += pdfSectionStyle.LineH() + 0.5
	l.Rule(l.Y, pdfdoc.Rule, 0.3)
	l.Y += 2.5
}

func (l *lotDoc) heading() {
	r := l.r
	l.text(l.Left, l.Y+pdfTitleStyle.LineH()*0.75, "Lot report: quality numbers", pdfTitleStyle)
	l.Y += pdfTitleStyle.LineH() + 1.5
	lines := [][2]string{
		{"Ledger", pdfOrDash(r.Ledger)},
		{"Runs counted", pdfFilterText(r.Filter)},
		{"Trends by", pdfTrendBy(r.By)},
		{"Generated", pdfWhen(r.Generated)},
	}
	for _, kv := range lines {
		l.text(l.Left, l.Y+pdfdoc.Body.LineH()*0.75, kv[0], pdfdoc.Bold)
		l.para(l.Left+28, l.Width-28, "", kv[1], pdfdoc.Body)
	}
}

// filterText says which runs the filter lets through.
func pdfFilterText(f Filter) string {
	var parts []string
	for _, kv := range [][2]string{{"product", f.Product}, {"revision", f.Revision}, {"station", f.Station}, {"site", f.Site}, {"lot", f.Lot}} {
		if kv[1] != "" {
			parts = append(parts, kv[0]+" "+kv[1])
		}
	}
	if !f.Since.IsZero() {
		parts = append(parts, "finished from "+f.Since.UTC().Format("2006-01-02 15:04 UTC"))
	}
	if !f.Until.IsZero() {
		parts = append(parts, "finished before "+f.Until.UTC().Format("2006-01-02 15:04 UTC"))
	}
	s := "all runs"
	if len(parts) > 0 {
		s = strings.Join(parts, ", ")
	}
	if f.IncludeEngineering {
		return s + "; engineering runs included"
	}
	return s + "; engineering runs left out"
}

func pdfTrendBy(by string) string {
	switch by {
	case ByLot:
		return "lot"
	case ByStation:
		return "station"
	}
	return "day (UTC)"
}

func (l *lotDoc) population() {
	l.section("Who is counted", 20)
	if len(l.r.Population) == 0 {
		l.para(l.Left, l.Width, "", "No population rules stated.", pdfSmall)
	}
	for _, s := range l.r.Population {
		l.para(l.Left, l.Width, "•  ", s, pdfdoc.Body)
		l.Y += 0.6
	}
}

func (l *lotDoc) rates() {
	r, c := l.r, l.r.Counts
	rows := []pdfdoc.Row{
		pdfRateRow("Yield", r.Yield, fmt.Sprintf("%d of %d units passed (latest attempt); %d failed, %d held for review", c.Passed, c.Units, c.Failed, c.Held)),
		pdfRateRow("First-pass yield", r.FirstPassYield, fmt.Sprintf("%d of %d units passed their first attempt", c.FirstPass, c.Units)),
		pdfRateRow("Retest rate", r.RetestRate, fmt.Sprintf("%d of %d units were tested more than once (%d attempts, %d review decisions)", c.Retested, c.Units, c.Attempts, c.Decisions)),
		pdfRateRow("Fault rate", r.FaultRate, fmt.Sprintf("%d of %d runs ended in FAULT; %d aborted", c.Faults, c.Runs, c.Aborted)),
	}
	cols := []pdfdoc.Column{
		{Title: "Rate", W: 34, Align: "L"},
		{Title: "Value", W: 22, Align: "R"},
		{Title: "From", W: pdfWidth - 56, Align: "L", Gap: 3},
	}
	l.section("Counts and rates", l.TableHeight(cols, rows, nil))
	l.Table(cols, rows, nil)
	var more []string
	if c.Engineering > 0 {
		what := "left out"
		if r.Filter.IncludeEngineering {
			what = "counted"
		}
		more = append(more, fmt.Sprintf("%d engineering runs %s.", c.Engineering, what))
	}
	if c.NoCompleted > 0 {
		more = append(more, fmt.Sprintf("%d serials have only FAULT or ABORTED runs: not units, counted only in the fault rate.", c.NoCompleted))
	}
	if len(more) > 0 {
		l.Y += 1
		l.para(l.Left, l.Width, "", strings.Join(more, " "), pdfSmall)
	}
}

func pdfRateRow(name string, v float64, from string) pdfdoc.Row {
	return pdfdoc.Row{{{Text: name, St: pdfdoc.Bold}}, {{Text: pdfPercent(v), St: pdfdoc.Bold}}, {{Text: from, St: pdfdoc.Body}}}
}

func (l *lotDoc) notes() {
	if len(l.r.Notes) == 0 {
		return
	}
	l.section("Notes", 10)
	for _, s := range l.r.Notes {
		l.para(l.Left, l.Width, "•  ", s, pdfdoc.Body)
		l.Y += 0.6
	}
}

// pareto draws the failing limits as bars: failed units, then held ones.
func (l *lotDoc) pareto() {
	ps := l.r.Pareto
	const rowH = 4.6
	l.section("Failing limits (Pareto)", math.Min(float64(len(ps)), 4)*rowH+6)
	if len(ps) == 0 {
		l.para(l.Left, l.Width, "", "No unit failed or was held on a limit.", pdfdoc.Body)
		return
	}
	const nameW, countW = 62.0, 58.0
	barX, barW := l.Left+nameW+2, l.Width-nameW-2-countW
	most := 1
	for _, p := range ps {
		most = max(most, p.Failed+p.Held, p.First)
	}
	for i, p := range ps {
		l.Need(rowH)
		if i%2 == 1 {
			l.Stripe(l.Y, rowH, pdfdoc.Zebra)
		}
		base := l.Y + rowH*0.68
		name := p.Limit
		if p.Channel != "" {
			name += " @ " + p.Channel
		}
		l.Use(pdfdoc.Body)
		l.text(l.Left+1, base, l.Fit(name, nameW-2), pdfdoc.Body)
		wf := barW * float64(p.Failed) / float64(most)
		wh := barW * float64(p.Held) / float64(most)
		if wf > 0 {
			l.FillRect(barX, l.Y+0.8, wf, rowH-1.6, pdfdoc.Fail)
		}
		if wh > 0 {
			l.FillRect(barX+wf, l.Y+0.8, wh, rowH-1.6, pdfdoc.Review)
		}
		if p.First > 0 { // the first attempts, as an outline over the bars
			l.Frame(barX, l.Y+0.5, barW*float64(p.First)/float64(most), rowH-1, pdfdoc.Ink, 0.25)
		}
		s := fmt.Sprintf("%d failed, %d held; %d at first attempt", p.Failed, p.Held, p.First)
		l.text(l.Left+l.Width-countW+2, base, s, pdfdoc.Body)
		l.Y += rowH
	}
	l.Y += 1
	l.FillRect(l.Left+1, l.Y+0.6, 3, 2, pdfdoc.Fail)
	l.text(l.Left+5, l.Y+2.4, "failed (latest attempt)", pdfSmall)
	l.FillRect(l.Left+36, l.Y+0.6, 3, 2, pdfdoc.Review)
	l.text(l.Left+40, l.Y+2.4, "held for review", pdfSmall)
	l.Frame(l.Left+66, l.Y+0.4, 3, 2.4, pdfdoc.Ink, 0.25)
	l.text(l.Left+70, l.Y+2.4, "did not pass at the first attempt", pdfSmall)
	l.Y += 4
}

// results draws, per toleranced result, its histogram beside its numbers.
func (l *lotDoc) results() {
	const histH = 52.0
	l.section("Capability per toleranced result", histH+12)
	if len(l.r.Results) == 0 {
		l.para(l.Left, l.Width, "", "No toleranced result among the runs counted.", pdfdoc.Body)
		return
	}
	const closeH = 40.0
	for i, rs := range l.r.Results {
		close := crowded(rs.Hist) && len(rs.DataHist.Counts) > 0
		need := histH + 12
		if close {
			need += closeH + 5 // a close-up stays on its histogram's page
		}
		l.Need(need)
		if i > 0 {
			l.Y += 3
		}
		l.resultTitle(rs, l.Left, l.Width)
		top := l.Y
		l.histogram(rs, rs.Hist, l.Left, top, 104, histH)
		l.numbers(rs, l.Left+110, top, l.Width-110)
		l.Y = top + histH + 1
		if close {
			// The band's bins are too wide to show the shape of a capable
			// process: the values again, over their own range.
			l.text(l.Left, l.Y+pdfPlotStyle.LineH()*0.75, "Close-up: the same values over their own range (within Tukey's fences, widened by a quarter each side)", pdfPlotStyle.With(pdfdoc.Muted))
			l.Y += pdfPlotStyle.LineH() + 0.5
			l.histogram(rs, rs.DataHist, l.Left, l.Y, 104, closeH)
			l.Y += closeH + 1
		}
	}
}

// shapeHist is the histogram that shows rs's shape: over the tolerance band,
// or over the values' own range when the band's is crowded.
func shapeHist(rs ResultStats) spc.Histogram {
	if crowded(rs.Hist) && len(rs.DataHist.Counts) > 0 {
		return rs.DataHist
	}
	return rs.Hist
}

// crowded says whether h holds its values in so few bins that their shape
// cannot be seen: nine in ten of the values it bins in four bins or fewer
// (a few stray values in other bins do not make the shape visible).
func crowded(h spc.Histogram) bool {
	counts := slices.Clone(h.Counts)
	slices.SortFunc(counts, func(a, b int) int { return b - a })
	total, top := 0, 0
	for i, c := range counts {
		total += c
		if i < 4 {
			top += c
		}
	}
	return total > 0 && 10*top >= 9*total
}

// resultTitle writes a result's name, unit, stage and limit on two lines.
func (l *lotDoc) resultTitle(rs ResultStats, x, w float64) {
	t := rs.Name
	if u := units.Display(rs.Unit); u != "" {
		t += " [" + u + "]"
	}
	l.text(x, l.Y+pdfResultStyle.LineH()*0.75, l.fit(t, w, pdfResultStyle), pdfResultStyle)
	l.Y += pdfResultStyle.LineH()
	sub := pdfStageText(rs.Stage)
	if rs.Limit != "" {
		sub += " · limit “" + rs.Limit + "”"
	}
	sub += " · tolerance " + pdfToleranceText(rs)
	l.text(x, l.Y+pdfPlotStyle.LineH()*0.75, l.fit(sub, w, pdfPlotStyle), pdfPlotStyle)
	l.Y += pdfPlotStyle.LineH() + 1
}

func (l *lotDoc) fit(s string, w float64, st pdfdoc.Style) string {
	l.Use(st)
	return l.Fit(s, w)
}

func pdfStageText(stage string) string {
	switch stage {
	case "as_found":
		return "pre-trim (as found)"
	case "as_left":
		return "post-trim (as left)"
	case "adjustment":
		return "post-trim (adjustment)"
	case "":
		return "stage not recorded"
	}
	return stage
}

// toleranceText writes a result's tolerance with its unit.
func pdfToleranceText(rs ResultStats) string {
	u := pdfSp(units.Display(rs.Unit))
	switch {
	case rs.Lower != nil && rs.Upper != nil:
		return pdfNum(*rs.Lower) + " … " + pdfNum(*rs.Upper) + u
	case rs.Lower != nil:
		return "≥ " + pdfNum(*rs.Lower) + u
	case rs.Upper != nil:
		return "≤ " + pdfNum(*rs.Upper) + u
	}
	return "none"
}

// histogram draws hist (rs.Hist or rs.DataHist) in the box (x, y, w, h): the counts per bin over
// the band, the tolerance limits and the mean as labelled lines, and the
// values below and above the band written at its ends.
func (l *lotDoc) histogram(rs ResultStats, hist spc.Histogram, x, y, w, h float64) {
	pdf := l.PDF
	const axisW, labelsH, ticksH = 8.0, 7.0, 8.0
	px, py, pw, ph := x+axisW, y+labelsH, w-axisW-1, h-labelsH-ticksH
	if len(hist.Counts) == 0 || !pdfFinite(hist.Lo) || !pdfFinite(hist.Hi) || !(hist.Hi > hist.Lo) {
		l.Frame(px, py, pw, ph, pdfdoc.Rule, 0.25)
		msg := "no histogram: no values"
		if rs.N > 0 || hist.Under+hist.Over > 0 {
			msg = fmt.Sprintf("no histogram: no tolerance band to bin over (%d values)", rs.N)
		}
		l.Use(pdfPlotStyle)
		l.TextCentre(px+pw/2, py+ph/2, msg)
		return
	}
	most := 1
	for _, c := range hist.Counts {
		most = max(most, c)
	}
	ystep := math.Max(1, math.Ceil(pdfdoc.NiceStep(float64(most), 4)))
	// Headroom above the tallest bar for the counts outside the band.
	ymax := math.Ceil(float64(most)*1.2/ystep) * ystep
	yOf := func(c float64) float64 { return py + ph - c/ymax*ph }
	ax := pdfdoc.NewAxis(hist.Lo, hist.Hi, 6)
	xOf := func(v float64) float64 { return px + (v-hist.Lo)/(hist.Hi-hist.Lo)*pw }

	// Grid, count ticks, value ticks.
	l.Use(pdfPlotStyle)
	for c := 0.0; c <= ymax+1e-9; c += ystep {
		l.HLine(px, yOf(c), pw, pdfdoc.Grid, 0.15)
		l.TextRight(px-1.2, yOf(c)+0.9, strconv.FormatFloat(c, 'f', 0, 64))
	}
	l.Rotated(x+1.6, py+ph/2, func() { l.TextCentre(x+1.6, py+ph/2, "units") })
	for _, t := range ax.Ticks {
		l.Stroke(pdfdoc.Muted)
		pdf.SetLineWidth(0.15)
		pdf.Line(xOf(t), py+ph, xOf(t), py+ph+1)
		l.TextCentre(xOf(t), py+ph+3.6, ax.Label(t))
	}
	unit := units.Display(rs.Unit)
	xl := "value"
	if unit != "" {
		xl += " [" + unit + "]"
	}
	l.TextCentre(px+pw/2, py+ph+7, xl)

	// Bars.
	bw := pw / float64(len(hist.Counts))
	l.Fill(pdfBarFill)
	l.Stroke(pdfBarEdge)
	pdf.SetLineWidth(0.1)
	for k, c := range hist.Counts {
		if c > 0 {
			pdf.Rect(px+float64(k)*bw, yOf(float64(c)), bw, py+ph-yOf(float64(c)), "FD")
		}
	}
	l.Frame(px, py, pw, ph, pdfdoc.Rule, 0.25)

	// Tolerance limits and the mean: lines, labels above the plot pushed
	// apart along it.
	type mark struct {
		v     float64
		label string
		col   pdfdoc.Color
		dash  bool
	}
	var marks []mark
	if rs.Lower != nil && pdfFinite(*rs.Lower) {
		marks = append(marks, mark{*rs.Lower, "LSL " + pdfNum(*rs.Lower), pdfdoc.Fail, false})
	}
	if pdfFinite(rs.Mean) && rs.N > 0 {
		marks = append(marks, mark{rs.Mean, "mean " + pdfNum(rs.Mean), pdfMeanColor, true})
	}
	if rs.Upper != nil && pdfFinite(*rs.Upper) {
		marks = append(marks, mark{*rs.Upper, "USL " + pdfNum(*rs.Upper), pdfdoc.Fail, false})
	}
	var shown []mark
	for _, m := range marks {
		if m.v >= hist.Lo && m.v <= hist.Hi {
			shown = append(shown, m)
		}
	}
	want := make([]float64, len(shown))
	widest := 0.0
	l.Use(pdfPlotStyle)
	for i, m := range shown {
		want[i] = xOf(m.v)
		widest = math.Max(widest, pdf.GetStringWidth(m.label))
	}
	lo, hi := x+widest/2, x+w-widest/2
	for i := range want {
		want[i] = math.Max(lo, math.Min(want[i], hi))
	}
	at := pdfdoc.Spread(want, widest+1.5, lo, hi)
	for i, m := range shown {
		l.Stroke(m.col)
		pdf.SetLineWidth(0.4)
		if m.dash {
			pdf.SetDashPattern([]float64{1.4, 0.9}, 0)
		}
		pdf.Line(xOf(m.v), py, xOf(m.v), py+ph)
		pdf.SetDashPattern(nil, 0)
		pdf.SetLineWidth(0.15)
		pdf.Line(at[i], py-2.2, xOf(m.v), py)
		l.Use(pdfPlotStyle.With(m.col))
		l.TextCentre(at[i], py-2.8, m.label)
	}

	// The values outside the band, at its ends, inside the plot's top corners.
	ends := []struct {
		n      int
		s      string
		right  bool
		beyond float64
	}{
		{hist.Under, fmt.Sprintf("◄ %d below %s", hist.Under, pdfNum(hist.Lo)), false, hist.Lo},
		{hist.Over, fmt.Sprintf("%d above %s ►", hist.Over, pdfNum(hist.Hi)), true, hist.Hi},
	}
	for _, e := range ends {
		st := pdfPlotStyle
		if e.n > 0 {
			st = pdfdoc.Bold.Sized(7).With(pdfdoc.Fail)
		}
		sw := l.TextWidth(e.s, st)
		tx := px + 1.2
		if e.right {
			tx = px + pw - 1.2 - sw
		}
		l.FillRect(tx-0.6, py+0.8, sw+1.2, 3.2, pdfdoc.White)
		l.text(tx, py+3.3, e.s, st)
	}
}

// numbers writes a result's numbers in a column of label and value rows.
func (l *lotDoc) numbers(rs ResultStats, x, y, w float64) {
	u := pdfSp(units.Display(rs.Unit))
	q := func(v float64) string {
		if !pdfFinite(v) {
			return "—"
		}
		return pdfNum(v) + u
	}
	n := strconv.Itoa(rs.N)
	if rs.Invalid > 0 {
		n += fmt.Sprintf("  (+%d invalid)", rs.Invalid)
	}
	ci := ""
	if pdfFinite(l.r.Confidence) && l.r.Confidence > 0 {
		ci = units.FormatSig(l.r.Confidence*100, 3) + "\u00a0% "
	}
	outside := "—"
	if rs.N > 0 {
		outside = fmt.Sprintf("%d of %d (%s)", rs.Outside, rs.N, pdfPercent(float64(rs.Outside)/float64(rs.N)))
	}
	rows := [][2]string{
		{"n", n},
		{"mean", q(rs.Mean)},
		{"SD within (MR/1.128)", q(rs.SDWithin)},
		{"SD overall", q(rs.SDOverall)},
		{"min … max", pdfRangeText(rs.Min, rs.Max, u)},
		{"Cp (" + ci + "CI, χ²)", pdfIndex(rs.Cp) + pdfCI(rs.CpCI)},
		{"Cpk (" + ci + "CI, Bissell)", pdfIndex(rs.Cpk) + pdfCI(rs.CpkCI)},
		{"Pp", pdfIndex(rs.Pp)},
		{"Ppk", pdfIndex(rs.Ppk)},
		{"expected outside (normal)", units.FormatProbability(rs.FractionOutside)},
		{"measured outside", outside},
		{"mean expanded U", pdfMeanU(rs.MeanU, u)},
	}
	const pitch = 3.9
	for i, kv := range rows {
		yy := y + 1 + float64(i)*pitch
		if i%2 == 1 {
			l.FillRect(x, yy, w, pitch, pdfdoc.Zebra)
		}
		l.text(x+1, yy+pitch*0.72, l.fit(kv[0], 33, pdfdoc.Body.With(pdfdoc.Muted)), pdfdoc.Body.With(pdfdoc.Muted))
		st := pdfdoc.Body
		if strings.HasPrefix(kv[0], "Cpk") || strings.HasPrefix(kv[0], "Cp ") {
			st = pdfdoc.Bold
		}
		l.text(x+35, yy+pitch*0.72, l.fit(kv[1], w-36, st), st)
	}
}

func pdfRangeText(lo, hi float64, u string) string {
	if !pdfFinite(lo) || !pdfFinite(hi) {
		return "—"
	}
	return pdfNum(lo) + " … " + pdfNum(hi) + u
}

func pdfMeanU(v float64, u string) string {
	if !pdfFinite(v) {
		return "— (not recorded)"
	}
	return "± " + pdfNum(v) + u
}

// index writes a capability index with three significant digits.
func pdfIndex(v float64) string {
	if !pdfFinite(v) {
		return "—"
	}
	if math.Abs(v) < 10 {
		return units.FormatAt(v, 2) // indices to two decimals (common practice)
	}
	return units.FormatSig(v, 3)
}

// ci writes a confidence interval after its index: "  (0.91 – 1.32)".
func pdfCI(c [2]float64) string {
	if !pdfFinite(c[0]) && !pdfFinite(c[1]) {
		return ""
	}
	return "  (" + pdfIndex(c[0]) + " – " + pdfIndex(c[1]) + ")"
}

// pairs draws each pre-trim result's histogram beside its post-trim one.
func (l *lotDoc) pairs() {
	if len(l.r.Pairs) == 0 {
		return
	}
	const histH = 50.0
	l.section("Pre-trim beside post-trim", histH+16)
	l.para(l.Left, l.Width, "", "What comes off assembly (left) and what the trim achieves (right), each over its own tolerance band, or over its values' own range where the band's bins are too wide to show their shape (the axis says which: a band's plot has its tolerance limits drawn).", pdfSmall)
	l.Y += 1
	half := (l.Width - 6) / 2
	for i, p := range l.r.Pairs {
		if p.Pre < 0 || p.Pre >= len(l.r.Results) || p.Post < 0 || p.Post >= len(l.r.Results) {
			continue
		}
		l.Need(histH + 16)
		if i > 0 {
			l.Y += 3
		}
		top := l.Y
		for k, idx := range []int{p.Pre, p.Post} {
			rs := l.r.Results[idx]
			x := l.Left + float64(k)*(half+6)
			l.Y = top
			l.resultTitle(rs, x, half)
			l.histogram(rs, shapeHist(rs), x, l.Y, half, histH)
			s := fmt.Sprintf("n %d · mean %s · SD overall %s · Cpk %s", rs.N, pdfNumU(rs.Mean, rs.Unit), pdfNumU(rs.SDOverall, rs.Unit), pdfIndex(rs.Cpk))
			l.text(x, l.Y+histH+2.4, l.fit(s, half, pdfSmall), pdfSmall)
		}
		l.Y = top + pdfResultStyle.LineH() + pdfPlotStyle.LineH() + 1 + histH + 4
	}
}

// trends draws each trend's charts of group means and spreads.
func (l *lotDoc) trends() {
	if len(l.r.Trends) == 0 {
		return
	}
	const meansH, spreadsH = 52.0, 42.0
	block := 2*pdfdoc.Bold.LineH() + meansH + spreadsH + 3*pdfSmall.LineH() + 16
	l.section("Trends per "+strings.TrimSuffix(pdfTrendBy(l.r.Trends[0].By), " (UTC)"), block)
	for i, t := range l.r.Trends {
		if t.Result < 0 || t.Result >= len(l.r.Results) {
			continue
		}
		rs := l.r.Results[t.Result]
		l.Need(block)
		if i > 0 {
			l.Y += 4
		}
		l.resultTitle(rs, l.Left, l.Width)
		keys := make([]string, len(t.Groups))
		for k, g := range t.Groups {
			keys[k] = g.Key
		}
		if len(keys) != len(t.Means.Points) {
			keys = nil
		}
		unit := units.Display(rs.Unit)
		for _, c := range []struct {
			ch    spc.Chart
			title string
			h     float64
		}{
			{t.Means, fmt.Sprintf("Group means (X-bar) [%s]: limits mean ± 3·σ/√n per group, σ = SD within %s", unit, pdfNumU(t.Means.Sigma, rs.Unit)), meansH},
			{t.Spreads, fmt.Sprintf("Group standard deviations (s) [%s]: limits from c4 per group; a group of one has none", unit), spreadsH},
		} {
			l.text(l.Left, l.Y+pdfdoc.Bold.LineH()*0.75, l.fit(c.title, l.Width, pdfdoc.Bold), pdfdoc.Bold)
			l.Y += pdfdoc.Bold.LineH() + 1
			chart.DrawPanel(&l.Doc, c.ch, l.Left, l.Y, l.Width, c.h, keys)
			l.Y += c.h
			l.signals(c.ch, t.Groups)
			l.Y += 2
		}
		var ns []string
		for _, g := range t.Groups {
			ns = append(ns, fmt.Sprintf("%s %d", g.Key, g.N))
		}
		l.para(l.Left, l.Width, "", "Values per group: "+strings.Join(ns, ", ")+".", pdfSmall)
	}
}

// signals lists the groups a chart signals on, by their keys.
func (l *lotDoc) signals(c spc.Chart, groups []Group) {
	if len(c.Signals) == 0 {
		l.para(l.Left, l.Width, "", "Signals: none.", pdfSmall)
		return
	}
	parts := make([]string, len(c.Signals))
	for i, s := range c.Signals {
		key := strconv.Itoa(s.Index)
		if s.Index >= 1 && s.Index <= len(groups) {
			key = groups[s.Index-1].Key
		}
		parts[i] = key + " " + strings.ReplaceAll(s.Rule, "_", " ")
	}
	l.para(l.Left, l.Width, "", "Signals: "+strings.Join(parts, ", ")+".", pdfSmall.With(pdfdoc.Fail))
}

// footers writes the footer of every page once the page count is known.
func (l *lotDoc) footers() {
	n := l.PDF.PageCount()
	for p := 1; p <= n; p++ {
		l.PDF.SetPage(p)
		l.Rule(pdfdoc.PageH-12, pdfdoc.Rule, 0.2)
		left := "Lot report · " + pdfOrDash(l.r.Ledger) + " · generated " + pdfWhen(l.r.Generated)
		l.text(l.Left, pdfdoc.PageH-8, l.fit(left, l.Width-30, pdfPlotStyle), pdfPlotStyle)
		l.TextRight(l.Left+l.Width, pdfdoc.PageH-8, fmt.Sprintf("page %d of %d", p, n))
	}
}

// num writes a number of a result with 4 significant digits and a real minus.
func pdfNum(v float64) string {
	if !pdfFinite(v) {
		return "—"
	}
	return units.FormatSig(v, 4)
}

// numU writes v in unit u ("uV" written µV); "—" when v does not exist.
func pdfNumU(v float64, u string) string {
	if !pdfFinite(v) {
		return "—"
	}
	return pdfNum(v) + pdfSp(units.Display(u))
}

// percent writes a fraction 0–1 as a percentage; "—" when it does not exist.
func pdfPercent(v float64) string {
	if !pdfFinite(v) {
		return "—"
	}
	return units.FormatPercent(v)
}

// sp is " " + u, or "" for no unit.
func pdfSp(u string) string {
	if u == "" {
		return ""
	}
	return " " + u
}

// pdfWhen writes a time in UTC to the minute; "—" for the zero time.
func pdfWhen(t time.Time) string {
	if t.IsZero() {
		return "—"
	}
	return t.UTC().Format("2006-01-02 15:04 UTC")
}

func pdfOrDash(s string) string {
	if s == "" {
		return "—"
	}
	return s
}

func pdfFinite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
