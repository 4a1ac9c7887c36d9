package pdfdoc_test

import (
	"math"
	"testing"

	"trimline/reports/internal/pdfdoc"
)

// Labels wanted closer than the gap are pushed apart, in their order, and kept
// inside [lo, hi] when there is room; labels far apart stay where they are
// wanted. Hand-worked expectations.
func TestSpread(t *testing.T) {
	cases := []struct {
		name        string
		want        []float64
		gap, lo, hi float64
		expect      []float64
	}{
		{"none", nil, 3, 0, 100, []float64{}},
		{"one", []float64{40}, 3, 0, 100, []float64{40}},
		{"apart", []float64{10, 50, 90}, 3, 0, 100, []float64{10, 50, 90}},
		{"exactly a gap apart", []float64{10, 13, 16}, 3, 0, 100, []float64{10, 13, 16}},
		{"any order", []float64{51, 50, 90}, 3, 0, 100, []float64{53, 50, 90}},
		{"reversed", []float64{90, 51, 50}, 3, 0, 100, []float64{90, 53, 50}},
		{"stacking on one line", []float64{50, 50, 50}, 3, 0, 100, []float64{50, 53, 56}},
		{"stack pushes into the next", []float64{50, 50, 54, 80}, 3, 0, 100, []float64{50, 53, 56, 80}},
		{"pushed past the end", []float64{99, 100, 100}, 3, 0, 100, []float64{94, 97, 100}},
		{"past the end, stopped at lo", []float64{2, 3, 4}, 3, 0, 5, []float64{0, 3, 6}},
		{"no room", []float64{1, 1, 1, 1}, 3, 0, 4, []float64{0, 3, 6, 9}},
		{"beyond the end alone", []float64{120}, 3, 0, 100, []float64{100}},
	}
	for _, c := range cases {
		got := pdfdoc.Spread(c.want, c.gap, c.lo, c.hi)
		if len(got) != len(c.expect) {
			t.Errorf("%s: got %v, want %v", c.name, got, c.expect)
			continue
		}
		for i := range got {
			if math.Abs(got[i]-c.expect[i]) > 1e-9 {
				t.Errorf("%s: got %v, want %v", c.name, got, c.expect)
				break
			}
		}
		// Whatever the room, neighbours are never closer than the gap.
		for i := range got {
			for j := range got {
				if i != j && math.Abs(got[i]-got[j]) < c.gap-1e-9 {
					t.Errorf("%s: labels %d and %d %.3g apart, gap %g", c.name, i, j, math.Abs(got[i]-got[j]), c.gap)
				}
			}
		}
	}
}
