package whatif

import (
	"math/rand/v2"
	"testing"
	"time"

	"trimline/reports/internal/pdfdoc"
)

// The bound labels above a histogram never overlap and stay on the page,
// however close the bounds: measured as drawn (the text's width in the
// report's font, placeLabels, labelBoxes). The first case is the one that
// overlapped before: old ±300 µV and new −200/+150 µV on a plot spanning
// 12.5 mV, four labels within 10 mm.
func TestBoundLabelsNeverOverlap(t *testing.T) {
	pdf := pdfdoc.New(time.Unix(0, 0), marginL, marginT, marginR)
	pdf.AddPage()
	d := &doc{Doc: pdfdoc.Doc{PDF: pdf, Left: marginL, Width: contentW}}
	d.font("", labelPt, pdfdoc.Ink)
	const px, pw, py = marginL + 12, contentW - 14, 60.0
	mk := func(e edge, x float64) boundLabel {
		s := e.label() + " µV"
		return boundLabel{text: s, at: x, w: d.PDF.GetStringWidth(s), new: e.which != "old"}
	}
	xOf := func(v float64) float64 { return px + (v+12400)/(12550)*pw } // the reproduced plot's axis
	cases := [][]boundLabel{{
		mk(edge{which: "new", v: -200}, xOf(-200)), mk(edge{which: "new", upper: true, v: 150}, xOf(150)),
		mk(edge{which: "old", v: -300}, xOf(-300)), mk(edge{which: "old", upper: true, v: 300}, xOf(300)),
	}}
	rng := rand.New(rand.NewPCG(18, 2))
	kinds := []string{"old", "new", "old = new"}
	for range 500 {
		var ls []boundLabel
		centre := px + rng.Float64()*pw
		for range 1 + rng.IntN(12) {
			v := -99999 + rng.Float64()*2e5
			ls = append(ls, mk(edge{which: kinds[rng.IntN(3)], upper: rng.IntN(2) == 0, v: v}, centre+rng.NormFloat64()*8))
		}
		cases = append(cases, ls)
	}
	for n, ls := range cases {
		placed, rows := placeLabels(ls, marginL, marginL+contentW)
		boxes := labelBoxes(ls, placed, py)
		for i, a := range boxes {
			if a.x0 < marginL-1e-9 || a.x1 > marginL+contentW+1e-9 {
				t.Errorf("case %d: label %q at %.1f–%.1f mm leaves the page's column", n, ls[i].text, a.x0, a.x1)
			}
			if placed[i].row < 0 || placed[i].row >= rows {
				t.Errorf("case %d: label %q in row %d of %d", n, ls[i].text, placed[i].row, rows)
			}
			for j := i + 1; j < len(boxes); j++ {
				b := boxes[j]
				if a.x0 < b.x1 && b.x0 < a.x1 && a.y0 < b.y1 && b.y0 < a.y1 {
					t.Errorf("case %d: labels %q and %q overlap: %+v, %+v", n, ls[i].text, ls[j].text, a, b)
				}
			}
		}
	}
	// Far apart, a label is centred on its line.
	ls := []boundLabel{mk(edge{which: "new", v: -800}, 60), mk(edge{which: "new", upper: true, v: 800}, 150)}
	placed, rows := placeLabels(ls, marginL, marginL+contentW)
	if rows != 1 || placed[0].x0+ls[0].w/2 != 60 || placed[1].x0+ls[1].w/2 != 150 {
		t.Errorf("labels far apart moved: %+v, %d rows", placed, rows)
	}
}
