package certificate

import (
	"math"
	"strings"

	"github.com/jung-kurt/gofpdf"

	"trimline/sequencer"
)

// Page geometry in millimetres (A4 portrait).
const (
	pageW    = 210.0
	pageH    = 297.0
	marginL  = 15.0
	marginR  = 15.0
	marginT  = 14.0
	contentW = pageW - marginL - marginR
	bottom   = pageH - 23.5 // lowest y the body may reach; the footer is below
	ptMM     = 25.4 / 72    // millimetres per typographic point
)

type rgb struct{ r, g, b int }

var (
	colInk      = rgb{28, 30, 36}
	colMuted    = rgb{95, 101, 111}
	colRule     = rgb{188, 193, 200}
	colGrid     = rgb{226, 229, 233}
	colHeadFill = rgb{231, 235, 240}
	colZebra    = rgb{246, 247, 249}
	colWhite    = rgb{255, 255, 255}
	colPass     = rgb{22, 126, 60}
	colFail     = rgb{190, 28, 40}
	colFault    = rgb{194, 104, 0}
	colAborted  = rgb{98, 104, 112}
	colReasonBg = rgb{252, 237, 237}
	colReview   = rgb{204, 128, 0}   // REVIEW verdict box
	colReviewBg = rgb{250, 242, 226} // tint behind the reasons of a REVIEW
	colCondPass = rgb{180, 110, 0}   // zone "conditional pass": amber, dark enough for text
	colCondFail = rgb{214, 78, 24}   // zone "conditional fail": orange-red
	colBand     = rgb{241, 244, 248} // band rows inside a table
	colPre      = rgb{212, 94, 18}
	colPost     = rgb{26, 86, 172}
)

// style is a font and colour.
type style struct {
	family string
	weight string // "" or "B"
	size   float64
	color  rgb
}

var (
	stBody      = style{sans, "", 8, colInk}
	stBold      = style{sans, "B", 8, colInk}
	stSmall     = style{sans, "", 6.8, colMuted}
	stLabel     = style{sans, "", 7.5, colMuted}
	stHead      = style{sans, "B", 7, colMuted}
	stMono      = style{mono, "", 7, colInk}
	stMonoSmall = style{mono, "", 6, colInk}
)

func (s style) with(c rgb) style      { s.color = c; return s }
func (s style) sized(p float64) style { s.size = p; return s }

// lineH is the line pitch of text in style s.
func (s style) lineH() float64 { return s.size * ptMM * 1.28 }

// doc is the document being laid out. y is the top of the free space on the
// current page.
type doc struct {
	pdf *gofpdf.Fpdf
	rec *sequencer.Record
	opt Options
	y   float64
	// sealH is the height the seal block takes at the foot of page 1.
	sealH float64
}

func (d *doc) use(s style) {
	d.pdf.SetFont(s.family, s.weight, s.size)
	d.pdf.SetTextColor(s.color.r, s.color.g, s.color.b)
}

func (d *doc) fill(c rgb) { d.pdf.SetFillColor(c.r, c.g, c.b) }
func (d *doc) draw(c rgb) { d.pdf.SetDrawColor(c.r, c.g, c.b) }

// text writes s in style st in the box (x, y, w, h), aligned per align ("L", "C",
// "R"), vertically centred.
func (d *doc) text(x, y, w, h float64, s string, st style, align string) {
	d.use(st)
	d.pdf.SetXY(x, y)
	d.pdf.CellFormat(w, h, s, "", 0, align+"M", false, 0, "")
}

// width is the width of s in style st.
func (d *doc) width(s string, st style) float64 {
	d.use(st)
	return d.pdf.GetStringWidth(s)
}

// wrap breaks s into lines no wider than w in style st: at spaces where it can,
// inside a word (long hashes, addresses) where it must. Explicit newlines are kept.
func (d *doc) wrap(s string, w float64, st style) []string {
	d.use(st)
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
			if d.pdf.GetStringWidth(cand) <= w {
				line = cand
				continue
			}
			if line != "" {
				out = append(out, line)
				line = ""
			}
			// The word alone may still be too wide: break it by characters,
			// after a separator (/ ? & : . = ,) when one is in the second half.
			for d.pdf.GetStringWidth(word) > w {
				rs := []rune(word)
				n := 1
				for n < len(rs) && d.pdf.GetStringWidth(string(rs[:n+1])) <= w {
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

// bottom is the lowest y the body may reach on the current page: above the
// footer, and on page 1 above the seal block too.
func (d *doc) bottom() float64 {
	if d.pdf.PageNo() == 1 && d.sealH > 0 {
		return bottom - d.sealH - sealGap
	}
	return bottom
}

// need makes sure h millimetres are free below d.y, starting a new page when not.
// It reports whether a page was started.
func (d *doc) need(h float64) bool {
	if d.y+h <= d.bottom() {
		return false
	}
	d.newPage()
	return true
}

// newPage starts a page. Pages after the first carry a one-line running header
// that names the certificate and the unit.
func (d *doc) newPage() {
	d.pdf.AddPage()
	d.y = marginT
	if d.pdf.PageNo() == 1 {
		return
	}
	left := "Trim and calibration certificate"
	if d.opt.Maker != "" {
		left = d.opt.Maker + " · " + left
	}
	right := "Serial " + dash(d.rec.Serial)
	if d.opt.Number != "" {
		right = "No. " + d.opt.Number + " · " + right
	}
	d.text(marginL, d.y, contentW, 5, left, stBold.sized(8.5), "L")
	d.text(marginL, d.y, contentW, 5, right, stBody.sized(8.5), "R")
	d.y += 6.5
	d.rule(d.y, colRule, 0.3)
	d.y += 4
}

// rule draws a horizontal line across the content width.
func (d *doc) rule(y float64, c rgb, w float64) {
	d.draw(c)
	d.pdf.SetLineWidth(w)
	d.pdf.Line(marginL, y, marginL+contentW, y)
}

// heading starts a section. follow is the height that must fit below the heading
// on the same page (its first rows), so that a heading is never left alone.
func (d *doc) heading(s string, follow float64) {
	const h = 6.6
	if d.y > marginT+12 {
		d.y += 2.4
	}
	d.need(h + follow)
	d.text(marginL, d.y, contentW, 5, s, style{sans, "B", 10, colInk}, "L")
	d.y += 5.3
	d.rule(d.y, colInk, 0.35)
	d.y += h - 5.3
}

// span is one paragraph of a table cell in one style.
type span struct {
	text string
	st   style
}

// cell is one table cell: paragraphs stacked top to bottom.
type cell []span

func c1(text string, st style) cell { return cell{{text, st}} }

type column struct {
	title string
	w     float64
	align string  // "L", "C" or "R"
	gap   float64 // extra space at the left of the column
	sep   bool    // draw a vertical rule at the left of the column
}

// group is a title over a run of n columns, in a row above the column titles.
type group struct {
	title string
	n     int
}

const (
	padX = 1.4
	padY = 0.8
)

// band is a title row across a whole table, drawn before row at: it labels the
// rows that follow, up to the next band.
type band struct {
	at    int
	title string
}

// stBand is the style of a band title.
var stBand = style{sans, "B", 7.6, colInk}

// bandH is the height of a band row.
func bandH() float64 { return stBand.lineH() + 2*padY + 0.4 }

// table draws a table with a header row (and a row of group titles above it when
// groups is not empty). Rows that do not fit on the page move to the next one,
// which repeats the header.
func (d *doc) table(cols []column, rows []row, groups ...group) {
	d.bandTable(cols, rows, nil, groups...)
}

// bandTable is table with band rows. A band is never the last row on a page: it
// moves to the next page with its first row. On a page that starts inside a band,
// the band's title is repeated under the header with "(continued)".
func (d *doc) bandTable(cols []column, rows []row, bands []band, groups ...group) {
	seps := func(y, h float64) {
		x := marginL
		for _, c := range cols {
			if c.sep {
				d.draw(colRule)
				d.pdf.SetLineWidth(0.25)
				d.pdf.Line(x, y, x, y+h)
			}
			x += c.w
		}
	}
	header := func() {
		if len(groups) > 0 {
			h := stBold.lineH() + 2*padY
			x, k := marginL, 0
			for _, g := range groups {
				w := 0.0
				for ; k < len(cols) && g.n > 0; k, g.n = k+1, g.n-1 {
					w += cols[k].w
				}
				d.text(x+padX+1, d.y, w-2*padX, h, g.title, stBold, "L")
				x += w
			}
			seps(d.y, h)
			d.y += h
		}
		h := stHead.lineH() + 2*padY
		d.fill(colHeadFill)
		d.pdf.Rect(marginL, d.y, contentW, h, "F")
		x := marginL
		for _, c := range cols {
			d.text(x+padX+c.gap, d.y, c.w-2*padX-c.gap, h, c.title, stHead, c.align)
			x += c.w
		}
		seps(d.y, h)
		d.y += h
	}
	drawBand := func(title string) {
		h := bandH()
		d.fill(colBand)
		d.pdf.Rect(marginL, d.y, contentW, h, "F")
		d.text(marginL+padX, d.y+0.2, contentW-2*padX, h, title, stBand, "L")
		d.y += h
		d.draw(colRule)
		d.pdf.SetLineWidth(0.2)
		d.pdf.Line(marginL, d.y, marginL+contentW, d.y)
	}
	header()
	current, zebra := "", 0
	for i, r := range rows {
		laid, h := d.layoutRow(cols, r)
		starts := ""
		for _, b := range bands {
			if b.at == i {
				starts = b.title
			}
		}
		if starts != "" {
			if d.need(bandH() + h) {
				header()
			}
			drawBand(starts)
			current, zebra = starts, 0
		} else if d.need(h) {
			header()
			if current != "" {
				drawBand(current + " (continued)")
			}
		}
		if zebra%2 == 1 {
			d.fill(colZebra)
			d.pdf.Rect(marginL, d.y, contentW, h, "F")
		}
		x := marginL
		for j, c := range cols {
			y := d.y + padY
			for _, l := range laid[j] {
				lh := l.st.lineH()
				d.text(x+padX+c.gap, y, c.w-2*padX-c.gap, lh, l.text, l.st, c.align)
				y += lh
			}
			x += c.w
		}
		seps(d.y, h)
		d.y += h
		d.draw(colGrid)
		d.pdf.SetLineWidth(0.2)
		d.pdf.Line(marginL, d.y, marginL+contentW, d.y)
		zebra++
	}
	if len(rows) == 0 {
		h := stBody.lineH() + 2*padY
		d.need(h)
		d.text(marginL+padX, d.y, contentW-2*padX, h, "none recorded", stSmall, "L")
		d.y += h
	}
}

// layoutRow wraps the cells of r into lines and returns them with the row height.
func (d *doc) layoutRow(cols []column, r row) ([][]laidLine, float64) {
	laid := make([][]laidLine, len(cols))
	h := 0.0
	for j, c := range cols {
		var lines []laidLine
		if j < len(r) {
			for _, sp := range r[j] {
				for _, l := range d.wrap(sp.text, c.w-2*padX-c.gap, sp.st) {
					lines = append(lines, laidLine{l, sp.st})
				}
			}
		}
		laid[j] = lines
		ch := 0.0
		for _, l := range lines {
			ch += l.st.lineH()
		}
		h = math.Max(h, ch)
	}
	return laid, h + 2*padY
}

// tableHeight is the height table(cols, rows, groups...) takes on one page.
func (d *doc) tableHeight(cols []column, rows []row, groups ...group) float64 {
	return d.bandTableHeight(cols, rows, nil, groups...)
}

// bandTableHeight is the height bandTable takes on one page.
func (d *doc) bandTableHeight(cols []column, rows []row, bands []band, groups ...group) float64 {
	h := stHead.lineH() + 2*padY + float64(len(bands))*bandH()
	if len(groups) > 0 {
		h += stBold.lineH() + 2*padY
	}
	if len(rows) == 0 {
		return h + stBody.lineH() + 2*padY
	}
	for _, r := range rows {
		_, rh := d.layoutRow(cols, r)
		h += rh
	}
	return h
}

// keep is the height a heading asks to keep with it: a small table whole, the
// start of a long one.
func keep(h float64) float64 { return min(h, 60) }

// headingH is the height heading takes below d.y on a page already in use.
const headingH = 2.4 + 6.6

// row is one table row, a cell per column.
type row = []cell

type laidLine struct {
	text string
	st   style
}

// dash returns s, or an em dash when s is empty.
func dash(s string) string {
	if strings.TrimSpace(s) == "" {
		return "—"
	}
	return s
}

// para is one labelled paragraph of a definition block.
type para struct {
	label, text string
}

// fields writes labelled paragraphs: the label in a narrow column at the left, the
// text wrapped beside it. A paragraph may break across a page between its lines.
func (d *doc) fields(fs []para) {
	const labelW = 27.0
	st := stBody.sized(7.6)
	lh := st.lineH() + 0.3
	for _, f := range fs {
		lines := d.wrap(f.text, contentW-labelW, st)
		d.need(lh * float64(min(len(lines), 2)))
		d.text(marginL, d.y+0.4, labelW, lh, f.label, stLabel, "L")
		for i, l := range lines {
			if i > 0 && d.need(lh) {
				d.text(marginL, d.y+0.4, labelW, lh, f.label+" (continued)", stLabel, "L")
			}
			d.text(marginL+labelW, d.y+0.4, contentW-labelW, lh, l, st, "L")
			d.y += lh
		}
		d.y += 1
	}
}

// note is a line of small print under a table.
func (d *doc) note(s string) {
	for _, l := range d.wrap(s, contentW, stSmall) {
		d.need(stSmall.lineH() + 1)
		d.text(marginL, d.y+0.8, contentW, stSmall.lineH(), l, stSmall, "L")
		d.y += stSmall.lineH() + 0.8
	}
}
