package whatif

import (
	"fmt"
	"strings"

	"trimline/limits"
	"trimline/reports/internal/pdfdoc"
)

func (d *doc) flips() {
	fs := d.r.Flips
	d.heading(fmt.Sprintf("Units whose verdict flips (%d)", len(fs)))
	if len(fs) == 0 {
		d.font("", 9, pdfdoc.Muted)
		d.Y += 4
		d.PDF.Text(marginL, d.Y, "No unit changes verdict under the new set.")
		return
	}
	cols := []struct {
		title string
		w     float64
	}{{"Serial", 30}, {"Run", 30}, {"Finished (UTC)", 30}, {"Old → new", 28}, {"Limits involved", contentW - 118}}
	const rowH = 4.6
	header := func() {
		d.Stripe(d.Y, rowH+0.6, pdfdoc.HeadFill)
		d.font("B", 7.5, pdfdoc.Ink)
		x := marginL + 1
		for _, c := range cols {
			d.PDF.Text(x, d.Y+rowH*0.72, c.title)
			x += c.w
		}
		d.Y += rowH + 0.6
	}
	header()
	for i, f := range fs {
		if i == MaxFlipRows {
			d.need(rowH + 2)
			d.font("", 8, pdfdoc.Muted)
			d.Y += rowH
			d.PDF.Text(marginL+1, d.Y, fmt.Sprintf("… and %d more", len(fs)-MaxFlipRows))
			break
		}
		if d.need(rowH) {
			header()
		}
		if i%2 == 1 {
			d.Stripe(d.Y, rowH, pdfdoc.Zebra)
		}
		base := d.Y + rowH*0.72
		x := marginL + 1
		d.Use(pdfdoc.Style{Family: pdfdoc.Mono, Size: 7.5, Color: pdfdoc.Ink})
		d.PDF.Text(x, base, d.Fit(f.Serial, cols[0].w-2))
		x += cols[0].w
		d.PDF.Text(x, base, d.Fit(orDash(f.RunID), cols[1].w-2))
		x += cols[1].w
		d.font("", 7.5, pdfdoc.Ink)
		when := "—"
		if !f.Finished.IsZero() {
			when = f.Finished.UTC().Format("2006-01-02 15:04:05")
		}
		d.PDF.Text(x, base, when)
		x += cols[2].w
		d.font("", 7.5, verdictColor(f.Old))
		d.PDF.Text(x, base, f.Old)
		ow := d.PDF.GetStringWidth(f.Old + " ")
		d.font("", 7.5, pdfdoc.Muted)
		d.PDF.Text(x+ow, base, "→")
		aw := d.PDF.GetStringWidth("→ ")
		d.font("B", 7.5, verdictColor(f.New))
		d.PDF.Text(x+ow+aw, base, f.New)
		x += cols[3].w
		d.font("", 7.5, pdfdoc.Ink)
		d.PDF.Text(x, base, d.Fit(strings.Join(f.Limits, "; "), cols[4].w-2))
		d.Y += rowH
	}
}

func verdictColor(v string) pdfdoc.Color {
	switch v {
	case limits.VerdictPass:
		return pdfdoc.Pass
	case limits.VerdictFail:
		return pdfdoc.Fail
	case limits.VerdictReview:
		return pdfdoc.Review
	}
	return pdfdoc.Ink
}
