package certificate

import (
	"strings"

	"trimline/reports/internal/pdfdoc"
	"trimline/sequencer"
)

// Page geometry in millimetres (A4 portrait).
const (
	marginL  = 15.0
	marginR  = 15.0
	marginT  = 14.0
	contentW = pdfdoc.PageW - marginL - marginR
	bottom   = pdfdoc.PageH - 23.5 // lowest y the body may reach; the footer is below
)

// The certificate's own colours; the shared ones (ink, rules, verdicts, table
// fills) are pdfdoc's.
var (
	colFault    = pdfdoc.Color{R: 194, G: 104, B: 0}
	colAborted  = pdfdoc.Color{R: 98, G: 104, B: 112}
	colReasonBg = pdfdoc.Color{R: 252, G: 237, B: 237}
	colReviewBg = pdfdoc.Color{R: 250, G: 242, B: 226} // tint behind the reasons of a REVIEW
	colCondPass = pdfdoc.Color{R: 180, G: 110, B: 0}   // zone "conditional pass": amber, dark enough for text
	colCondFail = pdfdoc.Color{R: 214, G: 78, B: 24}   // zone "conditional fail": orange-red
	colPre      = pdfdoc.Color{R: 212, G: 94, B: 18}
	colPost     = pdfdoc.Color{R: 26, G: 86, B: 172}
)

// The certificate's own text styles; body, bold, small and table styles are
// pdfdoc's.
var (
	stLabel     = pdfdoc.Style{Family: pdfdoc.Sans, Size: 7.5, Color: pdfdoc.Muted}
	stMono      = pdfdoc.Style{Family: pdfdoc.Mono, Size: 7, Color: pdfdoc.Ink}
	stMonoSmall = pdfdoc.Style{Family: pdfdoc.Mono, Size: 6, Color: pdfdoc.Ink}
)

// doc is the certificate being laid out: the shared drawing (pdfdoc.Doc, whose Y
// is the top of the free space on the current page) and what it is made from.
type doc struct {
	pdfdoc.Doc
	rec *sequencer.Record
	opt Options
	// sealH is the height the seal block takes at the foot of page 1.
	sealH float64
	// sim is what the record says of simulation (sequencer.SimulationOf):
	// nil for a run on real instruments.
	sim *sequencer.Simulation
}

// bottom is the lowest y the body may reach on the current page: above the
// footer, and on page 1 above the seal block too.
func (d *doc) bottom() float64 {
	if d.PDF.PageNo() == 1 && d.sealH > 0 {
		return bottom - d.sealH - sealGap
	}
	return bottom
}

// need makes sure h millimetres are free below d.Y, starting a new page when not.
// It reports whether a page was started.
func (d *doc) need(h float64) bool {
	if d.Y+h <= d.bottom() {
		return false
	}
	d.newPage()
	return true
}

// newPage starts a page. Pages after the first carry a one-line running header
// that names the certificate and the unit.
func (d *doc) newPage() {
	d.PDF.AddPage()
	d.Y = marginT
	if d.PDF.PageNo() == 1 {
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
	d.Cell(marginL, d.Y, contentW, 5, left, pdfdoc.Bold.Sized(8.5), "L")
	d.Cell(marginL, d.Y, contentW, 5, right, pdfdoc.Body.Sized(8.5), "R")
	d.Y += 6.5
	d.Rule(d.Y, pdfdoc.Rule, 0.3)
	d.Y += 4
}

// heading starts a section. follow is the height that must fit below the heading
// on the same page (its first rows), so that a heading is never left alone.
func (d *doc) heading(s string, follow float64) {
	const h = 6.6
	if d.Y > marginT+12 {
		d.Y += 2.4
	}
	d.need(h + follow)
	d.Cell(marginL, d.Y, contentW, 5, s, pdfdoc.Bold.Sized(10), "L")
	d.Y += 5.3
	d.Rule(d.Y, pdfdoc.Ink, 0.35)
	d.Y += h - 5.3
}

// c1 is a cell of one paragraph.
func c1(text string, st pdfdoc.Style) pdfdoc.Cell { return pdfdoc.Cell{{Text: text, St: st}} }

// tableSection starts a section titled title that is a table, the heading kept
// on one page with the table's start (keep).
func (d *doc) tableSection(title string, cols []pdfdoc.Column, rows []pdfdoc.Row, bands []pdfdoc.Band) {
	d.heading(title, keep(d.TableHeight(cols, rows, bands)))
	d.Table(cols, rows, bands)
}

// keep is the height a heading asks to keep with it: a small table whole, the
// start of a long one.
func keep(h float64) float64 { return min(h, 60) }

// headingH is the height heading takes below d.Y on a page already in use.
const headingH = 2.4 + 6.6

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
	st := pdfdoc.Body.Sized(7.6)
	lh := st.LineH() + 0.3
	for _, f := range fs {
		lines := d.Wrap(f.text, contentW-labelW, st)
		// A paragraph of up to four lines is kept whole, so that no page
		// starts with its last word alone; a longer one starts with two.
		if len(lines) <= 4 {
			d.need(lh * float64(len(lines)))
		} else {
			d.need(lh * 2)
		}
		d.Cell(marginL, d.Y+0.4, labelW, lh, f.label, stLabel, "L")
		for i, l := range lines {
			if i > 0 && d.need(lh) {
				d.Cell(marginL, d.Y+0.4, labelW, lh, d.continued(f.label, labelW-1), stLabel, "L")
			}
			d.Cell(marginL+labelW, d.Y+0.4, contentW-labelW, lh, l, st, "L")
			d.Y += lh
		}
		d.Y += 1
	}
}

// continued is a label repeated where its paragraph goes on after a page
// break, as wide as w at most: "Station (continued)", or for a longer label
// "Traceability (cont.)", or the label alone, so that it never runs into the
// text beside it.
func (d *doc) continued(label string, w float64) string {
	for _, s := range []string{label + " (continued)", label + " (cont.)"} {
		if d.TextWidth(s, stLabel) <= w {
			return s
		}
	}
	return label
}

// note is a line of small print under a table.
func (d *doc) note(s string) {
	for _, l := range d.Wrap(s, contentW, pdfdoc.Small) {
		d.need(pdfdoc.Small.LineH() + 1)
		d.Cell(marginL, d.Y+0.8, contentW, pdfdoc.Small.LineH(), l, pdfdoc.Small, "L")
		d.Y += pdfdoc.Small.LineH() + 0.8
	}
}
