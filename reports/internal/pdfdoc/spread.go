package pdfdoc

import (
	"math"
	"sort"
)

// Spread moves label positions want (any order, mm along one axis) apart
// until neighbours are at least gap apart, keeping them within [lo, hi] where
// there is room, and returns the positions in the order of want. Labels
// wanted at least gap apart stay where they are wanted; closer ones are pushed
// towards hi in order of position (equal positions keep their order in want),
// and a stack pushed past hi is shifted back towards lo as far as lo allows.
// When the labels need more than hi − lo, the stack starts at lo and runs past
// hi: the labels still never overlap. It is the one label-placing rule of the
// PDFs (control-chart limits, histogram bounds), so they never overlap.
func Spread(want []float64, gap, lo, hi float64) []float64 {
	at := make([]float64, len(want))
	if len(want) == 0 {
		return at
	}
	order := make([]int, len(want))
	for i := range order {
		order[i] = i
	}
	sort.SliceStable(order, func(a, b int) bool { return want[order[a]] < want[order[b]] })
	for i, k := range order {
		at[k] = want[k]
		if i > 0 {
			at[k] = math.Max(at[k], at[order[i-1]]+gap)
		}
	}
	// Pushed past hi: shift the stack back as far as lo allows.
	if last := at[order[len(order)-1]]; last > hi {
		shift := math.Min(last-hi, math.Max(0, at[order[0]]-lo))
		for _, k := range order {
			at[k] -= shift
		}
	}
	return at
}
