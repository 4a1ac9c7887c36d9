package whatif

import (
	"fmt"
	"time"

	"github.com/jung-kurt/gofpdf"

	"trimline/limits"
	"trimline/reports/internal/pdfdoc"
)

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
	r   limits.WhatIfReport
	gen time.Time
	y   float64
}

func (d *doc) font(weight string, size float64, c rgb) {
	d.pdf.SetFont(sans, weight, size)
	d.pdf.SetTextColor(c.r, c.g, c.b)
}

func (d *doc) fill(c rgb) { d.pdf.SetFillColor(c.r, c.g, c.b) }

func (d *doc) draw(c rgb) { d.pdf.SetDrawColor(c.r, c.g, c.b) }

func (d *doc) newPage() { d.pdf.AddPage(); d.y = marginT }

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
