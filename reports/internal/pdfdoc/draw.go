package pdfdoc

import (
	"strings"

	"github.com/jung-kurt/gofpdf"
)

// A4 portrait page size in millimetres, and millimetres per typographic point.
const (
	PageW = 210.0
	PageH = 297.0
	PtMM  = 25.4 / 72
)

// Color is an RGB colour, each component 0–255.
type Color struct{ R, G, B int }

// The colours both documents use: ink and muted text, rules and grid lines, the
// fill of table headers, zebra rows and bands, and the verdict colours.
var (
	Ink      = Color{28, 30, 36}
	Muted    = Color{95, 101, 111}
	Rule     = Color{188, 193, 200}
	Grid     = Color{226, 229, 233}
	HeadFill = Color{231, 235, 240}
	Zebra    = Color{246, 247, 249}
	BandFill = Color{241, 244, 248}
	White    = Color{255, 255, 255}
	Pass     = Color{22, 126, 60}
	Fail     = Color{190, 28, 40}
	Review   = Color{204, 128, 0}
)

// Style is a font (family, weight "" or "B", size in points) and a colour.
type Style struct {
	Family string
	Weight string
	Size   float64
	Color  Color
}

// With is s in colour c.
func (s Style) With(c Color) Style { s.Color = c; return s }

// Sized is s at size pt points.
func (s Style) Sized(pt float64) Style { s.Size = pt; return s }

// LineH is the line pitch of text in s, in millimetres.
func (s Style) LineH() float64 { return s.Size * PtMM * 1.28 }

// The text styles of tables (Table) and of the body text around them.
var (
	Body      = Style{Sans, "", 8, Ink}     // table cells, body text
	Bold      = Style{Sans, "B", 8, Ink}    // emphasis; group titles over table columns
	Small     = Style{Sans, "", 6.8, Muted} // notes, sub-lines of a cell, "none recorded"
	Head      = Style{Sans, "B", 7, Muted}  // column titles
	BandTitle = Style{Sans, "B", 7.6, Ink}  // band rows inside a table
)

// Doc is a document being drawn top to bottom: the gofpdf document, the content
// column of its pages and a cursor Y. Its methods draw in a fixed order of gofpdf
// calls, so the same calls give the same bytes. A Doc is used by one goroutine.
type Doc struct {
	PDF   *gofpdf.Fpdf
	Left  float64 // left edge of the content column, mm
	Width float64 // width of the content column, mm
	Y     float64 // top of the free space on the current page, mm

	// Need makes sure h mm are free below Y, starting a new page (and setting Y)
	// when they are not, and reports whether it started one. Table calls it
	// before each row; it is the document's own page-break policy.
	Need func(h float64) bool
}

// Fill sets the fill colour.
func (d *Doc) Fill(c Color) { d.PDF.SetFillColor(c.R, c.G, c.B) }

// Stroke sets the colour of lines and outlines.
func (d *Doc) Stroke(c Color) { d.PDF.SetDrawColor(c.R, c.G, c.B) }

// Use sets the font and the text colour of st.
func (d *Doc) Use(st Style) {
	d.PDF.SetFont(st.Family, st.Weight, st.Size)
	d.PDF.SetTextColor(st.Color.R, st.Color.G, st.Color.B)
}

// Cell writes s in style st in the box (x, y, w, h), aligned per align ("L", "C",
// "R") and vertically centred.
func (d *Doc) Cell(x, y, w, h float64, s string, st Style, align string) {
	d.Use(st)
	d.PDF.SetXY(x, y)
	d.PDF.CellFormat(w, h, s, "", 0, align+"M", false, 0, "")
}

// TextRight writes s in the current font with its baseline at y, ending at x.
func (d *Doc) TextRight(x, y float64, s string) { d.PDF.Text(x-d.PDF.GetStringWidth(s), y, s) }

// TextCentre writes s in the current font with its baseline at y, centred on x.
func (d *Doc) TextCentre(x, y float64, s string) { d.PDF.Text(x-d.PDF.GetStringWidth(s)/2, y, s) }

// Rotated runs draw with the page turned 90° counter-clockwise about (cx, cy):
// the titles of vertical axes.
func (d *Doc) Rotated(cx, cy float64, draw func()) {
	d.PDF.TransformBegin()
	d.PDF.TransformRotate(90, cx, cy)
	draw()
	d.PDF.TransformEnd()
}

// TextWidth is the width of s in style st, mm.
func (d *Doc) TextWidth(s string, st Style) float64 {
	d.Use(st)
	return d.PDF.GetStringWidth(s)
}

// Fit shortens s with "…" until it is at most w mm wide in the current font.
func (d *Doc) Fit(s string, w float64) string {
	if d.PDF.GetStringWidth(s) <= w {
		return s
	}
	rs := []rune(s)
	for len(rs) > 0 && d.PDF.GetStringWidth(string(rs)+"…") > w {
		rs = rs[:len(rs)-1]
	}
	return string(rs) + "…"
}

// Wrap breaks s into lines no wider than w in style st: at spaces where it can,
// inside a word (long hashes, addresses) where it must. Explicit newlines are kept.
func (d *Doc) Wrap(s string, w float64, st Style) []string {
	d.Use(st)
	var out []string
	for _, para := range strings.Split(s, "\n") {
		words := strings.Fields(para)
		if len(words) == 0 {
			out = append(out, "")
			continue
		}
		line := ""
		for _, word := range words {
			cand := word
			if line != "" {
				cand = line + " " + word
			}
			if d.PDF.GetStringWidth(cand) <= w {
				line = cand
				continue
			}
			if line != "" {
				out = append(out, line)
				line = ""
			}
			// The word alone may still be too wide: break it by characters,
			// after a separator (/ ? & : . = ,) when one is in the second half.
			for d.PDF.GetStringWidth(word) > w {
				rs := []rune(word)
				n := 1
				for n < len(rs) && d.PDF.GetStringWidth(string(rs[:n+1])) <= w {
					n++
				}
			seps:
				for _, set := range []string{"?&", "/", ":.=,"} {
					for k := n - 1; k >= n/2 && k > 0; k-- {
						if strings.ContainsRune(set, rs[k-1]) {
							n = k
							break seps
						}
					}
				}
				out = append(out, string(rs[:n]))
				word = string(rs[n:])
			}
			line = word
		}
		out = append(out, line)
	}
	return out
}

// FillRect fills the rectangle (x, y, w, h) with c.
func (d *Doc) FillRect(x, y, w, h float64, c Color) {
	d.Fill(c)
	d.PDF.Rect(x, y, w, h, "F")
}

// Stripe fills a band of height h at y across the content column: a table
// header, a zebra row, a tinted paragraph.
func (d *Doc) Stripe(y, h float64, c Color) { d.FillRect(d.Left, y, d.Width, h, c) }

// Frame outlines the rectangle (x, y, w, h) in c with lines lw mm wide.
func (d *Doc) Frame(x, y, w, h float64, c Color, lw float64) {
	d.Stroke(c)
	d.PDF.SetLineWidth(lw)
	d.PDF.Rect(x, y, w, h, "D")
}

// Box fills the rectangle (x, y, w, h) with fill and outlines it in edge with
// lines lw mm wide.
func (d *Doc) Box(x, y, w, h float64, fill, edge Color, lw float64) {
	d.Fill(fill)
	d.Stroke(edge)
	d.PDF.SetLineWidth(lw)
	d.PDF.Rect(x, y, w, h, "FD")
}

// HLine draws a horizontal line from (x, y) w mm long in c, lw mm wide.
func (d *Doc) HLine(x, y, w float64, c Color, lw float64) {
	d.Stroke(c)
	d.PDF.SetLineWidth(lw)
	d.PDF.Line(x, y, x+w, y)
}

// Rule draws a horizontal line at y across the content column.
func (d *Doc) Rule(y float64, c Color, lw float64) { d.HLine(d.Left, y, d.Width, c, lw) }
