package whatif

import (
	"fmt"
	"math"
)

func (d *doc) pareto() {
	d.heading("Failures per limit under the new set")
	if len(d.r.Pareto) == 0 {
		d.font("", 9, colMuted)
		d.y += 4
		d.text(marginL, d.y, "The new set has no limits.")
		d.y += 2
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
		d.font("", 7.5, colMuted)
		d.y += 3.5
		d.fill(colFail)
		d.pdf.Rect(barX, d.y-2.3, 3, 2.5, "F")
		d.text(barX+4, d.y, "fail")
		d.fill(colReview)
		d.pdf.Rect(barX+14, d.y-2.3, 3, 2.5, "F")
		d.text(barX+18, d.y, "review")
		d.textR(marginL+contentW, d.y, "fail / review units")
		d.y += 1.5
	}
	legend()
	for i, c := range d.r.Pareto {
		if d.ensure(rowH) {
			legend()
		}
		if i%2 == 1 {
			d.fill(colZebra)
			d.pdf.Rect(marginL, d.y, contentW, rowH, "F")
		}
		base := d.y + rowH*0.7
		d.font("", 8, colInk)
		name := c.Limit
		if c.Result != "" {
			name += "  (" + c.Result + ")"
		}
		d.text(marginL+1, base, d.fit(name, labelW-1))
		scale := barW / float64(most)
		wf, wr := float64(c.Fail)*scale, float64(c.Review)*scale
		if wf > 0 {
			d.fill(colFail)
			d.pdf.Rect(barX, d.y+1, math.Max(wf, 0.4), rowH-2, "F")
		}
		if wr > 0 {
			d.fill(colReview)
			d.pdf.Rect(barX+wf, d.y+1, math.Max(wr, 0.4), rowH-2, "F")
		}
		d.font("", 8, colInk)
		if c.Fail == 0 && c.Review == 0 {
			d.font("", 8, colMuted)
		}
		d.textR(marginL+contentW, base, fmt.Sprintf("%d / %d", c.Fail, c.Review))
		d.y += rowH
	}
	d.y += 2
}
