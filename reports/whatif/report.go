// Package whatif is the what-if feature: it re-judges units stored in a ledger
// with a new limit set (Rejudge, Run) and reports what would change, as text for
// a terminal (Report.WriteText) and as a PDF (Write, WriteFile).
//
// The PDF is A4 portrait, for a quality engineer: the two limit sets, the units
// judged, the yield before and after, the failure Pareto of the new set, a
// histogram of every bounded result with the old and new bounds drawn on it, and
// the units whose verdict flips. Identical (report, generated) give byte-identical
// files: the creation date is generated, resource catalogues are sorted and
// nothing is drawn in map order. Text is set in the embedded Go fonts, so µ, −, ≤
// and → render on every viewer.
package whatif

import (
	"math"
	"runtime"
	"slices"
	"sort"
	"strings"
	"sync"
	"time"

	"trimline/limits"
	"trimline/sequencer/spc"
)

// StoredUnit is one unit's run as the station stored it, for Rejudge.
type StoredUnit struct {
	Serial, RunID string
	Finished      time.Time
	Product       string
	Values        map[string]limits.Value // the results as stored (V, U, K, DOF, Valid), SI units
	OldVerdict    string                  // "pass", "review" or "fail" as recorded
	// Catalog is the results the record holds with the dimension each was
	// recorded in (sequencer.RecordCatalog); nil when not read from a ledger.
	Catalog limits.Catalog
}

// HistBins is the number of bins of a distribution's histogram, and
// HistMargin how far it reaches beyond the bounds on each side, as a fraction
// of the span of the bounds (Distribution.Hist).
const (
	HistBins   = 24
	HistMargin = 0.25
)

// Report is what a new limit set would have made of stored units (Rejudge).
type Report struct {
	Old, New      string        // the two sets: name, revision, variant and file
	Units         int           // units re-judged
	Skipped       int           // units of another product than the new set's, not judged
	Before, After VerdictCounts // recorded verdicts, and the new set's
	Flips         []Flip        // units whose verdict changes, in the order given
	Pareto        []LimitCount  // per limit of the new set, most failures first
	Distributions []Distribution
}

// VerdictCounts counts units by verdict.
type VerdictCounts struct {
	Pass, Review, Fail int
	Other              int // a recorded verdict that is none of the three (empty, unknown)
}

// Total is the number of units counted.
func (c VerdictCounts) Total() int { return c.Pass + c.Review + c.Fail + c.Other }

// Yield is the fraction of units that passed (0 for no units).
func (c VerdictCounts) Yield() float64 {
	if c.Total() == 0 {
		return 0
	}
	return float64(c.Pass) / float64(c.Total())
}

func (c *VerdictCounts) add(v string) {
	switch v {
	case limits.VerdictPass:
		c.Pass++
	case limits.VerdictReview:
		c.Review++
	case limits.VerdictFail:
		c.Fail++
	default:
		c.Other++
	}
}

// Flip is one unit whose verdict under the new set differs from the recorded one.
type Flip struct {
	Serial, RunID string
	Finished      time.Time
	Old, New      string // verdicts: recorded, and under the new set
	// Limits are the limits that do not pass: under the new set for a flip away
	// from pass or between review and fail, under the old set for a flip to pass.
	Limits []string
}

// LimitCount is how many units one limit of the new set does not pass.
type LimitCount struct {
	Limit, Result string
	Fail, Review  int
}

// Distribution is the spread of one result over the re-judged units, with the
// bounds each set puts on it.
type Distribution struct {
	Result   string
	Unit     string  // unit for display (that of the first limit on the result)
	N        int     // valid, finite values
	Invalid  int     // missing, invalid or not finite
	Min, Max float64 // SI, over the N values
	// Hist bins the N values (SI) in HistBins equal bins over the bounds of
	// both sets plus a margin (histBand), with the values below and above that
	// band counted apart (Under, Over), so one outlier never flattens it.
	Hist     spc.Histogram
	Old, New []limits.Bound // the limits on the result in each set
}

// Rejudge re-judges stored units with the new set (limits.Set.Verdicts, the same
// verdicts as Judge and Overall) and reports what would change: the units judged,
// the yield before (the recorded OldVerdict) and after, every unit whose verdict
// flips, how many units each new limit fails or sends to review, and for every
// result bounded by a toleranced limit (or an expression read as bounds, as
// limits.Diff does) in either set, a histogram of its values with the old and new
// bounds. Units whose Product is set and differs from the new set's (ignoring
// case) are skipped. old may be nil; it supplies the old bounds and the failing
// limits of units that flip to pass. The work is spread over GOMAXPROCS
// goroutines.
func Rejudge(old, new *limits.Set, units []StoredUnit) Report {
	rep := Report{Old: old.Label(), New: new.Label()}
	if new == nil {
		return rep
	}
	judge := make([]bool, len(units))
	for i := range units {
		p := units[i].Product
		judge[i] = p == "" || new.Product == "" || strings.EqualFold(p, new.Product)
	}
	dists := distributionsOf(old, new)
	verdicts := make([]uint8, len(units)) // rank of the new verdict
	nl := len(new.Limits)
	type partial struct {
		fail, review []int
		min, max     []float64
	}
	workers := max(1, min(runtime.GOMAXPROCS(0), len(units)/256))
	parts := make([]partial, workers)
	chunk := (len(units) + workers - 1) / max(1, workers)
	run := func(f func(w, from, to int)) {
		var wg sync.WaitGroup
		for w := range workers {
			from, to := w*chunk, min(len(units), (w+1)*chunk)
			if from >= to {
				continue
			}
			wg.Go(func() { f(w, from, to) })
		}
		wg.Wait()
	}
	run(func(w, from, to int) {
		p := partial{fail: make([]int, nl), review: make([]int, nl), min: make([]float64, len(dists)), max: make([]float64, len(dists))}
		for k := range dists {
			p.min[k], p.max[k] = math.Inf(1), math.Inf(-1)
		}
		vs := make([]string, nl)
		for i := from; i < to; i++ {
			if !judge[i] {
				continue
			}
			u := &units[i]
			verdicts[i] = uint8(rank(new.Verdicts(u.Values, vs)))
			for j, v := range vs {
				switch v {
				case limits.VerdictFail:
					p.fail[j]++
				case limits.VerdictReview:
					p.review[j]++
				}
			}
			for k := range dists {
				samples(u, dists[k].Result, func(x float64, ok bool) {
					if ok {
						p.min[k] = math.Min(p.min[k], x)
						p.max[k] = math.Max(p.max[k], x)
					}
				})
			}
		}
		parts[w] = p
	})
	for k := range dists {
		d := &dists[k]
		d.Min, d.Max = math.Inf(1), math.Inf(-1)
		for _, p := range parts {
			if p.min != nil {
				d.Min, d.Max = math.Min(d.Min, p.min[k]), math.Max(d.Max, p.max[k])
			}
		}
	}
	values := make([][][]float64, workers) // worker → distribution → values
	invalid := make([][]int, workers)
	run(func(w, from, to int) {
		b := make([][]float64, len(dists))
		inv := make([]int, len(dists))
		for i := from; i < to; i++ {
			if !judge[i] {
				continue
			}
			for k := range dists {
				samples(&units[i], dists[k].Result, func(x float64, ok bool) {
					if !ok {
						inv[k]++
						return
					}
					b[k] = append(b[k], x)
				})
			}
		}
		values[w], invalid[w] = b, inv
	})
	for k := range dists {
		d := &dists[k]
		var xs []float64
		for w := range workers {
			if values[w] == nil {
				continue
			}
			xs = append(xs, values[w][k]...)
			d.Invalid += invalid[w][k]
		}
		d.N = len(xs)
		if d.N == 0 {
			d.Min, d.Max = 0, 0
		}
		lo, hi := histBand(xs, d.Old, d.New)
		d.Hist = spc.Bin(xs, lo, hi, HistBins)
	}
	rep.Distributions = dists

	counts := make([]LimitCount, nl)
	for j, l := range new.Limits {
		counts[j] = LimitCount{Limit: l.Name, Result: strings.Join(l.Uses, ", ")}
		for _, p := range parts {
			if p.fail != nil {
				counts[j].Fail += p.fail[j]
				counts[j].Review += p.review[j]
			}
		}
	}
	sort.SliceStable(counts, func(a, b int) bool {
		ca, cb := counts[a], counts[b]
		if ca.Fail != cb.Fail {
			return ca.Fail > cb.Fail
		}
		return ca.Review > cb.Review
	})
	rep.Pareto = counts

	names := []string{limits.VerdictPass, limits.VerdictReview, limits.VerdictFail}
	for i := range units {
		if !judge[i] {
			rep.Skipped++
			continue
		}
		u := &units[i]
		rep.Units++
		nv := names[verdicts[i]]
		rep.Before.add(u.OldVerdict)
		rep.After.add(nv)
		if u.OldVerdict == nv || (u.OldVerdict != limits.VerdictPass && u.OldVerdict != limits.VerdictReview && u.OldVerdict != limits.VerdictFail) {
			continue
		}
		f := Flip{Serial: u.Serial, RunID: u.RunID, Finished: u.Finished, Old: u.OldVerdict, New: nv}
		if nv == limits.VerdictPass {
			f.Limits = notPassing(old, u.Values)
		} else {
			f.Limits = notPassing(new, u.Values)
		}
		rep.Flips = append(rep.Flips, f)
	}
	return rep
}

// samples calls f with each value of result name in u (ok false when it is not
// valid and finite): the one value of a result of the whole unit, or one per
// channel of a result a multi-channel unit measured per channel
// (limits.ChannelKey, the keys its Catalog lists), in no set order: its callers
// take minima, maxima and counts. It runs for every unit and distribution in
// both passes of Rejudge, so it walks the catalog's keys once and uses the key
// it finds, rather than collecting and sorting the channels (ChannelsOf) and
// joining each key again.
func samples(u *StoredUnit, name string, f func(x float64, ok bool)) {
	if _, whole := u.Values[name]; whole || u.Catalog == nil {
		f(usable(u.Values, name))
		return
	}
	found := false
	for k := range u.Catalog {
		if n, ch := limits.SplitChannelKey(k); ch != "" && n == name {
			f(usable(u.Values, k))
			found = true
		}
	}
	if !found {
		f(usable(u.Values, name))
	}
}

// usable returns the result's value when it is valid and finite.
func usable(vals map[string]limits.Value, name string) (float64, bool) {
	v, ok := vals[name]
	if !ok || !v.Valid || math.IsNaN(v.V) || math.IsInf(v.V, 0) {
		return 0, false
	}
	return v.V, true
}

// histBand is the range a distribution's histogram bins (SI): from the lowest
// lower bound of either set to the highest upper bound, a side without a
// bound reaching to the robust end of the values instead (their 1st or 99th
// percentile, so one outlier does not set it), widened by HistMargin of that
// span on each side. The same rule as the lot report's histograms.
func histBand(xs []float64, old, new []limits.Bound) (lo, hi float64) {
	lo, hi = math.Inf(1), math.Inf(-1)
	for _, bs := range [][]limits.Bound{old, new} {
		for _, b := range bs {
			if b.Lower != nil && finite(*b.Lower) {
				lo = math.Min(lo, *b.Lower)
			}
			if b.Upper != nil && finite(*b.Upper) {
				hi = math.Max(hi, *b.Upper)
			}
		}
	}
	var sorted []float64
	pct := func(p float64) float64 {
		if sorted == nil {
			sorted = slices.Clone(xs)
			slices.Sort(sorted)
		}
		return sorted[int(p*float64(len(sorted)-1))]
	}
	if math.IsInf(lo, 1) && len(xs) > 0 {
		lo = pct(0.01)
	}
	if math.IsInf(hi, -1) && len(xs) > 0 {
		hi = pct(0.99)
	}
	switch {
	case math.IsInf(lo, 1) && math.IsInf(hi, -1): // no bound, no value
		return 0, 1
	case math.IsInf(lo, 1):
		lo = hi
	case math.IsInf(hi, -1):
		hi = lo
	}
	lo, hi = min(lo, hi), max(lo, hi)
	span := hi - lo
	if !(span > 0) {
		span = math.Abs(lo)
		if !(span > 0) {
			span = 1
		}
	}
	return lo - HistMargin*span, hi + HistMargin*span
}

// binOf is the bin of h that holds x: −1 below it, len(h.Counts) above it (as
// spc.Bin counts).
func binOf(x float64, h spc.Histogram) int {
	n := len(h.Counts)
	switch {
	case n == 0 || x < h.Lo:
		return -1
	case x > h.Hi:
		return n
	}
	return min(n-1, int((x-h.Lo)/((h.Hi-h.Lo)/float64(n))))
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

// notPassing lists the limits of s that do not pass the unit.
func notPassing(s *limits.Set, vals map[string]limits.Value) []string {
	if s == nil {
		return nil
	}
	vs := make([]string, len(s.Limits))
	s.Verdicts(vals, vs)
	var out []string
	for j, v := range vs {
		if v != limits.VerdictPass {
			out = append(out, s.Limits[j].Name)
		}
	}
	return out
}

// distributionsOf lists the results bounded in either set, in the new set's order,
// with their bounds.
func distributionsOf(old, new *limits.Set) []Distribution {
	var out []Distribution
	at := map[string]int{}
	collect := func(s *limits.Set, isNew bool) {
		for _, b := range s.Bounds() {
			k, seen := at[b.Result]
			if !seen {
				k = len(out)
				at[b.Result] = k
				out = append(out, Distribution{Result: b.Result, Unit: b.Unit})
			}
			if isNew {
				out[k].New = append(out[k].New, b)
			} else {
				out[k].Old = append(out[k].Old, b)
			}
		}
	}
	collect(new, true)
	collect(old, false)
	return out
}

// rank orders verdicts from best to worst.
func rank(v string) int {
	switch v {
	case limits.VerdictPass:
		return 0
	case limits.VerdictReview:
		return 1
	}
	return 2
}
