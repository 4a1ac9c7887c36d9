package whatif

import (
	"fmt"
	"time"

	"trimline/reports/internal/pdfdoc"
)

// Page geometry in millimetres (A4 portrait).
const (
	marginL  = 15.0
	marginR  = 15.0
	marginT  = 15.0
	contentW = pdfdoc.PageW - marginL - marginR
	bottom   = pdfdoc.PageH - 18 // lowest y the body reaches; the footer is below
)

// The report's own colours; the shared ones (ink, rules, verdicts, table fills)
// are pdfdoc's.
var (
	colGrid   = pdfdoc.Color{R: 228, G: 231, B: 235} // histogram grid, lighter than the tables' pdfdoc.Grid
	colBar    = pdfdoc.Color{R: 120, G: 160, B: 210}
	colBarEdg = pdfdoc.Color{R: 70, G: 110, B: 170}
	colOld    = pdfdoc.Color{R: 120, G: 120, B: 120}
	colNew    = pdfdoc.Color{R: 210, G: 30, B: 30}
)

// doc is the report being drawn: the shared drawing (pdfdoc.Doc, whose Y is the
// top of the free space on the current page) and what it is made from.
type doc struct {
	pdfdoc.Doc
	r   Report
	gen time.Time
}

// font sets the sans font in weight ("" or "B") at size points, in colour c.
func (d *doc) font(weight string, size float64, c pdfdoc.Color) {
	d.Use(pdfdoc.Style{Family: pdfdoc.Sans, Weight: weight, Size: size, Color: c})
}

// newPage starts a page.
func (d *doc) newPage() { d.PDF.AddPage(); d.Y = marginT }

// lineH is the line pitch of the current font, mm.
func (d *doc) lineH() float64 {
	_, sz := d.PDF.GetFontSize()
	return sz * 1.25
}

// need starts a new page unless h mm fit below Y, and reports whether it did.
func (d *doc) need(h float64) bool {
	if d.Y+h > bottom {
		d.newPage()
		return true
	}
	return false
}

// lines writes s in the current font as lines of at most w mm from (x, Y) and
// advances Y.
func (d *doc) lines(x, w float64, s string) {
	lh := d.lineH()
	for _, line := range d.PDF.SplitText(s, w) {
		d.Y += lh
		d.PDF.Text(x, d.Y-lh*0.25, line)
	}
}

// heading starts a section with a title over a rule.
func (d *doc) heading(s string) {
	d.need(20)
	d.Y += 4
	d.font("B", 12, pdfdoc.Ink)
	d.Y += 12 * pdfdoc.PtMM
	d.PDF.Text(marginL, d.Y, s)
	d.Y += 1.5
	d.Rule(d.Y, pdfdoc.Rule, 0.3)
	d.Y += 3
}

// footers writes the footer of every page, once the page count is known.
func (d *doc) footers() {
	n := d.PDF.PageCount()
	for p := 1; p <= n; p++ {
		d.PDF.SetPage(p)
		d.Rule(pdfdoc.PageH-13, pdfdoc.Rule, 0.2)
		d.font("", 7, pdfdoc.Muted)
		d.PDF.Text(marginL, pdfdoc.PageH-9, "What-if re-judging · "+d.Fit(orDash(d.r.New), 110)+" · generated "+d.gen.Format("2006-01-02 15:04 UTC"))
		d.TextRight(marginL+contentW, pdfdoc.PageH-9, fmt.Sprintf("page %d of %d", p, n))
	}
}
