package certificate

import (
	"fmt"

	"trimline/reports/internal/pdfdoc"
	"trimline/sequencer"
)

// build lays out every section in order. Page 1 holds what a reader of the
// certificate needs (identification, conditions, verdict, the steps not done,
// results as found and as left with their uncertainty, the decision rule,
// traceability, codes, files); the measurement detail follows on the same page
// when it fits, else on the next.
func (d *doc) build() {
	d.newPage()
	d.sealH = d.sealHeight()
	d.header()
	d.identification()
	d.reasons()
	d.reviewDecision()
	d.steps()
	d.results()
	d.maximumNote()
	d.trimEffects()
	d.decisionRule()
	d.instrumentsUsed()
	d.trims()
	d.coefficients()
	d.retrims()
	d.soaks()
	d.zeros()
	d.filesInForce()
	d.detail()
	d.seal()
	d.footers() // ends on the last page, which gofpdf needs: it writes pages up to the current one
}

// certified reports whether the run was measured completely, so that the document
// is a certificate: PASS, FAIL and REVIEW. FAULT and ABORTED runs are records only.
func (d *doc) certified() bool {
	switch d.rec.Verdict {
	case sequencer.Pass, sequencer.Fail, sequencer.Review:
		return true
	}
	return false
}

// footers writes the caution and the page number on every page, once the page
// count is known.
func (d *doc) footers() {
	n := d.PDF.PageCount()
	caution := "The results on this certificate relate only to the unit identified by its serial number, " +
		"measured with the instruments and files listed, under the conditions at the time of the test. " +
		"This certificate shall not be reproduced except in full."
	for p := 1; p <= n; p++ {
		d.PDF.SetPage(p)
		d.simulatedPage()
		y := pdfdoc.PageH - 21
		d.Rule(y, pdfdoc.Rule, 0.3)
		ly := y + 1.8
		for _, l := range d.Wrap(caution, contentW-32, pdfdoc.Small) {
			d.Cell(marginL, ly, contentW-32, pdfdoc.Small.LineH(), l, pdfdoc.Small, "L")
			ly += pdfdoc.Small.LineH()
		}
		left := "Certificate " + dash(d.opt.Number) + " · serial " + dash(d.rec.Serial)
		if d.opt.VerificationCode != "" {
			left += " · verification code " + d.opt.VerificationCode
		} else if !d.sealed() {
			left += " · unsigned"
		}
		d.Cell(marginL, ly+0.6, contentW-32, pdfdoc.Small.LineH(), left, pdfdoc.Small.With(pdfdoc.Ink), "L")
		d.Cell(marginL+contentW-30, y+1.8, 30, 4, fmt.Sprintf("Page %d of %d", p, n), pdfdoc.Bold.Sized(8), "R")
	}
}
