package whatif

import (
	"fmt"
	"math"

	"trimline/reports/internal/pdfdoc"
)

func (d *doc) pareto() {
	d.heading("Failures per limit under the new set")
	if len(d.r.Pareto) == 0 {
		d.font("", 9, pdfdoc.Muted)
		d.Y += 4
		d.PDF.Text(marginL, d.Y, "The new set has no limits.")
		d.Y += 2
		return
	}
	const (
		labelW = 66.0
		countW = 34.0
		rowH   = 5.2
	)
	barX := marginL + labelW + 2
	barW := contentW - labelW - countW - 4
	most := 1
	for _, c := range d.r.Pareto {
		most = max(most, c.Fail+c.Review)
	}
	legend := func() {
		d.font("", 7.5, pdfdoc.Muted)
		d.Y += 3.5
		d.FillRect(barX, d.Y-2.3, 3, 2.5, pdfdoc.Fail)
		d.PDF.Text(barX+4, d.Y, "fail")
		d.FillRect(barX+14, d.Y-2.3, 3, 2.5, pdfdoc.Review)
		d.PDF.Text(barX+18, d.Y, "review")
		d.TextRight(marginL+contentW, d.Y, "fail / review units")
		d.Y += 1.5
	}
	legend()
	for i, c := range d.r.Pareto {
		if d.need(rowH) {
			legend()
		}
		if i%2 == 1 {
			d.Stripe(d.Y, rowH, pdfdoc.Zebra)
		}
		base := d.Y + rowH*0.7
		d.font("", 8, pdfdoc.Ink)
		name := c.Limit
		if c.Result != "" {
			name += "  (" + c.Result + ")"
		}
		d.PDF.Text(marginL+1, base, d.Fit(name, labelW-1))
		scale := barW / float64(most)
		wf, wr := float64(c.Fail)*scale, float64(c.Review)*scale
		if wf > 0 {
			d.FillRect(barX, d.Y+1, math.Max(wf, 0.4), rowH-2, pdfdoc.Fail)
		}
		if wr > 0 {
			d.FillRect(barX+wf, d.Y+1, math.Max(wr, 0.4), rowH-2, pdfdoc.Review)
		}
		d.font("", 8, pdfdoc.Ink)
		if c.Fail == 0 && c.Review == 0 {
			d.font("", 8, pdfdoc.Muted)
		}
		d.TextRight(marginL+contentW, base, fmt.Sprintf("%d / %d", c.Fail, c.Review))
		d.Y += rowH
	}
	d.Y += 2
}
