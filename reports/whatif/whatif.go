package whatif

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

	"trimline/instruments/units"
	"trimline/limits"
	"trimline/reports/internal/atomicfile"
	"trimline/reports/internal/pdfdoc"
)

// MaxFlipRows is how many flips the table lists; the rest are counted in a
// closing "… and N more" line.
const MaxFlipRows = 200

// Write renders the report to w as a PDF. generated is the document's date (and
// creation date); a zero time is written as the Unix epoch so the output stays
// reproducible.
func Write(w io.Writer, r Report, generated time.Time) error {
	pdf, err := render(r, generated)
	if err != nil {
		return err
	}
	if err := pdf.Output(w); err != nil {
		return fmt.Errorf("whatif: write PDF: %w", err)
	}
	return nil
}

// WriteFile renders the report and writes it to path atomically: a temporary
// file in the same directory is written, synced and renamed over path. On error
// nothing is left behind and an existing file at path is untouched.
func WriteFile(path string, r Report, generated time.Time) error {
	if path == "" {
		return errors.New("whatif: empty path")
	}
	var buf bytes.Buffer
	if err := Write(&buf, r, generated); err != nil {
		return err
	}
	if err := atomicfile.Write(path, buf.Bytes(), 0o644); err != nil {
		return fmt.Errorf("whatif: %w", err)
	}
	return nil
}

// Page geometry in millimetres.
const (
	pageW    = 210.0
	pageH    = 297.0
	marginL  = 15.0
	marginR  = 15.0
	marginT  = 15.0
	contentW = pageW - marginL - marginR
	bottom   = pageH - 18 // lowest y the body reaches; the footer is below
	ptMM     = 25.4 / 72
)

const (
	sans = pdfdoc.Sans
	mono = pdfdoc.Mono
)

type rgb struct{ r, g, b int }

var (
	colInk    = rgb{28, 30, 36}
	colMuted  = rgb{95, 101, 111}
	colRule   = rgb{188, 193, 200}
	colGrid   = rgb{228, 231, 235}
	colHead   = rgb{231, 235, 240}
	colZebra  = rgb{246, 247, 249}
	colPass   = rgb{22, 126, 60}
	colFail   = rgb{190, 28, 40}
	colReview = rgb{204, 128, 0}
	colBar    = rgb{120, 160, 210}
	colBarEdg = rgb{70, 110, 170}
	colOld    = rgb{120, 120, 120}
	colNew    = rgb{210, 30, 30}
	colWhite  = rgb{255, 255, 255}
)

type doc struct {
	pdf *gofpdf.Fpdf
	r   Report
	gen time.Time
	y   float64
}

func render(r Report, generated time.Time) (*gofpdf.Fpdf, error) {
	stamp := generated.UTC()
	if generated.IsZero() {
		stamp = time.Unix(0, 0).UTC()
	}
	pdf := pdfdoc.New(stamp, marginL, marginT, marginR)
	pdf.SetTitle("What-if re-judging", true)
	pdf.SetSubject(orDash(r.Old)+" → "+orDash(r.New), true)
	pdf.SetCreator("trimline", true)
	pdf.SetProducer("trimline/reports/whatif", true)

	d := &doc{pdf: pdf, r: r, gen: stamp}
	d.newPage()
	d.summary()
	d.pareto()
	for _, dist := range r.Distributions {
		d.histogram(dist)
	}
	d.flips()
	d.footers()
	if err := pdf.Error(); err != nil {
		return nil, fmt.Errorf("whatif: render: %w", err)
	}
	return pdf, nil
}

// ---- drawing helpers ----

func (d *doc) font(weight string, size float64, c rgb) {
	d.pdf.SetFont(sans, weight, size)
	d.pdf.SetTextColor(c.r, c.g, c.b)
}

func (d *doc) fill(c rgb) { d.pdf.SetFillColor(c.r, c.g, c.b) }
func (d *doc) draw(c rgb) { d.pdf.SetDrawColor(c.r, c.g, c.b) }
func (d *doc) newPage()   { d.pdf.AddPage(); d.y = marginT }
func (d *doc) lineH() float64 {
	_, sz := d.pdf.GetFontSize()
	return sz * 1.25
}

// ensure starts a new page unless h mm fit below the current position.
func (d *doc) ensure(h float64) bool {
	if d.y+h > bottom {
		d.newPage()
		return true
	}
	return false
}

// text writes s with its baseline at y, left-aligned at x.
func (d *doc) text(x, y float64, s string) { d.pdf.Text(x, y, s) }

// textR writes s right-aligned at x.
func (d *doc) textR(x, y float64, s string) { d.pdf.Text(x-d.pdf.GetStringWidth(s), y, s) }

// textC writes s centred on x.
func (d *doc) textC(x, y float64, s string) { d.pdf.Text(x-d.pdf.GetStringWidth(s)/2, y, s) }

// fit shortens s with "…" until it is at most w mm wide in the current font.
func (d *doc) fit(s string, w float64) string {
	if d.pdf.GetStringWidth(s) <= w {
		return s
	}
	rs := []rune(s)
	for len(rs) > 0 && d.pdf.GetStringWidth(string(rs)+"…") > w {
		rs = rs[:len(rs)-1]
	}
	return string(rs) + "…"
}

// wrap writes s in the current font as lines of at most w mm from (x, d.y) and
// advances d.y.
func (d *doc) wrap(x, w float64, s string) {
	lh := d.lineH()
	for _, line := range d.pdf.SplitText(s, w) {
		d.y += lh
		d.text(x, d.y-lh*0.25, line)
	}
}

func (d *doc) heading(s string) {
	d.ensure(20)
	d.y += 4
	d.font("B", 12, colInk)
	d.y += 12 * ptMM
	d.text(marginL, d.y, s)
	d.y += 1.5
	d.draw(colRule)
	d.pdf.SetLineWidth(0.3)
	d.pdf.Line(marginL, d.y, marginL+contentW, d.y)
	d.y += 3
}

func (d *doc) footers() {
	n := d.pdf.PageCount()
	for p := 1; p <= n; p++ {
		d.pdf.SetPage(p)
		d.draw(colRule)
		d.pdf.SetLineWidth(0.2)
		d.pdf.Line(marginL, pageH-13, marginL+contentW, pageH-13)
		d.font("", 7, colMuted)
		d.text(marginL, pageH-9, "What-if re-judging · "+d.fit(orDash(d.r.New), 110)+" · generated "+d.gen.Format("2006-01-02 15:04 UTC"))
		d.textR(marginL+contentW, pageH-9, fmt.Sprintf("page %d of %d", p, n))
	}
}

// ---- summary ----

func (d *doc) summary() {
	r := d.r
	d.font("B", 20, colInk)
	d.y += 20 * ptMM
	d.text(marginL, d.y, "What-if re-judging")
	d.y += 4
	d.font("", 10, colInk)
	label := func(k, v string) {
		d.font("", 8, colMuted)
		d.y += 1
		d.text(marginL, d.y+3.2, k)
		d.font("", 10, colInk)
		old := d.y
		d.wrap(marginL+28, contentW-28, v)
		d.y = math.Max(d.y, old+4.5)
	}
	label("Old limit set", orDash(r.Old))
	label("→ New limit set", orDash(r.New))
	label("Generated", d.gen.Format("2006-01-02 15:04 UTC"))
	units := fmt.Sprintf("%d re-judged", r.Units)
	if r.Skipped > 0 {
		units += fmt.Sprintf(", %d of another product skipped", r.Skipped)
	} else {
		units += ", none skipped"
	}
	label("Units", units)
	d.y += 5

	// Yield boxes.
	const boxH = 34.0
	bw := (contentW - 6) / 2
	d.yieldBox(marginL, d.y, bw, boxH, "Yield before (as recorded)", r.Before, nil)
	delta := (r.After.Yield() - r.Before.Yield()) * 100
	d.yieldBox(marginL+bw+6, d.y, bw, boxH, "Yield after (new limit set)", r.After, &delta)
	d.y += boxH + 5

	// Flip counts.
	var fromPass, toPass, other int
	for _, f := range r.Flips {
		switch {
		case f.Old == limits.VerdictPass:
			fromPass++
		case f.New == limits.VerdictPass:
			toPass++
		default:
			other++
		}
	}
	d.font("B", 10, colInk)
	d.y += 4
	d.text(marginL, d.y, fmt.Sprintf("Verdict flips: %d", len(r.Flips)))
	d.font("", 9, colInk)
	d.y += 5
	d.text(marginL+4, d.y, fmt.Sprintf("pass → review/fail: %d     review/fail → pass: %d     review ↔ fail: %d", fromPass, toPass, other))
	d.y += 2
}

func (d *doc) yieldBox(x, y, w, h float64, title string, c VerdictCounts, delta *float64) {
	d.fill(colZebra)
	d.draw(colRule)
	d.pdf.SetLineWidth(0.3)
	d.pdf.Rect(x, y, w, h, "FD")
	d.font("", 8.5, colMuted)
	d.text(x+4, y+6, title)
	d.font("B", 28, colInk)
	big := pct(c.Yield())
	if c.Total() == 0 {
		big = "—"
	}
	d.text(x+4, y+19, big)
	if delta != nil && c.Total() > 0 {
		col := colMuted
		switch {
		case *delta < -0.005:
			col = colFail
		case *delta > 0.005:
			col = colPass
		}
		d.font("B", 10, col)
		d.textR(x+w-4, y+19, signed(*delta)+" points")
	}
	d.font("", 8.5, colInk)
	s := fmt.Sprintf("%d pass · %d review · %d fail", c.Pass, c.Review, c.Fail)
	if c.Other > 0 {
		s += fmt.Sprintf(" · %d other", c.Other)
	}
	s += fmt.Sprintf("  (of %d)", c.Total())
	d.text(x+4, y+27, s)
}

// ---- Pareto ----

func (d *doc) pareto() {
	d.heading("Failures per limit under the new set")
	if len(d.r.Pareto) == 0 {
		d.font("", 9, colMuted)
		d.y += 4
		d.text(marginL, d.y, "The new set has no limits.")
		d.y += 2
		return
	}
	const (
		labelW = 66.0
		countW = 34.0
		rowH   = 5.2
	)
	barX := marginL + labelW + 2
	barW := contentW - labelW - countW - 4
	most := 1
	for _, c := range d.r.Pareto {
		most = max(most, c.Fail+c.Review)
	}
	legend := func() {
		d.font("", 7.5, colMuted)
		d.y += 3.5
		d.fill(colFail)
		d.pdf.Rect(barX, d.y-2.3, 3, 2.5, "F")
		d.text(barX+4, d.y, "fail")
		d.fill(colReview)
		d.pdf.Rect(barX+14, d.y-2.3, 3, 2.5, "F")
		d.text(barX+18, d.y, "review")
		d.textR(marginL+contentW, d.y, "fail / review units")
		d.y += 1.5
	}
	legend()
	for i, c := range d.r.Pareto {
		if d.ensure(rowH) {
			legend()
		}
		if i%2 == 1 {
			d.fill(colZebra)
			d.pdf.Rect(marginL, d.y, contentW, rowH, "F")
		}
		base := d.y + rowH*0.7
		d.font("", 8, colInk)
		name := c.Limit
		if c.Result != "" {
			name += "  (" + c.Result + ")"
		}
		d.text(marginL+1, base, d.fit(name, labelW-1))
		scale := barW / float64(most)
		wf, wr := float64(c.Fail)*scale, float64(c.Review)*scale
		if wf > 0 {
			d.fill(colFail)
			d.pdf.Rect(barX, d.y+1, math.Max(wf, 0.4), rowH-2, "F")
		}
		if wr > 0 {
			d.fill(colReview)
			d.pdf.Rect(barX+wf, d.y+1, math.Max(wr, 0.4), rowH-2, "F")
		}
		d.font("", 8, colInk)
		if c.Fail == 0 && c.Review == 0 {
			d.font("", 8, colMuted)
		}
		d.textR(marginL+contentW, base, fmt.Sprintf("%d / %d", c.Fail, c.Review))
		d.y += rowH
	}
	d.y += 2
}

// ---- histograms ----

// edge is one bound drawn on a histogram.
type edge struct {
	which string // "old", "new" or "old = new"
	upper bool
	limit string
	v     float64 // display unit
}

func (e edge) label() string {
	op := "≥"
	if e.upper {
		op = "≤"
	}
	return e.which + " " + op + " " + num(e.v)
}

func (d *doc) histogram(dist Distribution) {
	scale, unit := displayUnit(dist.Unit)
	edges := edgesOf(dist, scale)

	const (
		bandH = 10.0 // bound labels above the plot
		plotH = 42.0
		axisH = 9.0
	)
	legendH := 4.0 + 3.6*float64(len(edges)+1)
	total := 8 + bandH + plotH + axisH + legendH + 4
	if dist.N == 0 {
		total = 8 + 16 + legendH
	}
	if d.y == marginT {
		// fresh page
	} else if d.y+total > bottom {
		d.newPage()
	} else {
		d.y += 4
	}
	d.font("B", 10, colInk)
	d.y += 10 * ptMM
	title := dist.Result
	switch {
	case unit != "":
		title += " [" + unit + "]"
	case strings.TrimSpace(dist.Unit) != "":
		title += " [SI; unit " + dist.Unit + " not known]"
	}
	d.text(marginL, d.y, title)
	d.font("", 8, colMuted)
	info := fmt.Sprintf("N = %d   invalid or missing = %d", dist.N, dist.Invalid)
	if dist.N > 0 {
		info += "   range " + num(dist.Min/scale) + " … " + num(dist.Max/scale) + sp(unit)
	}
	d.textR(marginL+contentW, d.y, info)
	d.y += 3

	if dist.N == 0 {
		d.draw(colRule)
		d.pdf.SetLineWidth(0.2)
		d.pdf.Rect(marginL, d.y, contentW, 14, "D")
		d.font("", 9, colMuted)
		d.textC(marginL+contentW/2, d.y+8.5, "No valid values: nothing to plot.")
		d.y += 16
		d.boundList(edges, unit, dist)
		return
	}

	lo, hi := dist.Min/scale, dist.Max/scale
	// The view shows the data and the bounds near it; bounds farther out than half
	// the data's span are drawn at the edge with an arrow.
	span := hi - lo
	vlo, vhi := lo, hi
	if !(span > 0) {
		span = farthest(edges, lo)
		if !(span > 0) {
			span = math.Max(math.Abs(lo)*0.2, 1)
		}
		vlo, vhi = lo-span/4, hi+span/4
		span *= 2
	}
	for _, e := range edges {
		if e.v < vlo && lo-e.v <= 0.5*span {
			vlo = e.v
		}
		if e.v > vhi && e.v-hi <= 0.5*span {
			vhi = e.v
		}
	}
	pad := (vhi - vlo) * 0.04
	ax := pdfdoc.NewAxis(vlo-pad, vhi+pad, 7)

	const yAxisW = 12.0
	px, pw := marginL+yAxisW, contentW-yAxisW-2
	py := d.y + bandH
	xOf := func(v float64) float64 { return px + ax.Pos(v, pw) }

	most := 1
	for _, c := range dist.Bins {
		most = max(most, c)
	}
	ystep := math.Max(1, math.Ceil(pdfdoc.NiceStep(float64(most), 4)))
	ymax := math.Ceil(float64(most)/ystep) * ystep
	yOf := func(c float64) float64 { return py + plotH - c/ymax*plotH }

	// Grid and axes.
	d.pdf.SetLineWidth(0.15)
	d.draw(colGrid)
	d.font("", 6.5, colMuted)
	for c := 0.0; c <= ymax+1e-9; c += ystep {
		y := yOf(c)
		d.pdf.Line(px, y, px+pw, y)
		d.textR(px-1.5, y+0.9, strconv.FormatFloat(c, 'f', 0, 64))
	}
	for _, t := range ax.Ticks {
		x := xOf(t)
		d.draw(colGrid)
		d.pdf.Line(x, py, x, py+plotH)
		d.draw(colMuted)
		d.pdf.Line(x, py+plotH, x, py+plotH+1)
		d.textC(x, py+plotH+3.8, axisLabel(ax, t))
	}
	d.font("", 7, colMuted)
	xl := "value"
	if unit != "" {
		xl += " [" + unit + "]"
	}
	d.textC(px+pw/2, py+plotH+7.8, xl)
	d.pdf.TransformBegin()
	d.pdf.TransformRotate(90, marginL+2, py+plotH/2)
	d.textC(marginL+2, py+plotH/2, "units")
	d.pdf.TransformEnd()

	// Bars.
	d.fill(colBar)
	d.draw(colBarEdg)
	d.pdf.SetLineWidth(0.1)
	n := len(dist.Bins)
	if n > 0 {
		w := (hi - lo) / float64(n)
		for k, c := range dist.Bins {
			if c == 0 {
				continue
			}
			var x0, x1 float64
			if w > 0 {
				x0, x1 = xOf(lo+float64(k)*w), xOf(lo+float64(k+1)*w)
			} else {
				x0, x1 = xOf(lo)-pw/160, xOf(lo)+pw/160
			}
			y := yOf(float64(c))
			d.pdf.Rect(x0, y, math.Max(x1-x0, 0.3), py+plotH-y, "FD")
		}
	}
	d.draw(colMuted)
	d.pdf.SetLineWidth(0.25)
	d.pdf.Line(px, py+plotH, px+pw, py+plotH)
	d.pdf.Line(px, py, px, py+plotH)

	// Bound lines, old first so the new ones are drawn on top.
	type tag struct {
		x0, x1 float64
		row    int
	}
	var tags []tag
	var edgeRows [3]int // labels at the left (0) and right (2) edge
	d.font("", 6.3, colInk)
	for _, pass := range []bool{false, true} {
		for _, e := range edges {
			if (e.which != "old") != pass {
				continue
			}
			col := colNew
			if e.which == "old" {
				col = colOld
			}
			x := xOf(e.v)
			outside := 0
			switch {
			case e.v < ax.Lo:
				x, outside = px, -1
			case e.v > ax.Hi:
				x, outside = px+pw, 1
			}
			d.draw(col)
			if e.which == "old" {
				d.pdf.SetLineWidth(0.35)
				d.pdf.SetDashPattern([]float64{1.2, 0.9}, 0)
			} else {
				d.pdf.SetLineWidth(0.45)
			}
			if outside == 0 {
				d.pdf.Line(x, py-1, x, py+plotH)
			}
			d.pdf.SetDashPattern([]float64{}, 0)
			d.pdf.SetTextColor(col.r, col.g, col.b)
			s := e.label() + sp(unit)
			if outside != 0 {
				// An arrow at the edge pointing to where the bound lies, labelled
				// inside the plot, stacked from the top at each edge.
				ay := py + 4 + float64(edgeRows[outside+1])*3.2
				edgeRows[outside+1]++
				d.fill(col)
				dx := float64(outside) * 2.2
				d.pdf.Polygon([]gofpdf.PointType{{X: x, Y: ay - 0.8}, {X: x - dx, Y: ay - 2.2}, {X: x - dx, Y: ay + 0.6}}, "F")
				s += " (off scale)"
				sw := d.pdf.GetStringWidth(s)
				tx := x + 3
				if outside > 0 {
					tx = x - 3 - sw
				}
				d.fill(colWhite)
				d.pdf.Rect(tx-0.6, ay-2.3, sw+1.2, 3, "F")
				d.text(tx, ay, s)
				continue
			}
			sw := d.pdf.GetStringWidth(s)
			tx := math.Max(marginL, math.Min(x-sw/2, marginL+contentW-sw))
			row := 0
			for ; row < 2; row++ {
				clash := false
				for _, t := range tags {
					if t.row == row && tx < t.x1+1 && tx+sw > t.x0-1 {
						clash = true
						break
					}
				}
				if !clash {
					break
				}
			}
			tags = append(tags, tag{tx, tx + sw, row})
			d.text(tx, py-1.8-float64(row)*3.1, s)
		}
	}
	d.y = py + plotH + axisH + 1
	d.boundList(edges, unit, dist)
}

// boundList writes the legend: line styles, then each bound with its limit.
func (d *doc) boundList(edges []edge, unit string, dist Distribution) {
	d.y += 3.2
	x := marginL
	d.pdf.SetLineWidth(0.35)
	d.draw(colOld)
	d.pdf.SetDashPattern([]float64{1.2, 0.9}, 0)
	d.pdf.Line(x, d.y-1, x+7, d.y-1)
	d.pdf.SetDashPattern([]float64{}, 0)
	d.font("", 7, colMuted)
	d.text(x+8.5, d.y, "old bound")
	d.pdf.SetLineWidth(0.45)
	d.draw(colNew)
	d.pdf.Line(x+26, d.y-1, x+33, d.y-1)
	d.text(x+34.5, d.y, "new bound")
	if len(edges) == 0 {
		d.text(x+56, d.y, "no bounds on this result")
	}
	for _, e := range edges {
		d.y += 3.6
		col := colNew
		if e.which == "old" {
			col = colOld
		}
		d.font("", 7, col)
		d.text(x+2, d.y, e.label()+sp(unit))
		d.font("", 7, colInk)
		note := e.limit
		if dist.N > 0 {
			vmin, vmax := dist.Min, dist.Max
			scale, _ := displayUnit(dist.Unit)
			switch {
			case e.v < vmin/scale && !near(e.v, vmin/scale):
				note += " — below every value"
			case e.v > vmax/scale && !near(e.v, vmax/scale):
				note += " — above every value"
			}
		}
		d.text(x+40, d.y, d.fit(note, contentW-40))
	}
	d.y += 2
}

// edgesOf lists the bounds of dist in the display unit; a bound both sets have on
// the same side with the same value is listed once, as "old = new".
func edgesOf(dist Distribution, scale float64) []edge {
	var all []edge
	add := func(which string, bs []limits.Bound) {
		for _, b := range bs {
			if b.Lower != nil {
				all = append(all, edge{which, false, b.Limit, *b.Lower / scale})
			}
			if b.Upper != nil {
				all = append(all, edge{which, true, b.Limit, *b.Upper / scale})
			}
		}
	}
	add("new", dist.New)
	add("old", dist.Old)
	var out []edge
	for _, e := range all {
		if math.IsNaN(e.v) || math.IsInf(e.v, 0) {
			continue
		}
		merged := false
		if e.which == "old" {
			for i := range out {
				o := &out[i]
				if o.which == "new" && o.upper == e.upper && near(o.v, e.v) {
					o.which = "old = new"
					if !strings.EqualFold(o.limit, e.limit) {
						o.limit += " (old: " + e.limit + ")"
					}
					merged = true
					break
				}
			}
		}
		if !merged {
			out = append(out, e)
		}
	}
	return out
}

func farthest(es []edge, at float64) float64 {
	m := 0.0
	for _, e := range es {
		m = math.Max(m, math.Abs(e.v-at))
	}
	return m
}

// ---- flips table ----

func (d *doc) flips() {
	fs := d.r.Flips
	d.heading(fmt.Sprintf("Units whose verdict flips (%d)", len(fs)))
	if len(fs) == 0 {
		d.font("", 9, colMuted)
		d.y += 4
		d.text(marginL, d.y, "No unit changes verdict under the new set.")
		return
	}
	cols := []struct {
		title string
		w     float64
	}{{"Serial", 30}, {"Run", 30}, {"Finished (UTC)", 30}, {"Old → new", 28}, {"Limits involved", contentW - 118}}
	const rowH = 4.6
	header := func() {
		d.fill(colHead)
		d.pdf.Rect(marginL, d.y, contentW, rowH+0.6, "F")
		d.font("B", 7.5, colInk)
		x := marginL + 1
		for _, c := range cols {
			d.text(x, d.y+rowH*0.72, c.title)
			x += c.w
		}
		d.y += rowH + 0.6
	}
	header()
	for i, f := range fs {
		if i == MaxFlipRows {
			d.ensure(rowH + 2)
			d.font("", 8, colMuted)
			d.y += rowH
			d.text(marginL+1, d.y, fmt.Sprintf("… and %d more", len(fs)-MaxFlipRows))
			break
		}
		if d.ensure(rowH) {
			header()
		}
		if i%2 == 1 {
			d.fill(colZebra)
			d.pdf.Rect(marginL, d.y, contentW, rowH, "F")
		}
		base := d.y + rowH*0.72
		x := marginL + 1
		d.pdf.SetFont(mono, "", 7.5)
		d.pdf.SetTextColor(colInk.r, colInk.g, colInk.b)
		d.text(x, base, d.fit(f.Serial, cols[0].w-2))
		x += cols[0].w
		d.text(x, base, d.fit(orDash(f.RunID), cols[1].w-2))
		x += cols[1].w
		d.font("", 7.5, colInk)
		when := "—"
		if !f.Finished.IsZero() {
			when = f.Finished.UTC().Format("2006-01-02 15:04:05")
		}
		d.text(x, base, when)
		x += cols[2].w
		d.font("", 7.5, verdictColor(f.Old))
		d.text(x, base, f.Old)
		ow := d.pdf.GetStringWidth(f.Old + " ")
		d.font("", 7.5, colMuted)
		d.text(x+ow, base, "→")
		aw := d.pdf.GetStringWidth("→ ")
		d.font("B", 7.5, verdictColor(f.New))
		d.text(x+ow+aw, base, f.New)
		x += cols[3].w
		d.font("", 7.5, colInk)
		d.text(x, base, d.fit(strings.Join(f.Limits, "; "), cols[4].w-2))
		d.y += rowH
	}
}

func verdictColor(v string) rgb {
	switch v {
	case limits.VerdictPass:
		return colPass
	case limits.VerdictFail:
		return colFail
	case limits.VerdictReview:
		return colReview
	}
	return colInk
}

// ---- numbers and units ----

// displayUnit returns the SI value of one unit u and its printed form; an unknown
// unit is shown as SI (scale 1) without a name.
func displayUnit(u string) (float64, string) {
	u = strings.TrimSpace(u)
	if u == "" {
		return 1, ""
	}
	q, err := units.Parse("1" + u)
	if err != nil || !(q.Value > 0) || math.IsInf(q.Value, 0) {
		return 1, ""
	}
	if len(u) >= 2 && u[0] == 'u' {
		u = "µ" + u[1:]
	}
	return q.Value, u
}

func sp(u string) string {
	if u == "" {
		return ""
	}
	return " " + u
}

func orDash(s string) string {
	if strings.TrimSpace(s) == "" {
		return "—"
	}
	return s
}

// pct writes a fraction as a percentage with two decimals.
func pct(f float64) string { return strconv.FormatFloat(f*100, 'f', 2, 64) + " %" }

// signed writes a change in percentage points with a sign.
func signed(v float64) string {
	s := strconv.FormatFloat(math.Abs(v), 'f', 2, 64)
	switch {
	case s == "0.00":
		return "±0.00"
	case v < 0:
		return "−" + s
	}
	return "+" + s
}

// num writes v with up to 6 significant digits and a real minus sign.
func num(v float64) string { return units.FormatSig(v, 6) }

func near(a, b float64) bool {
	return math.Abs(a-b) <= 1e-9*math.Max(1, math.Max(math.Abs(a), math.Abs(b)))
}

func axisLabel(a pdfdoc.Axis, v float64) string {
	s := strconv.FormatFloat(v, 'f', a.Dec, 64)
	if strings.Trim(s, "-0.") == "" {
		s = strings.TrimPrefix(s, "-")
	}
	return strings.Replace(s, "-", "−", 1)
}
