package whatif

import (
	"math"
	"math/rand/v2"
	"regexp"
	"slices"
	"strings"
	"testing"
	"time"

	"trimline/limits"
	"trimline/reports/internal/pdfdoc"
	"trimline/sequencer/spc"
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

// The histogram's band is the bounds of both sets plus a quarter of their
// span on each side; a side without a bound reaches to the 1st or 99th
// percentile of the values instead, so one outlier does not set it.
// Hand-worked expectations.
func TestHistBand(t *testing.T) {
	f := func(v float64) *float64 { return &v }
	b := func(lo, hi *float64) []limits.Bound { return []limits.Bound{{Limit: "l", Lower: lo, Upper: hi}} }
	// 199 values 1 … 199 and one outlier: the 1st percentile is the value of
	// rank ⌊0.01·199⌋ = 1 of the sorted 200 (1), the 99th that of rank
	// ⌊0.99·199⌋ = 197 (197).
	xs := []float64{-5000}
	for i := 1; i <= 199; i++ {
		xs = append(xs, float64(i))
	}
	cases := []struct {
		name     string
		old, new []limits.Bound
		lo, hi   float64
	}{
		{"two-sided, old wider", b(f(-800), f(800)), b(f(-600), f(600)), -1200, 1200},
		{"two-sided, new only", nil, b(f(-20), f(20)), -30, 30},
		{"upper only: from the 1st percentile", b(nil, f(300)), nil, 1 - 74.75, 300 + 74.75},
		{"lower only: to the 99th percentile", nil, b(f(100), nil), 100 - 24.25, 197 + 24.25},
		{"no bounds: 1st to 99th percentile", nil, nil, 1 - 49, 197 + 49},
	}
	for _, c := range cases {
		lo, hi := histBand(xs, c.old, c.new)
		if math.Abs(lo-c.lo) > 1e-9 || math.Abs(hi-c.hi) > 1e-9 {
			t.Errorf("%s: [%g, %g], want [%g, %g]", c.name, lo, hi, c.lo, c.hi)
		}
	}
	if lo, hi := histBand(nil, nil, nil); lo != 0 || hi != 1 {
		t.Errorf("nothing: [%g, %g], want [0, 1]", lo, hi)
	}
}

// The case: 197 values near zero and one far outlier are no longer
// binned over their range (197 in one bin, then empty rows): the outlier is
// counted below the band, the others spread over its bins, in the text and
// in the PDF.
func TestHistogramOutlier(t *testing.T) {
	f := func(v float64) *float64 { return &v }
	var xs []float64
	for i := range 197 {
		xs = append(xs, float64(i%21-10)*20e-6) // −200 … 200 µV
	}
	xs = append(xs, -12384e-6)
	d := Distribution{Result: "post_offset", Unit: "uV", N: len(xs), Min: -12384e-6, Max: 200e-6,
		Old: []limits.Bound{{Limit: "offset after trim", Lower: f(-800e-6), Upper: f(800e-6)}}}
	lo, hi := histBand(xs, d.Old, d.New)
	d.Hist = spc.Bin(xs, lo, hi, HistBins)
	if d.Hist.Under != 1 || d.Hist.Over != 0 {
		t.Errorf("under %d over %d, want 1 and 0", d.Hist.Under, d.Hist.Over)
	}
	if most := slices.Max(d.Hist.Counts); most > 60 {
		t.Errorf("%d values in one bin: the histogram is still flattened", most)
	}
	var b strings.Builder
	writeDistribution(&b, d)
	if !strings.Contains(b.String(), "< −1200 │") || !regexp.MustCompile(`< −1200 │[█▏▎▍▌▋▊▉]+ *│ +1\n`).MatchString(b.String()) {
		t.Errorf("text lacks the row of values below the band:\n%s", b.String())
	}
}
