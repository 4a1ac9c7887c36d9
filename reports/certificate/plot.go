package certificate

import (
	"math"
	"strconv"

	"trimline/reports/internal/pdfdoc"
)

// xy is one plotted point: stimulus and error in volts, s the standard deviation
// of the readings (drawn as a ±1 s bar).
type xy struct{ x, y, s float64 }

const (
	markerCircle = iota
	markerSquare
)

type series struct {
	label   string
	sweep   string
	pts     []xy
	color   rgb
	marker  int
	missing bool // the record has no sweep of this name
}

// siScale picks a unit prefix for values up to maxAbs volts: the factor to divide
// by and the unit's name.
func siScale(maxAbs float64) (float64, string) {
	switch {
	case maxAbs >= 1:
		return 1, "V"
	case maxAbs >= 1e-3:
		return 1e-3, "mV"
	case maxAbs >= 1e-6 || maxAbs == 0:
		return 1e-6, "µV"
	}
	return 1e-9, "nV"
}

// newAxis makes an axis that shows [lo, hi] with a margin of pad (a fraction of
// the span) on each side.
func newAxis(lo, hi, pad float64, n int) pdfdoc.Axis {
	m := math.Abs(hi-lo) * pad
	return pdfdoc.NewAxis(math.Min(lo, hi)-m, math.Max(lo, hi)+m, n)
}

func axisLabel(a pdfdoc.Axis, v float64) string {
	return minus(strconv.FormatFloat(v, 'f', a.Dec, 64))
}

// plot draws one error-versus-stimulus chart in the box (x, y, w, h).
func (d *doc) plot(x, y, w, h float64, title string, s series) {
	d.text(x, y, w, 4.5, title, stBold.sized(8.5), "L")
	sub := "sweep “" + s.sweep + "”"
	if !s.missing {
		sub += ", " + plural(len(s.pts), "valid point", "valid points")
	}
	d.text(x, y, w, 4.5, sub, stSmall, "R")

	// Plot area.
	const left, right, top, foot = 15.0, 2.0, 6.5, 10.0
	px, py := x+left, y+top
	pw, ph := w-left-right, h-top-foot
	d.fill(colWhite)
	d.draw(colRule)
	d.pdf.SetLineWidth(0.25)
	d.pdf.Rect(px, py, pw, ph, "D")

	if len(s.pts) == 0 {
		msg := "no data"
		detail := "the sweep has no valid points"
		if s.missing {
			detail = "the record has no sweep “" + s.sweep + "”"
		}
		d.text(px, py+ph/2-5, pw, 6, msg, stBold.sized(10).with(colMuted), "C")
		d.text(px, py+ph/2+1, pw, 4, detail, stSmall, "C")
		return
	}

	// Scales: each axis in the SI prefix that suits its data.
	maxX, maxY := 0.0, 0.0
	for _, p := range s.pts {
		maxX = math.Max(maxX, math.Abs(p.x))
		maxY = math.Max(maxY, math.Abs(p.y)+p.s)
	}
	fx, ux := siScale(maxX)
	fy, uy := siScale(maxY)
	xlo, xhi := math.Inf(1), math.Inf(-1)
	ylo, yhi := 0.0, 0.0 // the zero line is always in view
	for _, p := range s.pts {
		xlo, xhi = math.Min(xlo, p.x/fx), math.Max(xhi, p.x/fx)
		ylo, yhi = math.Min(ylo, (p.y-p.s)/fy), math.Max(yhi, (p.y+p.s)/fy)
	}
	ax := newAxis(xlo, xhi, 0.04, 5)
	ay := newAxis(ylo, yhi, 0.08, 5)
	mapX := func(v float64) float64 { return px + ax.Pos(v, pw) }
	mapY := func(v float64) float64 { return py + ph - ay.Pos(v, ph) }

	// Gridlines and tick labels.
	tick := stSmall.sized(6.3)
	d.pdf.SetLineWidth(0.15)
	for _, t := range ax.Ticks {
		gx := mapX(t)
		d.draw(colGrid)
		d.pdf.Line(gx, py, gx, py+ph)
		d.text(gx-8, py+ph+0.6, 16, 3, axisLabel(ax, t), tick, "C")
	}
	for _, t := range ay.Ticks {
		gy := mapY(t)
		d.draw(colGrid)
		d.pdf.SetLineWidth(0.15)
		if t == 0 {
			d.draw(colMuted)
			d.pdf.SetLineWidth(0.3)
		}
		d.pdf.Line(px, gy, px+pw, gy)
		d.text(px-13, gy-1.5, 12, 3, axisLabel(ay, t), tick, "R")
	}
	if ay.Lo < 0 && ay.Hi > 0 && !containsZero(ay.Ticks) {
		d.draw(colMuted)
		d.pdf.SetLineWidth(0.3)
		d.pdf.Line(px, mapY(0), px+pw, mapY(0))
	}
	d.draw(colRule)
	d.pdf.SetLineWidth(0.25)
	d.pdf.Rect(px, py, pw, ph, "D")

	// Axis titles.
	d.text(px, py+ph+4, pw, 3.5, "stimulus ("+ux+")", stLabel.sized(7), "C")
	// The y title is rotated. Text, not CellFormat: gofpdf reads a negative x in
	// SetXY as measured from the right edge.
	ylab := "error (" + uy + ")"
	yst := stLabel.sized(7)
	cx, cy := x+2.6, py+ph/2
	d.pdf.TransformBegin()
	d.pdf.TransformRotate(90, cx, cy)
	d.use(yst)
	d.pdf.Text(cx-d.pdf.GetStringWidth(ylab)/2, cy+yst.size*ptMM*0.35, ylab)
	d.pdf.TransformEnd()

	// Series: connecting line, ±1 s bars, markers.
	d.draw(s.color)
	d.pdf.SetLineWidth(0.35)
	for i := 1; i < len(s.pts); i++ {
		a, b := s.pts[i-1], s.pts[i]
		d.pdf.Line(mapX(a.x/fx), mapY(a.y/fy), mapX(b.x/fx), mapY(b.y/fy))
	}
	d.pdf.SetLineWidth(0.2)
	for _, p := range s.pts {
		if p.s <= 0 {
			continue
		}
		bx, y1, y2 := mapX(p.x/fx), mapY((p.y-p.s)/fy), mapY((p.y+p.s)/fy)
		if y1-y2 < 0.4 {
			continue // too short to see
		}
		d.pdf.Line(bx, y1, bx, y2)
		d.pdf.Line(bx-0.6, y1, bx+0.6, y1)
		d.pdf.Line(bx-0.6, y2, bx+0.6, y2)
	}
	for _, p := range s.pts {
		d.marker(mapX(p.x/fx), mapY(p.y/fy), s.marker, s.color)
	}
}

func containsZero(ts []float64) bool {
	for _, t := range ts {
		if t == 0 {
			return true
		}
	}
	return false
}

// marker draws a filled marker centred on (x, y).
func (d *doc) marker(x, y float64, kind int, c rgb) {
	d.fill(c)
	d.draw(colWhite)
	d.pdf.SetLineWidth(0.15)
	switch kind {
	case markerSquare:
		d.pdf.Rect(x-0.8, y-0.8, 1.6, 1.6, "FD")
	default:
		d.pdf.Circle(x, y, 0.85, "FD")
	}
}

// errorBarGlyph draws a small error bar for the legend.
func (d *doc) errorBarGlyph(x, y float64) {
	d.draw(colMuted)
	d.pdf.SetLineWidth(0.2)
	d.pdf.Line(x, y-1.5, x, y+1.5)
	d.pdf.Line(x-0.6, y-1.5, x+0.6, y-1.5)
	d.pdf.Line(x-0.6, y+1.5, x+0.6, y+1.5)
}
