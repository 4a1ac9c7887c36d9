package whatif

import (
	"fmt"
	"math"

	"trimline/limits"
	"trimline/reports/internal/pdfdoc"
)

func (d *doc) summary() {
	r := d.r
	d.font("B", 20, pdfdoc.Ink)
	d.Y += 20 * pdfdoc.PtMM
	d.PDF.Text(marginL, d.Y, "What-if re-judging")
	d.Y += 4
	d.font("", 10, pdfdoc.Ink)
	label := func(k, v string) {
		d.font("", 8, pdfdoc.Muted)
		d.Y += 1
		d.PDF.Text(marginL, d.Y+3.2, k)
		d.font("", 10, pdfdoc.Ink)
		old := d.Y
		d.lines(marginL+28, contentW-28, v)
		d.Y = math.Max(d.Y, old+4.5)
	}
	label("Old limit set", orDash(r.Old))
	label("→ New limit set", orDash(r.New))
	label("Generated", d.gen.Format("2006-01-02 15:04 UTC"))
	units := fmt.Sprintf("%d re-judged", r.Units)
	if r.Skipped > 0 {
		units += fmt.Sprintf(", %d of another product skipped", r.Skipped)
	} else {
		units += ", none skipped"
	}
	label("Units", units)
	d.Y += 5

	// Yield boxes.
	const boxH = 34.0
	bw := (contentW - 6) / 2
	d.yieldBox(marginL, d.Y, bw, boxH, "Yield before (as recorded)", r.Before, nil)
	delta := (r.After.Yield() - r.Before.Yield()) * 100
	d.yieldBox(marginL+bw+6, d.Y, bw, boxH, "Yield after (new limit set)", r.After, &delta)
	d.Y += boxH + 5

	// Flip counts.
	var fromPass, toPass, other int
	for _, f := range r.Flips {
		switch {
		case f.Old == limits.VerdictPass:
			fromPass++
		case f.New == limits.VerdictPass:
			toPass++
		default:
			other++
		}
	}
	d.font("B", 10, pdfdoc.Ink)
	d.Y += 4
	d.PDF.Text(marginL, d.Y, fmt.Sprintf("Verdict flips: %d", len(r.Flips)))
	d.font("", 9, pdfdoc.Ink)
	d.Y += 5
	d.PDF.Text(marginL+4, d.Y, fmt.Sprintf("pass → review/fail: %d     review/fail → pass: %d     review ↔ fail: %d", fromPass, toPass, other))
	d.Y += 2
}

func (d *doc) yieldBox(x, y, w, h float64, title string, c VerdictCounts, delta *float64) {
	d.Box(x, y, w, h, pdfdoc.Zebra, pdfdoc.Rule, 0.3)
	d.font("", 8.5, pdfdoc.Muted)
	d.PDF.Text(x+4, y+6, title)
	d.font("B", 28, pdfdoc.Ink)
	big := pct(c.Yield())
	if c.Total() == 0 {
		big = "—"
	}
	d.PDF.Text(x+4, y+19, big)
	if delta != nil && c.Total() > 0 {
		col := pdfdoc.Muted
		switch {
		case *delta < -0.005:
			col = pdfdoc.Fail
		case *delta > 0.005:
			col = pdfdoc.Pass
		}
		d.font("B", 10, col)
		d.TextRight(x+w-4, y+19, signed(*delta)+" points")
	}
	d.font("", 8.5, pdfdoc.Ink)
	s := fmt.Sprintf("%d pass · %d review · %d fail", c.Pass, c.Review, c.Fail)
	if c.Other > 0 {
		s += fmt.Sprintf(" · %d other", c.Other)
	}
	s += fmt.Sprintf("  (of %d)", c.Total())
	d.PDF.Text(x+4, y+27, s)
}
