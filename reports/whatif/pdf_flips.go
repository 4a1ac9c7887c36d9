package whatif

import (
	"fmt"
	"strings"

	"trimline/limits"
)

func (d *doc) flips() {
	fs := d.r.Flips
	d.heading(fmt.Sprintf("Units whose verdict flips (%d)", len(fs)))
	if len(fs) == 0 {
		d.font("", 9, colMuted)
		d.y += 4
		d.text(marginL, d.y, "No unit changes verdict under the new set.")
		return
	}
	cols := []struct {
		title string
		w     float64
	}{{"Serial", 30}, {"Run", 30}, {"Finished (UTC)", 30}, {"Old → new", 28}, {"Limits involved", contentW - 118}}
	const rowH = 4.6
	header := func() {
		d.fill(colHead)
		d.pdf.Rect(marginL, d.y, contentW, rowH+0.6, "F")
		d.font("B", 7.5, colInk)
		x := marginL + 1
		for _, c := range cols {
			d.text(x, d.y+rowH*0.72, c.title)
			x += c.w
		}
		d.y += rowH + 0.6
	}
	header()
	for i, f := range fs {
		if i == MaxFlipRows {
			d.ensure(rowH + 2)
			d.font("", 8, colMuted)
			d.y += rowH
			d.text(marginL+1, d.y, fmt.Sprintf("… and %d more", len(fs)-MaxFlipRows))
			break
		}
		if d.ensure(rowH) {
			header()
		}
		if i%2 == 1 {
			d.fill(colZebra)
			d.pdf.Rect(marginL, d.y, contentW, rowH, "F")
		}
		base := d.y + rowH*0.72
		x := marginL + 1
		d.pdf.SetFont(mono, "", 7.5)
		d.pdf.SetTextColor(colInk.r, colInk.g, colInk.b)
		d.text(x, base, d.fit(f.Serial, cols[0].w-2))
		x += cols[0].w
		d.text(x, base, d.fit(orDash(f.RunID), cols[1].w-2))
		x += cols[1].w
		d.font("", 7.5, colInk)
		when := "—"
		if !f.Finished.IsZero() {
			when = f.Finished.UTC().Format("2006-01-02 15:04:05")
		}
		d.text(x, base, when)
		x += cols[2].w
		d.font("", 7.5, verdictColor(f.Old))
		d.text(x, base, f.Old)
		ow := d.pdf.GetStringWidth(f.Old + " ")
		d.font("", 7.5, colMuted)
		d.text(x+ow, base, "→")
		aw := d.pdf.GetStringWidth("→ ")
		d.font("B", 7.5, verdictColor(f.New))
		d.text(x+ow+aw, base, f.New)
		x += cols[3].w
		d.font("", 7.5, colInk)
		d.text(x, base, d.fit(strings.Join(f.Limits, "; "), cols[4].w-2))
		d.y += rowH
	}
}

func verdictColor(v string) rgb {
	switch v {
	case limits.VerdictPass:
		return colPass
	case limits.VerdictFail:
		return colFail
	case limits.VerdictReview:
		return colReview
	}
	return colInk
}
