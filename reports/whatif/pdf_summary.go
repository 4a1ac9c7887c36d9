package whatif

import (
	"fmt"
	"math"

	"trimline/limits"
)

func (d *doc) summary() {
	r := d.r
	d.font("B", 20, colInk)
	d.y += 20 * ptMM
	d.text(marginL, d.y, "What-if re-judging")
	d.y += 4
	d.font("", 10, colInk)
	label := func(k, v string) {
		d.font("", 8, colMuted)
		d.y += 1
		d.text(marginL, d.y+3.2, k)
		d.font("", 10, colInk)
		old := d.y
		d.wrap(marginL+28, contentW-28, v)
		d.y = math.Max(d.y, old+4.5)
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
	d.y += 5

	// Yield boxes.
	const boxH = 34.0
	bw := (contentW - 6) / 2
	d.yieldBox(marginL, d.y, bw, boxH, "Yield before (as recorded)", r.Before, nil)
	delta := (r.After.Yield() - r.Before.Yield()) * 100
	d.yieldBox(marginL+bw+6, d.y, bw, boxH, "Yield after (new limit set)", r.After, &delta)
	d.y += boxH + 5

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
	d.font("B", 10, colInk)
	d.y += 4
	d.text(marginL, d.y, fmt.Sprintf("Verdict flips: %d", len(r.Flips)))
	d.font("", 9, colInk)
	d.y += 5
	d.text(marginL+4, d.y, fmt.Sprintf("pass → review/fail: %d     review/fail → pass: %d     review ↔ fail: %d", fromPass, toPass, other))
	d.y += 2
}

func (d *doc) yieldBox(x, y, w, h float64, title string, c limits.VerdictCounts, delta *float64) {
	d.fill(colZebra)
	d.draw(colRule)
	d.pdf.SetLineWidth(0.3)
	d.pdf.Rect(x, y, w, h, "FD")
	d.font("", 8.5, colMuted)
	d.text(x+4, y+6, title)
	d.font("B", 28, colInk)
	big := pct(c.Yield())
	if c.Total() == 0 {
		big = "—"
	}
	d.text(x+4, y+19, big)
	if delta != nil && c.Total() > 0 {
		col := colMuted
		switch {
		case *delta < -0.005:
			col = colFail
		case *delta > 0.005:
			col = colPass
		}
		d.font("B", 10, col)
		d.textR(x+w-4, y+19, signed(*delta)+" points")
	}
	d.font("", 8.5, colInk)
	s := fmt.Sprintf("%d pass · %d review · %d fail", c.Pass, c.Review, c.Fail)
	if c.Other > 0 {
		s += fmt.Sprintf(" · %d other", c.Other)
	}
	s += fmt.Sprintf("  (of %d)", c.Total())
	d.text(x+4, y+27, s)
}
