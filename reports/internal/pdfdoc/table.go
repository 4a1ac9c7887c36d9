package pdfdoc

import "math"

// Span is one paragraph of a table cell in one style.
type Span struct {
	Text string
	St   Style
}

// Cell is one table cell: paragraphs stacked top to bottom, each wrapped to the
// column's width.
type Cell []Span

// Row is one table row, a cell per column.
type Row = []Cell

// Column is a table column.
type Column struct {
	Title string
	W     float64 // width, mm
	Align string  // "L", "C" or "R"
	Gap   float64 // extra space at the left of the column, mm
	Sep   bool    // draw a vertical rule at the left of the column
}

// Group is a title over a run of N columns, in a row above the column titles.
type Group struct {
	Title string
	N     int
}

// Band is a title row across a whole table, drawn before row At: it labels the
// rows that follow, up to the next band.
type Band struct {
	At    int
	Title string
}

// Padding of a table cell, mm.
const (
	PadX = 1.4
	PadY = 0.8
)

// BandH is the height of a band row, mm.
func BandH() float64 { return BandTitle.LineH() + 2*PadY + 0.4 }

type laidLine struct {
	text string
	st   Style
}

// Table draws a table across the content column from Y: a header row (with a
// row of group titles above it when groups is not empty), then the rows, zebra
// striped, each as tall as its most wrapped cell. Before each row it calls Need;
// on a new page the header is repeated. A band is never the last row on a page:
// it moves to the next page with its first row; on a page that starts inside a
// band, the band's title is repeated under the header with "(continued)". A
// table without rows says "none recorded". Y ends below the table.
func (d *Doc) Table(cols []Column, rows []Row, bands []Band, groups ...Group) {
	seps := func(y, h float64) {
		x := d.Left
		for _, c := range cols {
			if c.Sep {
				d.Stroke(Rule)
				d.PDF.SetLineWidth(0.25)
				d.PDF.Line(x, y, x, y+h)
			}
			x += c.W
		}
	}
	header := func() {
		if len(groups) > 0 {
			h := Bold.LineH() + 2*PadY
			x, k := d.Left, 0
			for _, g := range groups {
				w := 0.0
				for ; k < len(cols) && g.N > 0; k, g.N = k+1, g.N-1 {
					w += cols[k].W
				}
				d.Cell(x+PadX+1, d.Y, w-2*PadX, h, g.Title, Bold, "L")
				x += w
			}
			seps(d.Y, h)
			d.Y += h
		}
		h := Head.LineH() + 2*PadY
		d.Stripe(d.Y, h, HeadFill)
		x := d.Left
		for _, c := range cols {
			d.Cell(x+PadX+c.Gap, d.Y, c.W-2*PadX-c.Gap, h, c.Title, Head, c.Align)
			x += c.W
		}
		seps(d.Y, h)
		d.Y += h
	}
	drawBand := func(title string) {
		h := BandH()
		d.Stripe(d.Y, h, BandFill)
		d.Cell(d.Left+PadX, d.Y+0.2, d.Width-2*PadX, h, title, BandTitle, "L")
		d.Y += h
		d.Rule(d.Y, Rule, 0.2)
	}
	header()
	current, zebra := "", 0
	for i, r := range rows {
		laid, h := d.layoutRow(cols, r)
		starts := ""
		for _, b := range bands {
			if b.At == i {
				starts = b.Title
			}
		}
		if starts != "" {
			if d.Need(BandH() + h) {
				header()
			}
			drawBand(starts)
			current, zebra = starts, 0
		} else if d.Need(h) {
			header()
			if current != "" {
				drawBand(current + " (continued)")
			}
		}
		if zebra%2 == 1 {
			d.Stripe(d.Y, h, Zebra)
		}
		x := d.Left
		for j, c := range cols {
			y := d.Y + PadY
			for _, l := range laid[j] {
				lh := l.st.LineH()
				d.Cell(x+PadX+c.Gap, y, c.W-2*PadX-c.Gap, lh, l.text, l.st, c.Align)
				y += lh
			}
			x += c.W
		}
		seps(d.Y, h)
		d.Y += h
		d.Rule(d.Y, Grid, 0.2)
		zebra++
	}
	if len(rows) == 0 {
		h := Body.LineH() + 2*PadY
		d.Need(h)
		d.Cell(d.Left+PadX, d.Y, d.Width-2*PadX, h, "none recorded", Small, "L")
		d.Y += h
	}
}

// layoutRow wraps the cells of r into lines and returns them with the row height.
func (d *Doc) layoutRow(cols []Column, r Row) ([][]laidLine, float64) {
	laid := make([][]laidLine, len(cols))
	h := 0.0
	for j, c := range cols {
		var lines []laidLine
		if j < len(r) {
			for _, sp := range r[j] {
				for _, l := range d.Wrap(sp.Text, c.W-2*PadX-c.Gap, sp.St) {
					lines = append(lines, laidLine{l, sp.St})
				}
			}
		}
		laid[j] = lines
		ch := 0.0
		for _, l := range lines {
			ch += l.st.LineH()
		}
		h = math.Max(h, ch)
	}
	return laid, h + 2*PadY
}

// TableHeight is the height Table(cols, rows, bands, groups...) takes on one
// page, mm.
func (d *Doc) TableHeight(cols []Column, rows []Row, bands []Band, groups ...Group) float64 {
	h := Head.LineH() + 2*PadY + float64(len(bands))*BandH()
	if len(groups) > 0 {
		h += Bold.LineH() + 2*PadY
	}
	if len(rows) == 0 {
		return h + Body.LineH() + 2*PadY
	}
	for _, r := range rows {
		_, rh := d.layoutRow(cols, r)
		h += rh
	}
	return h
}
