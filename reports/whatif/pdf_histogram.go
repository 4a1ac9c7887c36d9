package whatif

import (
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"

	"github.com/jung-kurt/gofpdf"

	"trimline/instruments/units"
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
		plotH = 42.0
		axisH = 9.0
	)
	// The bound labels above the plot: a row for the old set's, one above it
	// for the new set's (pushed apart along the row: placeLabels).
	d.font("", labelPt, pdfdoc.Ink)
	var onScale []boundLabel
	// The x axis is the histogram's band: the bounds and a margin (histBand).
	hist := dist.Hist
	lo, hi := hist.Lo/scale, hist.Hi/scale
	var ax pdfdoc.Axis
	if len(hist.Counts) > 0 && hi > lo {
		ax = pdfdoc.NewAxis(lo, hi, 7)
	} else {
		ax = viewAxis(edges, dist.Min/scale, dist.Max/scale)
	}
	const yAxisW = 12.0
	px, pw := marginL+yAxisW, contentW-yAxisW-2
	for _, e := range edges {
		if e.v >= ax.Lo && e.v <= ax.Hi {
			s := e.label() + sp(unit)
			onScale = append(onScale, boundLabel{text: s, at: px + ax.Pos(e.v, pw), w: d.PDF.GetStringWidth(s), new: e.which != "old"})
		}
	}
	placed, rows := placeLabels(onScale, marginL, marginL+contentW)
	bandH := math.Max(10, float64(rows)*labelPitch+3)
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

	py := d.Y + bandH
	xOf := func(v float64) float64 { return px + ax.Pos(v, pw) }

	most := 1
	for _, c := range hist.Counts {
		most = max(most, c)
	}
	ystep := math.Max(1, math.Ceil(pdfdoc.NiceStep(float64(most), 4)))
	// Headroom above the tallest bar for the counts outside the band.
	ymax := math.Ceil(float64(most)*1.2/ystep) * ystep
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
	if n := len(hist.Counts); n > 0 && hi > lo {
		w := (hi - lo) / float64(n)
		for k, c := range hist.Counts {
			if c == 0 {
				continue
			}
			x0, x1 := xOf(lo+float64(k)*w), xOf(lo+float64(k+1)*w)
			y := yOf(float64(c))
			d.PDF.Rect(x0, y, math.Max(x1-x0, 0.3), py+plotH-y, "FD")
		}
	}
	d.HLine(px, py+plotH, pw, pdfdoc.Muted, 0.25)
	d.PDF.Line(px, py, px, py+plotH)

	// The values outside the band, written at its ends inside the plot.
	for _, end := range []struct {
		n     int
		s     string
		right bool
	}{
		{hist.Under, fmt.Sprintf("◄ %d below %s%s", hist.Under, units.FormatSig(lo, 4), sp(unit)), false},
		{hist.Over, fmt.Sprintf("%d above %s%s ►", hist.Over, units.FormatSig(hi, 4), sp(unit)), true},
	} {
		if end.n > 0 {
			d.font("B", 7, pdfdoc.Fail)
		} else {
			d.font("", 7, pdfdoc.Muted)
		}
		sw := d.PDF.GetStringWidth(end.s)
		tx := px + 1.2
		if end.right {
			tx = px + pw - 1.2 - sw
		}
		d.FillRect(tx-0.6, py+0.8, sw+1.2, 3.2, pdfdoc.White)
		d.PDF.Text(tx, py+3.3, end.s)
	}

	// Bound lines, old first so the new ones are drawn on top.
	var edgeRows [3]int // labels at the left (0) and right (2) edge
	d.font("", labelPt, pdfdoc.Ink)
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
			if outside != 0 {
				d.PDF.SetTextColor(col.R, col.G, col.B)
				s := e.label() + sp(unit)
				// An arrow at the edge pointing to where the bound lies, labelled
				// inside the plot, stacked from the top at each edge.
				ay := py + 4 + float64(edgeRows[outside+1]+1)*3.2 // below the count outside the band
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
		}
	}
	// Their labels, as placeLabels put them; a label moved off its line is
	// joined to it by a thin leader where the leader crosses no other label.
	boxes := labelBoxes(onScale, placed, py)
	for i, l := range onScale {
		p := placed[i]
		col := colOld
		if l.new {
			col = colNew
		}
		base := py - labelBase - float64(p.row)*labelPitch
		if math.Abs(p.x0+l.w/2-l.at) > 0.3 && !crossesBox(p.x0+l.w/2, base+0.5, l.at, py-1, boxes, i) {
			d.Stroke(col)
			d.PDF.SetLineWidth(0.15)
			d.PDF.Line(p.x0+l.w/2, base+0.5, l.at, py-1)
		}
		d.PDF.SetTextColor(col.R, col.G, col.B)
		d.PDF.Text(p.x0, base, l.text)
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

// viewAxis is the x axis of a histogram of values over [lo, hi]: the data and
// the bounds near it. Bounds farther out than half the data's span are drawn at
// the edge with an arrow.
func viewAxis(edges []edge, lo, hi float64) pdfdoc.Axis {
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
	return pdfdoc.PaddedAxis(vlo, vhi, 0.04, 7)
}

// The bound labels above a histogram: their size (points), the pitch of their
// rows and the height of the lowest row's baseline above the plot (mm), and
// the least space between two labels of a row (mm).
const (
	labelPt    = 6.3
	labelPitch = 3.1
	labelBase  = 1.8
	labelSpace = 1.5
)

// boundLabel is the label of one bound drawn on the plot: its text, the x of
// its line and its width (mm), and whether it is the new set's.
type boundLabel struct {
	text  string
	at, w float64
	new   bool
}

// placedLabel is where a label goes: the x of its left end and its row above
// the plot (0 nearest it).
type placedLabel struct {
	x0  float64
	row int
}

// placeLabels places the bound labels above a histogram whose labels may use
// x from x0 to x1, and returns the place of each (in the order of ls) and the
// number of rows used. The old set's labels take one row and the new set's
// ("new" and "old = new") the row above it, so a bound and its close
// counterpart in the other set never compete for room; within a row each
// label is centred on its line where it can be and pushed along the row
// (pdfdoc.Spread, the rule the control charts use) where it would touch its
// neighbour. A row that cannot hold its labels side by side is split into as
// many rows as it needs, taking every k-th label in turn. Labels never
// overlap, whatever the bounds.
func placeLabels(ls []boundLabel, x0, x1 float64) ([]placedLabel, int) {
	out := make([]placedLabel, len(ls))
	row := 0
	for _, isNew := range []bool{false, true} {
		var idx []int
		widest := 0.0
		for i, l := range ls {
			if l.new == isNew {
				idx = append(idx, i)
				widest = math.Max(widest, l.w)
			}
		}
		if len(idx) == 0 {
			continue
		}
		// Sorted by line position, so splitting takes every k-th label.
		sort.SliceStable(idx, func(a, b int) bool { return ls[idx[a]].at < ls[idx[b]].at })
		gap := widest + labelSpace
		k := max(1, int(math.Ceil(float64(len(idx))*gap/(x1-x0+labelSpace))))
		for r := range k {
			var sub []int
			for j := r; j < len(idx); j += k {
				sub = append(sub, idx[j])
			}
			// Spread the centres: gap apart, inside [x0 + widest/2, x1 − widest/2].
			// A line nearer an edge than half a label wants its label at
			// the edge (clamped before spreading, so the order stays).
			lo, hi := x0+widest/2, x1-widest/2
			want := make([]float64, len(sub))
			for j, i := range sub {
				want[j] = math.Max(lo, math.Min(ls[i].at, hi))
			}
			at := pdfdoc.Spread(want, gap, lo, hi)
			for j, i := range sub {
				out[i] = placedLabel{x0: at[j] - ls[i].w/2, row: row}
			}
			row++
		}
	}
	return out, row
}

// box is a rectangle on the page, mm.
type box struct{ x0, y0, x1, y1 float64 }

// labelBoxes are the boxes the placed labels' text takes above a plot whose
// top is at py: the width measured, from the cap height above the baseline to
// the descenders below it.
func labelBoxes(ls []boundLabel, placed []placedLabel, py float64) []box {
	h := labelPt * pdfdoc.PtMM
	out := make([]box, len(ls))
	for i, l := range ls {
		base := py - labelBase - float64(placed[i].row)*labelPitch
		out[i] = box{placed[i].x0, base - 0.75*h, placed[i].x0 + l.w, base + 0.25*h}
	}
	return out
}

// crossesBox reports whether the segment from (ax, ay) to (bx, by) passes
// through any of boxes but the one numbered skip.
func crossesBox(ax, ay, bx, by float64, boxes []box, skip int) bool {
	for i, b := range boxes {
		if i == skip {
			continue
		}
		for k := 0; k <= 40; k++ {
			t := float64(k) / 40
			x, y := ax+(bx-ax)*t, ay+(by-ay)*t
			if x >= b.x0 && x <= b.x1 && y >= b.y0 && y <= b.y1 {
				return true
			}
		}
	}
	return false
}

func farthest(es []edge, at float64) float64 {
	m := 0.0
	for _, e := range es {
		m = math.Max(m, math.Abs(e.v-at))
	}
	return m
}
