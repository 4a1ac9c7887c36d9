// Package chart draws control charts (sequencer/spc) as a PDF: one A4
// landscape page with a panel per chart, its centre line and limits drawn and
// labelled at the right edge (labels pushed apart so they never overlap), the
// plotted statistic joined point to point, and every point that signals marked
// in red and listed under its panel with the rule it broke.
//
// The drawing goes through reports/internal/pdfdoc, so the same charts and
// options give the same bytes. WritePDF is safe for concurrent use.
package chart

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"time"

	"github.com/jung-kurt/gofpdf"

	"trimline/reports/internal/atomicfile"
	"trimline/reports/internal/pdfdoc"
	"trimline/sequencer/spc"
)

// Options say what the page is about.
type Options struct {
	Title string    // the page title, e.g. "Individuals and moving-range chart"
	Lines []string  // short lines under the title: the file, the column, the parameters
	Stamp time.Time // creation date written into the PDF; zero: the Unix epoch
}

// Page geometry of A4 landscape, in millimetres.
const (
	pageW  = 297.0
	pageH  = 210.0
	margin = 14.0
	labelW = 34.0 // room right of a plot for the limit labels
	axisW  = 18.0 // room left of a plot for the tick labels
)

// Colours of the lines.
var (
	seriesColor = pdfdoc.Color{R: 31, G: 78, B: 140}
	lowerColor  = pdfdoc.Color{R: 120, G: 64, B: 150}
	centreColor = pdfdoc.Color{R: 40, G: 120, B: 70}
)

// WritePDF draws charts (one panel each, top to bottom, at most 3) on one A4
// landscape page and writes the PDF to w.
func WritePDF(w io.Writer, charts []spc.Chart, o Options) error {
	if len(charts) == 0 || len(charts) > 3 {
		return fmt.Errorf("chart: expected 1 to 3 charts, got %d", len(charts))
	}
	for _, c := range charts {
		if len(c.Points) == 0 {
			return errNoPoints
		}
	}
	pdf := pdfdoc.New(o.Stamp, margin, margin, margin)
	pdf.AddPageFormat("L", gofpdf.SizeType{Wd: pdfdoc.PageW, Ht: pdfdoc.PageH})
	d := &pdfdoc.Doc{PDF: pdf, Left: margin, Width: pageW - 2*margin, Y: margin}

	title := pdfdoc.Style{Family: pdfdoc.Sans, Weight: "B", Size: 14, Color: pdfdoc.Ink}
	d.Use(title)
	pdf.Text(d.Left, d.Y+title.LineH()*0.75, d.Fit(o.Title, d.Width))
	d.Y += title.LineH() + 1
	d.Use(pdfdoc.Body.With(pdfdoc.Muted))
	for _, l := range o.Lines {
		for _, wl := range d.Wrap(l, d.Width, pdfdoc.Body) {
			pdf.Text(d.Left, d.Y+pdfdoc.Body.LineH()*0.75, wl)
			d.Y += pdfdoc.Body.LineH()
		}
	}
	d.Y += 3

	// Each panel gets an equal share of what is left: a title line, the plot,
	// the x-axis labels and its list of signals.
	signalsH := 2*pdfdoc.Small.LineH() + 1
	share := (pageH - margin - d.Y) / float64(len(charts))
	for _, c := range charts {
		top := d.Y
		plotTop := top + pdfdoc.Bold.LineH() + 1
		plotH := share - (plotTop - top) - 8 - signalsH - 4 // 4 mm before the next panel
		plot(d, c, d.Left+axisW, plotTop, d.Width-axisW-labelW, plotH, nil, pdfdoc.Small)
		signalText(d, c, plotTop+plotH+7, signalsH)
		d.Use(pdfdoc.Bold)
		pdf.Text(d.Left, top+pdfdoc.Bold.LineH()*0.75, panelTitle(c))
		d.Y = top + share
	}
	if err := pdf.Error(); err != nil {
		return fmt.Errorf("chart: %w", err)
	}
	return pdf.Output(w)
}

// panelTitle names a chart and the sigma its limits use.
func panelTitle(c spc.Chart) string {
	name := map[string]string{
		"individuals":  "Individuals (I)",
		"moving_range": "Moving range (MR)",
		"ewma":         "EWMA",
		"cusum":        "Tabular CUSUM: S_hi above zero, S_lo below",
	}[c.Kind]
	if name == "" {
		name = c.Kind
	}
	if c.Kind == "cusum" { // its limits are h, not a multiple of sigma
		return fmt.Sprintf("%s   (%d points)", name, len(c.Points))
	}
	return fmt.Sprintf("%s   (%d points, sigma %s)", name, len(c.Points), num(c.Sigma))
}

// series is one line of a panel: a value per point (NaN: none there).
type series struct {
	ys    []float64
	color pdfdoc.Color
}

// panelSeries are the lines a chart plots: the statistic, and for a CUSUM
// also S_lo (zero or negative).
func panelSeries(c spc.Chart) []series {
	s := series{ys: make([]float64, len(c.Points)), color: seriesColor}
	for i, p := range c.Points {
		s.ys[i] = p.Statistic
	}
	out := []series{s}
	if c.Kind == "cusum" {
		lo := series{ys: make([]float64, len(c.Points)), color: lowerColor}
		for i, p := range c.Points {
			lo.ys[i] = p.Lower // S_lo, zero or negative
		}
		out = append(out, lo)
	}
	return out
}

// perPointLimits reports whether any point's limits differ from the chart's
// steady-state ones (the early points of an EWMA).
func perPointLimits(c spc.Chart) bool {
	for _, p := range c.Points {
		if p.UCL != c.UCL || p.LCL != c.LCL {
			return true
		}
	}
	return false
}

// Room a panel keeps around its plot, mm: at the left for the y tick labels
// (PanelAxisW), at the right for the limit labels (PanelLabelW), below for
// the x tick labels (PanelTicksH).
const (
	PanelAxisW  = axisW
	PanelLabelW = labelW
	PanelTicksH = 6.0
)

// DrawPanel draws chart c as a panel filling the box (x, y, w, h) of d's
// current page, mm: its plot (grid, y tick labels at the left, point numbers
// or xlabels below, the centre line and steady-state limits labelled at the
// right edge and pushed apart so they never overlap), each point's own limits
// where they differ from the steady state (the early points of an EWMA, the
// subgroups of unequal size of an X̄ or s chart), and the plotted statistic
// with its signalling points in red. A NaN statistic or limit (the s of a
// group of one) is a gap: no point, no line through it. xlabels, when not nil,
// name the points (one per point: a day, a lot) instead of their numbers;
// labels that would collide are thinned out. Its text is 7 pt. The panel title and the list of
// signals are the caller's. c needs at least one point; a chart without one
// draws an empty frame.
func DrawPanel(d *pdfdoc.Doc, c spc.Chart, x, y, w, h float64, xlabels []string) {
	plot(d, c, x+axisW, y, w-axisW-labelW, h-PanelTicksH, xlabels, pdfdoc.Small.Sized(7))
}

// plot draws one chart's plot in the box (x, y, w, h), its tick and limit
// labels outside it in style st (DrawPanel).
func plot(d *pdfdoc.Doc, c spc.Chart, x, y, w, h float64, xlabels []string, st pdfdoc.Style) {
	pdf := d.PDF
	n := len(c.Points)
	// The moving-range chart's first point is the second observation.
	first := 1
	if c.Kind == "moving_range" {
		first = 2
	}
	if n == 0 {
		d.Frame(x, y, w, h, pdfdoc.Rule, 0.25)
		return
	}
	ser := panelSeries(c)
	lo, hi := math.Inf(1), math.Inf(-1)
	widen := func(v float64) {
		if finite(v) {
			lo, hi = math.Min(lo, v), math.Max(hi, v)
		}
	}
	widen(c.LCL)
	widen(c.Center)
	widen(c.UCL)
	for _, s := range ser {
		for _, v := range s.ys {
			widen(v)
		}
	}
	for _, p := range c.Points {
		widen(p.LCL)
		widen(p.UCL)
	}
	if lo > hi { // nothing finite to show
		lo, hi = 0, 1
	}
	ya := pdfdoc.PaddedAxis(lo, hi, 0.08, 6)
	py := func(v float64) float64 { return y + h - ya.Pos(v, h) }
	xlo, xhi := float64(first)-0.5, float64(first+n-1)+0.5
	px := func(i int) float64 { return x + (float64(first+i)-xlo)/(xhi-xlo)*w }

	// Grid and y tick labels.
	d.Use(st)
	for _, t := range ya.Ticks {
		d.HLine(x, py(t), w, pdfdoc.Grid, 0.2)
		d.TextRight(x-1.5, py(t)+1, ya.Label(t))
	}
	tick := func(xx float64, label string) {
		d.Stroke(pdfdoc.Rule)
		pdf.SetLineWidth(0.2)
		pdf.Line(xx, y+h, xx, y+h+1.2)
		d.TextCentre(xx, y+h+4, label)
	}
	if len(xlabels) == n {
		// Every k-th point named, k as small as keeps the names 1.5 mm apart.
		widest := 0.0
		for _, l := range xlabels {
			widest = math.Max(widest, pdf.GetStringWidth(l))
		}
		k := max(1, int(math.Ceil((widest+1.5)/(w/(xhi-xlo)))))
		for i := 0; i < n; i += k {
			tick(px(i), xlabels[i])
		}
	} else {
		// x ticks: whole point numbers, about 20 of them.
		step := math.Max(1, pdfdoc.NiceStep(xhi-xlo, 20))
		step = math.Ceil(step)
		for k := math.Ceil(xlo/step) * step; k <= xhi; k += step {
			if k < float64(first) {
				continue
			}
			tick(x+(k-xlo)/(xhi-xlo)*w, strconv.Itoa(int(k)))
		}
	}
	d.Frame(x, y, w, h, pdfdoc.Rule, 0.25)

	// Centre line and steady-state limits, each labelled at the right edge.
	type level struct {
		v     float64
		name  string
		color pdfdoc.Color
		dash  bool
	}
	levels := []level{
		{c.UCL, "UCL", pdfdoc.Fail, true},
		{c.Center, "CL", centreColor, false},
		{c.LCL, "LCL", pdfdoc.Fail, true},
	}
	shown := levels[:0]
	for _, l := range levels {
		if finite(l.v) {
			shown = append(shown, l)
		}
	}
	levels = shown
	for _, l := range levels {
		d.Stroke(l.color)
		pdf.SetLineWidth(0.35)
		if l.dash {
			pdf.SetDashPattern([]float64{2, 1.2}, 0)
		}
		pdf.Line(x, py(l.v), x+w, py(l.v))
		pdf.SetDashPattern(nil, 0)
	}
	want := make([]float64, len(levels))
	for i, l := range levels {
		want[i] = py(l.v)
	}
	at := pdfdoc.Spread(want, st.LineH()+0.4, y, y+h)
	d.Use(st.With(pdfdoc.Ink))
	for i, l := range levels {
		pdf.Text(x+w+2, at[i]+1, l.name+" "+num(l.v))
	}

	// Exact per-point limits, where they differ from the steady state.
	if perPointLimits(c) {
		d.Stroke(pdfdoc.Fail)
		pdf.SetLineWidth(0.25)
		for _, lim := range []func(spc.Point) float64{
			func(p spc.Point) float64 { return p.UCL },
			func(p spc.Point) float64 { return p.LCL },
		} {
			for i := range c.Points {
				v := lim(c.Points[i])
				if !finite(v) {
					continue
				}
				l, r := px(i)-w/(xhi-xlo)/2, px(i)+w/(xhi-xlo)/2
				pdf.Line(l, py(v), r, py(v))
				if i > 0 && finite(lim(c.Points[i-1])) {
					pdf.Line(l, py(lim(c.Points[i-1])), l, py(v))
				}
			}
		}
	}

	// The plotted lines, then the points; signalling points in red.
	// A signal's Index counts observations from 1; the moving-range chart's
	// point i is observation i+2 (spc.IMR).
	signalled := make(map[int]bool, len(c.Signals))
	for _, s := range c.Signals {
		signalled[s.Index-first] = true
	}
	dot := math.Min(0.7, 0.35*w/float64(max(n, 1)))
	for si, s := range ser {
		d.Stroke(s.color)
		pdf.SetLineWidth(0.3)
		if n <= maxJoined {
			for i := 1; i < n; i++ {
				if finite(s.ys[i-1]) && finite(s.ys[i]) {
					pdf.Line(px(i-1), py(s.ys[i-1]), px(i), py(s.ys[i]))
				}
			}
		} else {
			envelope(d, s.ys, px, py)
		}
		for i, v := range s.ys {
			col, r := s.color, dot
			switch {
			case !finite(v):
				continue
			case signalled[i] && (si == 0 || isLowSignal(c, i)):
				col, r = pdfdoc.Fail, math.Max(dot*1.7, 0.5)
			case n > maxDotted:
				continue
			}
			d.Fill(col)
			pdf.Circle(px(i), py(v), r, "F")
		}
	}
}

// Beyond maxDotted points a line has no dots but at signals (they would
// merge into a band); beyond maxJoined it is drawn as its envelope, which
// looks the same on paper at a fraction of the file size.
const (
	maxDotted = 400
	maxJoined = 2000
)

// envelope draws ys as vertical bars from the least to the greatest value of
// each of 600 runs of consecutive points: bars about 0.4 mm apart.
func envelope(d *pdfdoc.Doc, ys []float64, px func(int) float64, py func(float64) float64) {
	const runs = 600
	n := len(ys)
	for b := 0; b < runs; b++ {
		i0, i1 := b*n/runs, (b+1)*n/runs
		if i1 <= i0 {
			continue
		}
		lo, hi := math.Inf(1), math.Inf(-1)
		for _, v := range ys[i0:i1] {
			if finite(v) {
				lo, hi = math.Min(lo, v), math.Max(hi, v)
			}
		}
		if lo > hi {
			continue
		}
		x := px((i0 + i1 - 1) / 2)
		d.PDF.Line(x, py(lo), x, py(hi))
	}
}

// isLowSignal reports whether point i (0-based) of a CUSUM signals on S_lo.
func isLowSignal(c spc.Chart, i int) bool {
	for _, s := range c.Signals {
		if s.Index-1 == i && s.Rule == spc.RuleCUSUMLow {
			return true
		}
	}
	return false
}

// signalText lists a chart's signals in at most two lines of h mm at y.
func signalText(d *pdfdoc.Doc, c spc.Chart, y, h float64) {
	st := pdfdoc.Small
	var s string
	if len(c.Signals) == 0 {
		s = "Signals: none."
	} else {
		st = st.With(pdfdoc.Fail)
		parts := make([]string, len(c.Signals))
		for i, sg := range c.Signals {
			parts[i] = fmt.Sprintf("%d %s", sg.Index, sg.Rule)
		}
		s = fmt.Sprintf("Signals (%d; point: rule): %s.", len(c.Signals), strings.Join(parts, ", "))
	}
	lines := d.Wrap(s, d.Width, st)
	if len(lines) > 2 {
		const more = " … (all of them in the text and --json output)"
		lines = lines[:2]
		lines[1] = strings.TrimSuffix(d.Fit(lines[1], d.Width-d.TextWidth(more, st)), "…") + more
	}
	d.Use(st)
	for i, l := range lines {
		d.PDF.Text(d.Left, y+float64(i)*st.LineH()+st.LineH()*0.75, l)
	}
}

// num formats a chart number for a label: 5 significant digits, a real minus.
func num(v float64) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return "—"
	}
	return pdfdoc.Minus(strconv.FormatFloat(v, 'g', 5, 64))
}

// finite reports whether v is neither NaN nor infinite.
func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

// errNoPoints is returned for a chart without points.
var errNoPoints = errors.New("chart: a chart without points")

// WriteFile draws charts as WritePDF does and writes the PDF to path
// atomically (a reader never sees half a file), mode 0644.
func WriteFile(path string, charts []spc.Chart, o Options) error {
	var b bytes.Buffer
	if err := WritePDF(&b, charts, o); err != nil {
		return err
	}
	return atomicfile.Write(path, b.Bytes(), 0o644)
}
