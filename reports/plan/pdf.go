package plan

import (
	"bytes"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"time"

	"trimline/reports/internal/atomicfile"
	"trimline/reports/internal/pdfdoc"
	"trimline/sequencer"
	planner "trimline/sequencer/plan"
)

// Page geometry of the plan (A4 portrait), mm.
const (
	pdfMargin = 15.0
	pdfWidth  = pdfdoc.PageW - 2*pdfMargin
	pdfBottom = pdfdoc.PageH - 16
	pdfBins   = 40
)

var (
	pdfTitle   = pdfdoc.Style{Family: pdfdoc.Sans, Weight: "B", Size: 14, Color: pdfdoc.Ink}
	pdfSection = pdfdoc.Style{Family: pdfdoc.Sans, Weight: "B", Size: 11, Color: pdfdoc.Ink}
	pdfPlotT   = pdfdoc.Style{Family: pdfdoc.Sans, Weight: "B", Size: 8.5, Color: pdfdoc.Ink}
	pdfPlot    = pdfdoc.Style{Family: pdfdoc.Sans, Size: 6.5, Color: pdfdoc.Muted}

	pdfBarFill = pdfdoc.Color{R: 120, G: 160, B: 210}
	pdfBarEdge = pdfdoc.Color{R: 70, G: 110, B: 170}
	pdfMC      = pdfdoc.Color{R: 40, G: 120, B: 70}   // the Monte Carlo interval
	pdfGUM     = pdfdoc.Color{R: 150, G: 60, B: 160}  // the law of propagation / common practice
	pdfEnd     = pdfdoc.Color{R: 204, G: 128, B: 0}   // a DAC's end codes
	pdfCurve   = pdfdoc.Color{R: 150, G: 60, B: 160}  // the normal of the law of propagation
	pdfWorst   = pdfdoc.Color{R: 110, G: 110, B: 110} // the worst case
)

// WritePDF writes r as an A4 portrait plan: the heading (budget, limit file,
// trials, seed), the tables of the text report, then a histogram of every
// quantity: the pre-trim offset and gain error with the normal of the law of
// propagation over them, the codes of each DAC with its end codes, and the
// post-trim offset and gain error with their tolerances. Each histogram marks
// the Monte Carlo's 95 % interval and the law of propagation's (or, after trim,
// the common-practice one). generated dates the document; the same report and
// generated give the same bytes.
func WritePDF(w io.Writer, r *planner.Report, generated time.Time) error {
	d := &planDoc{r: r, generated: generated}
	d.Doc = pdfdoc.Doc{PDF: pdfdoc.New(generated, pdfMargin, pdfMargin, pdfMargin), Left: pdfMargin, Width: pdfWidth}
	d.Need = func(h float64) bool {
		if d.Y+h <= pdfBottom {
			return false
		}
		d.newPage()
		return true
	}
	d.newPage()
	d.heading()
	d.tables()
	if len(r.Notes) > 0 {
		d.section("Notes", 10)
		for _, n := range r.Notes {
			d.para("• "+n, pdfdoc.Body)
		}
	}
	d.histograms()
	d.footers()
	if err := d.PDF.Error(); err != nil {
		return err
	}
	return d.PDF.Output(w)
}

// WriteFile writes the plan to path (WritePDF), replacing it whole or not at all.
func WriteFile(path string, r *planner.Report, generated time.Time) error {
	var b bytes.Buffer
	if err := WritePDF(&b, r, generated); err != nil {
		return err
	}
	return atomicfile.Write(path, b.Bytes(), 0o644)
}

type planDoc struct {
	pdfdoc.Doc
	r         *planner.Report
	generated time.Time
}

func (d *planDoc) newPage() {
	d.PDF.AddPage()
	d.Y = pdfMargin
}

func (d *planDoc) text(x, y float64, s string, st pdfdoc.Style) {
	d.Use(st)
	d.PDF.Text(x, y, s)
}

// para writes s wrapped to the column, advancing Y.
func (d *planDoc) para(s string, st pdfdoc.Style) {
	for _, line := range d.Wrap(s, d.Width, st) {
		d.Need(st.LineH())
		d.text(d.Left, d.Y+st.LineH()*0.75, line, st)
		d.Y += st.LineH()
	}
}

func (d *planDoc) section(title string, keep float64) {
	d.Need(keep + 12)
	if d.Y > pdfMargin {
		d.Y += 4
	}
	d.text(d.Left, d.Y+pdfSection.LineH()*0.75, title, pdfSection)
	d.Y += pdfSection.LineH() + 0.5
	d.Rule(d.Y, pdfdoc.Rule, 0.3)
	d.Y += 2.5
}

func (d *planDoc) heading() {
	r, b := d.r, d.r.Budget
	title := "Trim plan: " + orNone(b.Product)
	if b.Revision != "" {
		title += " rev " + b.Revision
	}
	d.text(d.Left, d.Y+pdfTitle.LineH()*0.75, title, pdfTitle)
	d.Y += pdfTitle.LineH() + 1.5
	limitsFile := "none named: no yield predicted"
	if r.Tolerances != nil {
		limitsFile = r.Tolerances.File
	}
	mc := fmt.Sprintf("%d units drawn (seed %d); the adaptive rule of JCGM 101:2008 §7.9 held the pre-trim quantities to %d significant digits after %d",
		r.Trials, r.Seed, r.Digits, r.AdaptiveTrials)
	for _, kv := range [][2]string{{"Budget", b.Path}, {"Limit file", limitsFile}, {"Monte Carlo", mc}, {"Generated", when(d.generated)}} {
		d.text(d.Left, d.Y+pdfdoc.Body.LineH()*0.75, kv[0], pdfdoc.Bold)
		for i, line := range d.Wrap(kv[1], d.Width-28, pdfdoc.Body) {
			d.text(d.Left+28, d.Y+pdfdoc.Body.LineH()*0.75, line, pdfdoc.Body)
			if i >= 0 {
				d.Y += pdfdoc.Body.LineH()
			}
		}
	}
}

func cell(s string) pdfdoc.Cell { return pdfdoc.Cell{{Text: s, St: pdfdoc.Body}} }

func (d *planDoc) tables() {
	r := d.r
	d.section("Before trim", 30)
	cols := []pdfdoc.Column{{Title: "quantity", W: 30}, {Title: "mean", W: 20, Align: "R"}, {Title: "sd", W: 20, Align: "R"},
		{Title: "95 % Monte Carlo", W: 37, Align: "R"}, {Title: "95 % law of propagation", W: 37, Align: "R"}, {Title: "worst case¹", W: 36, Align: "R"}}
	var rows []pdfdoc.Row
	for _, q := range r.Pre {
		s := scaleOf(q)
		rows = append(rows, pdfdoc.Row{cell(q.Name), cell(s.f(q.Mean)), cell(s.f(q.SD)), cell(s.pair(&q.Interval95)), cell(s.pair(q.GUM95)), cell(s.pair(q.WorstCase))})
	}
	d.Table(cols, rows, nil)
	d.Y += 1
	d.para("¹ every bounded source at an end of its range, every normal one at ±3σ.", pdfdoc.Small)
	for _, q := range r.Pre {
		if len(q.Shares) > 0 && q.SD > 0 {
			d.para(q.Name+", share of the variance (law of propagation): "+sharesText(q.Shares, 6), pdfdoc.Body)
		}
	}

	if len(r.DACs) > 0 {
		d.section("Trim DACs (the design in the budget)", 20)
		cols = []pdfdoc.Column{{Title: "DAC", W: 20}, {Title: "adjusts", W: 26}, {Title: "bits", W: 10, Align: "R"}, {Title: "LSB", W: 18, Align: "R"},
			{Title: "range", W: 36, Align: "R"}, {Title: "codes (95 %)", W: 26, Align: "R"}, {Title: "worst case", W: 22, Align: "R"}, {Title: "saturates", W: 22, Align: "R"}}
		rows = nil
		for i, x := range r.DACs {
			c := r.Codes[i]
			rows = append(rows, pdfdoc.Row{cell(x.DAC.Name), cell(adjustsText(x.DAC)), cell(strconv.Itoa(x.DAC.Bits)), cell(lsbText(r, x.DAC)),
				cell(rangeText(r, x.DAC.Bits, x.DAC.LSB, x.DAC.NoCorrection, x.DAC)), cell(codePair(&c.Interval95)), cell(codePair(c.WorstCase)),
				cell(percentSE(x.Saturation, x.SaturationSE))})
		}
		d.Table(cols, rows, nil)
	}
	if len(r.Coefficients) > 0 {
		d.section("Firmware coefficients", 10)
		d.para("Formats: "+coefficientsText(r.Coefficients)+"; the unit computes corrected = k·raw + m.", pdfdoc.Body)
	}

	d.section("After trim", 20)
	cols = []pdfdoc.Column{{Title: "quantity", W: 30}, {Title: "mean", W: 20, Align: "R"}, {Title: "sd", W: 20, Align: "R"},
		{Title: "95 % Monte Carlo", W: 34, Align: "R"}, {Title: "±1.96·LSB/√12²", W: 34, Align: "R"}, {Title: "parts of the variance", W: 42}}
	rows = nil
	for _, q := range r.Post {
		s := scaleOf(q)
		rows = append(rows, pdfdoc.Row{cell(q.Name), cell(s.f(q.Mean)), cell(s.f(q.SD)), cell(s.pair(&q.Interval95)), cell(s.pair(q.GUM95)), cell(sharesText(q.Shares, 3))})
	}
	d.Table(cols, rows, nil)
	d.Y += 1
	d.para("² common practice: the rounding of the finest DAC (or coefficient) alone, uniform over ±½ LSB, u = LSB/√12; DNL and saturation left out.", pdfdoc.Small)

	tol := r.Tolerances
	d.section("Predicted yield", 20)
	if tol == nil {
		d.para("Not predicted: the budget names no limit file.", pdfdoc.Body)
		return
	}
	d.para(fmt.Sprintf("Against %s. Only %s and %s are predicted, each judged on its tolerance itself (no guard band, no measurement uncertainty: the units as they are).",
		tol.File, sequencer.ResPostOffset, sequencer.ResPostGainError), pdfdoc.Body)
	d.Y += 1
	cols = []pdfdoc.Column{{Title: "result", W: 36}, {Title: "limits", W: 60}, {Title: "tolerance", W: 44}, {Title: "pass", W: 40, Align: "R"}}
	rows = nil
	for _, x := range []struct {
		band planner.Band
		name string
		pass float64
	}{{tol.Offset, sequencer.ResPostOffset, r.OffsetPass}, {tol.Gain, sequencer.ResPostGainError, r.GainPass}} {
		rows = append(rows, pdfdoc.Row{cell(x.name), cell(orDefault(strings.Join(x.band.Limits, ", "), "no limit")), cell(bandText(x.band)), cell(percent(x.pass))})
	}
	rows = append(rows, pdfdoc.Row{pdfdoc.Cell{{Text: "all judged: " + strings.Join(r.Judged, ", "), St: pdfdoc.Bold}}, cell(""), cell(""),
		pdfdoc.Cell{{Text: percentSE(r.Yield, r.YieldSE), St: pdfdoc.Bold}}})
	if r.Yield == 1 {
		rows[len(rows)-1][3] = pdfdoc.Cell{{Text: "100 % (every unit drawn)", St: pdfdoc.Bold}}
	}
	d.Table(cols, rows, nil)
	d.Y += 1
	d.para("± is the standard error √(p(1 − p)/M) over the M units drawn.", pdfdoc.Small)
	if len(tol.NotPredicted) > 0 {
		d.para("Not predicted (other results): "+strings.Join(tol.NotPredicted, ", ")+".", pdfdoc.Small)
	}
	if len(tol.ExpressionOnly) > 0 {
		d.para("Not read as bounds (judged by an expression): "+strings.Join(tol.ExpressionOnly, ", ")+".", pdfdoc.Small)
	}

	if r.TargetYield > 0 && len(r.Recommendations) > 0 {
		d.section("Recommendation for a yield of "+percent(r.TargetYield), 24)
		d.para(fmt.Sprintf("Per DAC the fewest bits, then the smallest range, for which the result it trims passes in that fraction of units; the other DACs as designed, the no-correction code at mid-scale; judged on the first %d units drawn.",
			r.Recommendations[0].Trials), pdfdoc.Body)
		d.Y += 1
		cols = []pdfdoc.Column{{Title: "DAC", W: 20}, {Title: "bits", W: 12, Align: "R"}, {Title: "LSB", W: 22, Align: "R"}, {Title: "range", W: 40, Align: "R"},
			{Title: "result", W: 30}, {Title: "passes", W: 30, Align: "R"}, {Title: "saturates", W: 26, Align: "R"}}
		rows = nil
		for i, rec := range r.Recommendations {
			if !rec.Found {
				rows = append(rows, pdfdoc.Row{cell(rec.DAC), cell(""), cell(""), cell(""), cell(rec.Result), cell(""), cell(rec.Reason)})
				continue
			}
			x := r.DACs[i].DAC
			rows = append(rows, pdfdoc.Row{cell(rec.DAC), cell(strconv.Itoa(rec.Bits)), cell(lsbValue(r, x, rec.LSB)),
				cell(rangeText(r, rec.Bits, rec.LSB, rec.NoCorrection, x)), cell(rec.Result), cell(percentSE(rec.Pass, rec.PassSE)), cell(percent(rec.Saturation))})
		}
		d.Table(cols, rows, nil)
		if !math.IsNaN(r.AllRecommended) {
			d.Y += 1
			d.para("Every DAC as recommended: all predicted results pass in "+percentSE(r.AllRecommended, r.AllRecommendedSE)+".", pdfdoc.Body)
		}
	}
}

// mark is a vertical line drawn on a histogram.
type mark struct {
	v     float64 // SI
	label string
	col   pdfdoc.Color
	dash  bool
	side  int // where the label goes: −1 left of the line, +1 right of it, 0 centred
}

// plot is one histogram to draw.
type plot struct {
	q     planner.Quantity
	marks []mark
	code  bool        // integer values: bins on whole codes
	curve *[2]float64 // mean and σ of a normal drawn over the bars
	note  string
}

func (d *planDoc) histograms() {
	r := d.r
	var plots []plot
	for _, q := range r.Pre {
		p := plot{q: q, marks: intervalMarks(q, "law of propagation")}
		if q.GUM95 != nil {
			p.curve = &[2]float64{(q.GUM95[0] + q.GUM95[1]) / 2, (q.GUM95[1] - q.GUM95[0]) / (2 * 1.96)}
			p.note = "curve: the normal of the law of propagation"
		}
		plots = append(plots, p)
	}
	for i, q := range r.Codes {
		x := r.DACs[i].DAC
		p := plot{q: q, code: true, marks: intervalMarks(q, "")}
		p.marks = append(p.marks, mark{0, "code 0", pdfEnd, false, 0}, mark{float64(maxCodeOf(x.Bits)), "code " + strconv.Itoa(maxCodeOf(x.Bits)), pdfEnd, false, 0})
		p.note = "saturates: " + percent(r.DACs[i].Saturation)
		plots = append(plots, p)
	}
	for k, q := range r.Post {
		p := plot{q: q, marks: intervalMarks(q, "common practice")}
		if tol := r.Tolerances; tol != nil {
			band := tol.Offset
			if k == 1 {
				band = tol.Gain
			}
			if !math.IsInf(band.Lo, 0) {
				p.marks = append(p.marks, mark{band.Lo, "lower limit", pdfdoc.Fail, false, -1})
			}
			if !math.IsInf(band.Hi, 0) {
				p.marks = append(p.marks, mark{band.Hi, "upper limit", pdfdoc.Fail, false, 1})
			}
			pass := r.OffsetPass
			if k == 1 {
				pass = r.GainPass
			}
			p.note = "pass: " + percent(pass)
		}
		plots = append(plots, p)
	}
	const h = 62.0
	w := (d.Width - 8) / 2
	d.section("Histograms of the units drawn", h)
	d.para("Bars: the Monte Carlo's units. Green dashed: its 95 % interval; purple dotted: the law of propagation's (after trim: the common-practice ±1.96·LSB/√12); orange: a DAC's end codes; red: tolerances.", pdfdoc.Small)
	d.Y += 2
	for i, p := range plots {
		if i%2 == 0 {
			d.Need(h + 2)
		}
		x := d.Left
		if i%2 == 1 {
			x += w + 8
		}
		d.histogram(p, x, d.Y, w, h)
		if i%2 == 1 || i == len(plots)-1 {
			d.Y += h + 4
		}
	}
}

// intervalMarks are the Monte Carlo's 95 % interval of q and the other one
// (named by basis) when q has it.
func intervalMarks(q planner.Quantity, basis string) []mark {
	ms := []mark{{q.Interval95[0], "", pdfMC, true, 0}, {q.Interval95[1], "", pdfMC, true, 0}}
	if q.GUM95 != nil && basis != "" {
		ms = append(ms, mark{q.GUM95[0], "", pdfGUM, true, 0}, mark{q.GUM95[1], "", pdfGUM, true, 0})
	}
	return ms
}

// histogram draws p in the box (x, y, w, h).
func (d *planDoc) histogram(p plot, x, y, w, h float64) {
	pdf := d.PDF
	q := p.q
	sc := scaleOf(q)
	if p.code {
		sc = scale{1, "", 0}
	}
	title := q.Name
	if sc.unit != "" {
		title += " [" + sc.unit + "]"
	}
	d.text(x, y+3, d.Fit(title, w*0.55), pdfPlotT)
	d.Use(pdfPlot)
	d.TextRight(x+w, y+3, fmt.Sprintf("mean %s, sd %s", sc.f(q.Mean), sc.f(q.SD)))
	if p.note != "" {
		d.Use(pdfPlot)
		d.PDF.Text(x, y+6.2, p.note)
	}
	const axisW, topH, ticksH = 9.0, 10.0, 8.0
	px, py, pw, ph := x+axisW, y+topH, w-axisW-1, h-topH-ticksH-4
	vs := q.Values
	if len(vs) == 0 {
		d.Frame(px, py, pw, ph, pdfdoc.Rule, 0.25)
		return
	}
	// The view: the middle 99.9 % of the values, widened to the marks that lie
	// near it, and a margin.
	lo, hi := quantile(vs, 0.0005), quantile(vs, 0.9995)
	span := hi - lo
	for _, m := range p.marks {
		if m.v >= lo-span/4 && m.v <= hi+span/4 {
			lo, hi = math.Min(lo, m.v), math.Max(hi, m.v)
		}
	}
	if span = hi - lo; span > 0 {
		lo, hi = lo-0.05*span, hi+0.05*span
	} else { // every unit alike: a narrow view about the value
		pad := math.Max(math.Abs(lo)*0.1, 1e-9)
		if p.code {
			pad = 4
		}
		lo, hi = lo-pad, hi+pad
	}
	bins := pdfBins
	if p.code { // whole codes per bin, bins centred on codes
		width := math.Max(1, math.Ceil((hi-lo)/pdfBins))
		lo = math.Floor(lo) - 0.5
		bins = int(math.Ceil((hi - lo) / width))
		hi = lo + float64(bins)*width
	}
	counts := make([]int, bins)
	under, over := 0, 0
	bw := (hi - lo) / float64(bins)
	for _, v := range vs {
		k := int(math.Floor((v - lo) / bw))
		switch {
		case v < lo:
			under++
		case k >= bins:
			over++
		default:
			counts[k]++
		}
	}
	most := 1
	for _, c := range counts {
		most = max(most, c)
	}
	ystep := math.Max(1, pdfdoc.NiceStep(float64(most), 4))
	ymax := math.Ceil(float64(most)*1.15/ystep) * ystep
	yOf := func(c float64) float64 { return py + ph - c/ymax*ph }
	xOf := func(v float64) float64 { return px + (v-lo)/(hi-lo)*pw }

	d.Use(pdfPlot)
	for c := 0.0; c <= ymax+1e-9; c += ystep {
		d.HLine(px, yOf(c), pw, pdfdoc.Grid, 0.15)
		d.TextRight(px-1, yOf(c)+0.9, compactCount(c))
	}
	d.Rotated(x+1.5, py+ph/2, func() { d.TextCentre(x+1.5, py+ph/2, "units") })
	ax := pdfdoc.NewAxis(lo/sc.factor, hi/sc.factor, 5)
	for _, t := range ax.Ticks {
		xt := xOf(t * sc.factor)
		d.Stroke(pdfdoc.Muted)
		pdf.SetLineWidth(0.15)
		pdf.Line(xt, py+ph, xt, py+ph+1)
		d.TextCentre(xt, py+ph+3.6, ax.Label(t))
	}
	d.Fill(pdfBarFill)
	d.Stroke(pdfBarEdge)
	pdf.SetLineWidth(0.1)
	bwp := pw / float64(bins)
	for k, c := range counts {
		if c > 0 {
			pdf.Rect(px+float64(k)*bwp, yOf(float64(c)), bwp, py+ph-yOf(float64(c)), "FD")
		}
	}
	if p.curve != nil && p.curve[1] > 0 {
		mu, sg := p.curve[0], p.curve[1]
		n := float64(len(vs))
		d.Stroke(pdfCurve)
		pdf.SetLineWidth(0.35)
		var px0, py0 float64
		for i := 0; i <= 120; i++ {
			v := lo + (hi-lo)*float64(i)/120
			c := n * bw * math.Exp(-0.5*math.Pow((v-mu)/sg, 2)) / (sg * math.Sqrt(2*math.Pi))
			xx, yy := xOf(v), math.Max(py, yOf(c))
			if i > 0 {
				pdf.Line(px0, py0, xx, yy)
			}
			px0, py0 = xx, yy
		}
	}
	d.Frame(px, py, pw, ph, pdfdoc.Rule, 0.25)
	for _, m := range p.marks {
		if m.v < lo || m.v > hi {
			continue
		}
		d.Stroke(m.col)
		pdf.SetLineWidth(0.35)
		switch {
		case m.col == pdfGUM:
			pdf.SetDashPattern([]float64{0.5, 0.7}, 0)
		case m.dash:
			pdf.SetDashPattern([]float64{1.4, 0.9}, 0)
		}
		pdf.Line(xOf(m.v), py, xOf(m.v), py+ph)
		pdf.SetDashPattern(nil, 0)
		if m.label != "" {
			d.Use(pdfPlot.With(m.col))
			switch xm := xOf(m.v); m.side {
			case -1:
				d.TextRight(xm-0.6, py-0.8, m.label)
			case 1:
				pdf.Text(xm+0.6, py-0.8, m.label)
			default:
				d.TextCentre(math.Min(math.Max(xm, px+8), px+pw-8), py-0.8, m.label)
			}
		}
	}
	d.Use(pdfPlot)
	if under > 0 {
		d.text(px+1, py+3, fmt.Sprintf("◄ %d", under), pdfPlot)
	}
	if over > 0 {
		d.Use(pdfPlot)
		d.TextRight(px+pw-1, py+3, fmt.Sprintf("%d ►", over))
	}
	xl := "value"
	if p.code {
		xl = "code"
	} else if sc.unit != "" {
		xl += " [" + sc.unit + "]"
	}
	d.Use(pdfPlot)
	d.TextCentre(px+pw/2, py+ph+7, xl)
}

// quantile is the p-quantile of sorted values (nearest rank).
func quantile(sorted []float64, p float64) float64 {
	i := int(math.Round(p * float64(len(sorted)-1)))
	return sorted[max(0, min(i, len(sorted)-1))]
}

// compactCount writes a count axis label: 12000 as 12k.
func compactCount(c float64) string {
	if c >= 10000 && math.Mod(c, 1000) == 0 {
		return strconv.FormatFloat(c/1000, 'f', 0, 64) + "k"
	}
	return strconv.FormatFloat(c, 'f', 0, 64)
}

func (d *planDoc) footers() {
	n := d.PDF.PageCount()
	for p := 1; p <= n; p++ {
		d.PDF.SetPage(p)
		d.Rule(pdfdoc.PageH-12, pdfdoc.Rule, 0.2)
		left := "Trim plan · " + d.r.Budget.Path + " · generated " + when(d.generated)
		d.Use(pdfPlot)
		d.text(d.Left, pdfdoc.PageH-8, d.Fit(left, d.Width-30), pdfPlot)
		d.TextRight(d.Left+d.Width, pdfdoc.PageH-8, fmt.Sprintf("page %d of %d", p, n))
	}
}

func when(t time.Time) string {
	if t.IsZero() {
		return dash
	}
	return t.UTC().Format("2006-01-02 15:04 UTC")
}

// maxCodeOf is the largest code of an n-bit DAC.
func maxCodeOf(n int) int { return 1<<n - 1 }
