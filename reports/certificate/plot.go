package certificate

import (
	"math"

	"trimline/reports/internal/pdfdoc"
)

// xy is one plotted point: stimulus and error in the record's units (volts,
// amperes or counts), s the standard deviation of the readings (drawn as a ±1 s
// bar).
type xy struct{ x, y, s float64 }

const (
	markerCircle = iota
	markerSquare
)

// series is one sweep's plot: its title, its label in the legend, its sweep's
// name, its points and how they are drawn.
type series struct {
	title  string
	label  string
	sweep  string
	pts    []xy
	color  pdfdoc.Color
	marker int
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

// plot draws one error-versus-stimulus chart in the box (x, y, w, h).
func (d *doc) plot(x, y, w, h float64, s series) {
	d.Cell(x, y, w, 4.5, s.title, pdfdoc.Bold.Sized(8.5), "L")
	sub := "sweep “" + s.sweep + "”, " + plural(len(s.pts), "valid point", "valid points")
	if d.TextWidth(s.title, pdfdoc.Bold.Sized(8.5))+d.TextWidth(sub, pdfdoc.Small)+3 > w {
		sub = plural(len(s.pts), "valid point", "valid points") // a long title (a channel's): the legend names the sweep
	}
	d.Cell(x, y, w, 4.5, sub, pdfdoc.Small, "R")

	// Plot area.
	const left, right, top, foot = 15.0, 2.0, 6.5, 10.0
	px, py := x+left, y+top
	pw, ph := w-left-right, h-top-foot
	d.Fill(pdfdoc.White)
	d.Frame(px, py, pw, ph, pdfdoc.Rule, 0.25)

	if len(s.pts) == 0 {
		msg := "no data"
		detail := "the sweep has no valid points"
		d.Cell(px, py+ph/2-5, pw, 6, msg, pdfdoc.Bold.Sized(10).With(pdfdoc.Muted), "C")
		d.Cell(px, py+ph/2+1, pw, 4, detail, pdfdoc.Small, "C")
		return
	}

	// Scales: each axis in the SI prefix that suits its data.
	maxX, maxY := 0.0, 0.0
	for _, p := range s.pts {
		maxX = math.Max(maxX, math.Abs(p.x))
		maxY = math.Max(maxY, math.Abs(p.y)+p.s)
	}
	fx, ux := d.stim().scale(maxX)
	fy, uy := d.resp().scale(maxY)
	xlo, xhi := math.Inf(1), math.Inf(-1)
	ylo, yhi := 0.0, 0.0 // the zero line is always in view
	for _, p := range s.pts {
		xlo, xhi = math.Min(xlo, p.x/fx), math.Max(xhi, p.x/fx)
		ylo, yhi = math.Min(ylo, (p.y-p.s)/fy), math.Max(yhi, (p.y+p.s)/fy)
	}
	ax := pdfdoc.PaddedAxis(xlo, xhi, 0.04, 5)
	ay := pdfdoc.PaddedAxis(ylo, yhi, 0.08, 5)
	mapX := func(v float64) float64 { return px + ax.Pos(v, pw) }
	mapY := func(v float64) float64 { return py + ph - ay.Pos(v, ph) }

	// Gridlines and tick labels.
	tick := pdfdoc.Small.Sized(6.3)
	d.PDF.SetLineWidth(0.15)
	for _, t := range ax.Ticks {
		gx := mapX(t)
		d.Stroke(pdfdoc.Grid)
		d.PDF.Line(gx, py, gx, py+ph)
		d.Cell(gx-8, py+ph+0.6, 16, 3, ax.Label(t), tick, "C")
	}
	for _, t := range ay.Ticks {
		gy := mapY(t)
		d.Stroke(pdfdoc.Grid)
		d.PDF.SetLineWidth(0.15)
		if t == 0 {
			d.Stroke(pdfdoc.Muted)
			d.PDF.SetLineWidth(0.3)
		}
		d.PDF.Line(px, gy, px+pw, gy)
		d.Cell(px-13, gy-1.5, 12, 3, ay.Label(t), tick, "R")
	}
	if ay.Lo < 0 && ay.Hi > 0 && !containsZero(ay.Ticks) {
		d.HLine(px, mapY(0), pw, pdfdoc.Muted, 0.3)
	}
	d.Frame(px, py, pw, ph, pdfdoc.Rule, 0.25)

	// Axis titles.
	d.Cell(px, py+ph+4, pw, 3.5, "stimulus ("+ux+")", stLabel.Sized(7), "C")
	// The y title is rotated. Text, not CellFormat: gofpdf reads a negative x in
	// SetXY as measured from the right edge.
	ylab := "error (" + uy + ")"
	yst := stLabel.Sized(7)
	cx, cy := x+2.6, py+ph/2
	d.Rotated(cx, cy, func() {
		d.Use(yst)
		d.TextCentre(cx, cy+yst.Size*pdfdoc.PtMM*0.35, ylab)
	})

	// Series: connecting line, ±1 s bars, markers.
	d.Stroke(s.color)
	d.PDF.SetLineWidth(0.35)
	for i := 1; i < len(s.pts); i++ {
		a, b := s.pts[i-1], s.pts[i]
		d.PDF.Line(mapX(a.x/fx), mapY(a.y/fy), mapX(b.x/fx), mapY(b.y/fy))
	}
	d.PDF.SetLineWidth(0.2)
	for _, p := range s.pts {
		if p.s <= 0 {
			continue
		}
		bx, y1, y2 := mapX(p.x/fx), mapY((p.y-p.s)/fy), mapY((p.y+p.s)/fy)
		if y1-y2 < 0.4 {
			continue // too short to see
		}
		d.PDF.Line(bx, y1, bx, y2)
		d.PDF.Line(bx-0.6, y1, bx+0.6, y1)
		d.PDF.Line(bx-0.6, y2, bx+0.6, y2)
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
func (d *doc) marker(x, y float64, kind int, c pdfdoc.Color) {
	d.Fill(c)
	d.Stroke(pdfdoc.White)
	d.PDF.SetLineWidth(0.15)
	switch kind {
	case markerSquare:
		d.PDF.Rect(x-0.8, y-0.8, 1.6, 1.6, "FD")
	default:
		d.PDF.Circle(x, y, 0.85, "FD")
	}
}

// errorBarGlyph draws a small error bar for the legend.
func (d *doc) errorBarGlyph(x, y float64) {
	d.Stroke(pdfdoc.Muted)
	d.PDF.SetLineWidth(0.2)
	d.PDF.Line(x, y-1.5, x, y+1.5)
	d.PDF.Line(x-0.6, y-1.5, x+0.6, y-1.5)
	d.PDF.Line(x-0.6, y+1.5, x+0.6, y+1.5)
}
