package whatif

import (
	"fmt"
	"math"
	"strconv"
	"strings"

	"github.com/jung-kurt/gofpdf"

	"trimline/limits"
	"trimline/reports/internal/pdfdoc"
)

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
	if d.Y == marginT {
		// fresh page
	} else if d.Y+total > bottom {
		d.newPage()
	} else {
		d.Y += 4
	}
	d.font("B", 10, pdfdoc.Ink)
	d.Y += 10 * pdfdoc.PtMM
	title := dist.Result
	switch {
	case unit != "":
		title += " [" + unit + "]"
	case strings.TrimSpace(dist.Unit) != "":
		title += " [SI; unit " + dist.Unit + " not known]"
	}
	d.PDF.Text(marginL, d.Y, title)
	d.font("", 8, pdfdoc.Muted)
	info := fmt.Sprintf("N = %d   invalid or missing = %d", dist.N, dist.Invalid)
	if dist.N > 0 {
		info += "   range " + num(dist.Min/scale) + " … " + num(dist.Max/scale) + sp(unit)
	}
	d.TextRight(marginL+contentW, d.Y, info)
	d.Y += 3

	if dist.N == 0 {
		d.Frame(marginL, d.Y, contentW, 14, pdfdoc.Rule, 0.2)
		d.font("", 9, pdfdoc.Muted)
		d.TextCentre(marginL+contentW/2, d.Y+8.5, "No valid values: nothing to plot.")
		d.Y += 16
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
	ax := pdfdoc.PaddedAxis(vlo, vhi, 0.04, 7)

	const yAxisW = 12.0
	px, pw := marginL+yAxisW, contentW-yAxisW-2
	py := d.Y + bandH
	xOf := func(v float64) float64 { return px + ax.Pos(v, pw) }

	most := 1
	for _, c := range dist.Bins {
		most = max(most, c)
	}
	ystep := math.Max(1, math.Ceil(pdfdoc.NiceStep(float64(most), 4)))
	ymax := math.Ceil(float64(most)/ystep) * ystep
	yOf := func(c float64) float64 { return py + plotH - c/ymax*plotH }

	// Grid and axes.
	d.PDF.SetLineWidth(0.15)
	d.Stroke(colGrid)
	d.font("", 6.5, pdfdoc.Muted)
	for c := 0.0; c <= ymax+1e-9; c += ystep {
		y := yOf(c)
		d.PDF.Line(px, y, px+pw, y)
		d.TextRight(px-1.5, y+0.9, strconv.FormatFloat(c, 'f', 0, 64))
	}
	for _, t := range ax.Ticks {
		x := xOf(t)
		d.Stroke(colGrid)
		d.PDF.Line(x, py, x, py+plotH)
		d.Stroke(pdfdoc.Muted)
		d.PDF.Line(x, py+plotH, x, py+plotH+1)
		d.TextCentre(x, py+plotH+3.8, ax.Label(t))
	}
	d.font("", 7, pdfdoc.Muted)
	xl := "value"
	if unit != "" {
		xl += " [" + unit + "]"
	}
	d.TextCentre(px+pw/2, py+plotH+7.8, xl)
	d.Rotated(marginL+2, py+plotH/2, func() { d.TextCentre(marginL+2, py+plotH/2, "units") })

	// Bars.
	d.Fill(colBar)
	d.Stroke(colBarEdg)
	d.PDF.SetLineWidth(0.1)
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
			d.PDF.Rect(x0, y, math.Max(x1-x0, 0.3), py+plotH-y, "FD")
		}
	}
	d.HLine(px, py+plotH, pw, pdfdoc.Muted, 0.25)
	d.PDF.Line(px, py, px, py+plotH)

	// Bound lines, old first so the new ones are drawn on top.
	type tag struct {
		x0, x1 float64
		row    int
	}
	var tags []tag
	var edgeRows [3]int // labels at the left (0) and right (2) edge
	d.font("", 6.3, pdfdoc.Ink)
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
			d.Stroke(col)
			if e.which == "old" {
				d.PDF.SetLineWidth(0.35)
				d.PDF.SetDashPattern([]float64{1.2, 0.9}, 0)
			} else {
				d.PDF.SetLineWidth(0.45)
			}
			if outside == 0 {
				d.PDF.Line(x, py-1, x, py+plotH)
			}
			d.PDF.SetDashPattern([]float64{}, 0)
			d.PDF.SetTextColor(col.R, col.G, col.B)
			s := e.label() + sp(unit)
			if outside != 0 {
				// An arrow at the edge pointing to where the bound lies, labelled
				// inside the plot, stacked from the top at each edge.
				ay := py + 4 + float64(edgeRows[outside+1])*3.2
				edgeRows[outside+1]++
				d.Fill(col)
				dx := float64(outside) * 2.2
				d.PDF.Polygon([]gofpdf.PointType{{X: x, Y: ay - 0.8}, {X: x - dx, Y: ay - 2.2}, {X: x - dx, Y: ay + 0.6}}, "F")
				s += " (off scale)"
				sw := d.PDF.GetStringWidth(s)
				tx := x + 3
				if outside > 0 {
					tx = x - 3 - sw
				}
				d.FillRect(tx-0.6, ay-2.3, sw+1.2, 3, pdfdoc.White)
				d.PDF.Text(tx, ay, s)
				continue
			}
			sw := d.PDF.GetStringWidth(s)
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
			d.PDF.Text(tx, py-1.8-float64(row)*3.1, s)
		}
	}
	d.Y = py + plotH + axisH + 1
	d.boundList(edges, unit, dist)
}

// boundList writes the legend: line styles, then each bound with its limit.
func (d *doc) boundList(edges []edge, unit string, dist Distribution) {
	d.Y += 3.2
	x := marginL
	d.PDF.SetLineWidth(0.35)
	d.Stroke(colOld)
	d.PDF.SetDashPattern([]float64{1.2, 0.9}, 0)
	d.PDF.Line(x, d.Y-1, x+7, d.Y-1)
	d.PDF.SetDashPattern([]float64{}, 0)
	d.font("", 7, pdfdoc.Muted)
	d.PDF.Text(x+8.5, d.Y, "old bound")
	d.PDF.SetLineWidth(0.45)
	d.Stroke(colNew)
	d.PDF.Line(x+26, d.Y-1, x+33, d.Y-1)
	d.PDF.Text(x+34.5, d.Y, "new bound")
	if len(edges) == 0 {
		d.PDF.Text(x+56, d.Y, "no bounds on this result")
	}
	for _, e := range edges {
		d.Y += 3.6
		col := colNew
		if e.which == "old" {
			col = colOld
		}
		d.font("", 7, col)
		d.PDF.Text(x+2, d.Y, e.label()+sp(unit))
		d.font("", 7, pdfdoc.Ink)
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
		d.PDF.Text(x+40, d.Y, d.Fit(note, contentW-40))
	}
	d.Y += 2
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
