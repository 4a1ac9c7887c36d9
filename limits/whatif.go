package limits

import (
	"fmt"
	"io"
	"math"
	"runtime"
	"sort"
	"strings"
	"sync"
	"time"
)

// StoredUnit is one unit's run as the station stored it, for WhatIf.
type StoredUnit struct {
	Serial, RunID string
	Finished      time.Time
	Product       string
	Values        map[string]Value // the results as stored (V, U, K, DOF, Valid), SI units
	OldVerdict    string           // "pass", "review" or "fail" as recorded
}

// HistBins is the number of bins of a WhatIf distribution.
const HistBins = 40

// WhatIfReport is what a new limit set would have made of stored units (WhatIf).
type WhatIfReport struct {
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
	case VerdictPass:
		c.Pass++
	case VerdictReview:
		c.Review++
	case VerdictFail:
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
	// Bins counts the values in HistBins equal bins over [Min, Max]: bin k holds
	// Min + k·w ≤ v < Min + (k+1)·w, the last bin also v = Max. All in bin 0 when
	// Min = Max.
	Bins     []int
	Old, New []Bound // the limits on the result in each set
}

// Bound is what one limit accepts of a result, SI units; nil = unbounded.
type Bound struct {
	Limit        string
	Lower, Upper *float64
}

// WhatIf re-judges stored units with the new set (Verdicts, the same verdicts as
// Judge and Overall) and reports what would change: the units judged, the yield
// before (the recorded OldVerdict) and after, every unit whose verdict flips, how
// many units each new limit fails or sends to review, and for every result bounded
// by a toleranced limit (or an expression read as bounds, as Diff does) in either
// set, a histogram of its values with the old and new bounds. Units whose Product
// is set and differs from the new set's (ignoring case) are skipped. old may be
// nil; it supplies the old bounds and the failing limits of units that flip to
// pass. The work is spread over GOMAXPROCS goroutines.
func WhatIf(old, new *Set, units []StoredUnit) WhatIfReport {
	rep := WhatIfReport{Old: setLabel(old), New: setLabel(new)}
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
				case VerdictFail:
					p.fail[j]++
				case VerdictReview:
					p.review[j]++
				}
			}
			for k := range dists {
				if x, ok := usable(u.Values, dists[k].Result); ok {
					p.min[k] = math.Min(p.min[k], x)
					p.max[k] = math.Max(p.max[k], x)
				}
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
	bins := make([][][]int, workers) // worker → distribution → bins
	invalid := make([][]int, workers)
	run(func(w, from, to int) {
		b := make([][]int, len(dists))
		inv := make([]int, len(dists))
		for k := range b {
			b[k] = make([]int, HistBins)
		}
		for i := from; i < to; i++ {
			if !judge[i] {
				continue
			}
			for k := range dists {
				x, ok := usable(units[i].Values, dists[k].Result)
				if !ok {
					inv[k]++
					continue
				}
				b[k][binOf(x, dists[k].Min, dists[k].Max)]++
			}
		}
		bins[w], invalid[w] = b, inv
	})
	for k := range dists {
		d := &dists[k]
		d.Bins = make([]int, HistBins)
		for w := range workers {
			if bins[w] == nil {
				continue
			}
			for j, c := range bins[w][k] {
				d.Bins[j] += c
				d.N += c
			}
			d.Invalid += invalid[w][k]
		}
		if d.N == 0 {
			d.Min, d.Max = 0, 0
		}
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

	names := []string{VerdictPass, VerdictReview, VerdictFail}
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
		if u.OldVerdict == nv || (u.OldVerdict != VerdictPass && u.OldVerdict != VerdictReview && u.OldVerdict != VerdictFail) {
			continue
		}
		f := Flip{Serial: u.Serial, RunID: u.RunID, Finished: u.Finished, Old: u.OldVerdict, New: nv}
		if nv == VerdictPass {
			f.Limits = notPassing(old, u.Values)
		} else {
			f.Limits = notPassing(new, u.Values)
		}
		rep.Flips = append(rep.Flips, f)
	}
	return rep
}

func setLabel(s *Set) string {
	if s == nil {
		return ""
	}
	l := s.Name
	if s.Revision != "" {
		l += " rev " + s.Revision
	}
	if s.VariantName != "" {
		l += " variant " + s.VariantName
	}
	if s.File != "" {
		l += " (" + s.File + ")"
	}
	return l
}

// usable returns the result's value when it is valid and finite.
func usable(vals map[string]Value, name string) (float64, bool) {
	v, ok := vals[name]
	if !ok || !v.Valid || math.IsNaN(v.V) || math.IsInf(v.V, 0) {
		return 0, false
	}
	return v.V, true
}

func binOf(x, lo, hi float64) int {
	if !(hi > lo) {
		return 0
	}
	k := int((x - lo) / (hi - lo) * HistBins)
	return max(0, min(HistBins-1, k))
}

// notPassing lists the limits of s that do not pass the unit.
func notPassing(s *Set, vals map[string]Value) []string {
	if s == nil {
		return nil
	}
	vs := make([]string, len(s.Limits))
	s.Verdicts(vals, vs)
	var out []string
	for j, v := range vs {
		if v != VerdictPass {
			out = append(out, s.Limits[j].Name)
		}
	}
	return out
}

// distributionsOf lists the results bounded in either set, in the new set's order,
// with their bounds.
func distributionsOf(old, new *Set) []Distribution {
	var out []Distribution
	at := map[string]int{}
	collect := func(s *Set, isNew bool) {
		if s == nil {
			return
		}
		for _, l := range s.Limits {
			b := l.box()
			if !b.ok || len(b.names) != 1 {
				continue
			}
			r := b.names[0]
			k, seen := at[r]
			if !seen {
				k = len(out)
				at[r] = k
				out = append(out, Distribution{Result: r, Unit: l.Unit})
			}
			lo, hi := b.spans[r].ptrs()
			bd := Bound{Limit: l.Name, Lower: lo, Upper: hi}
			if isNew {
				out[k].New = append(out[k].New, bd)
			} else {
				out[k].Old = append(out[k].Old, bd)
			}
		}
	}
	collect(new, true)
	collect(old, false)
	return out
}

// maxListed is how many flips of each kind WriteText lists by serial.
const maxListed = 20

// WriteText writes the report for a terminal: yields, flips (up to 20 of each kind
// by serial), the failure Pareto with bars, and each distribution as a histogram of
// Unicode block bars with the old and new bounds marked on the bins they fall in.
func (r WhatIfReport) WriteText(w io.Writer) {
	fmt.Fprintf(w, "What if: %s\n     →  %s\n", orDash(r.Old), orDash(r.New))
	fmt.Fprintf(w, "Units re-judged: %d", r.Units)
	if r.Skipped > 0 {
		fmt.Fprintf(w, " (%d of another product skipped)", r.Skipped)
	}
	fmt.Fprintln(w)
	fmt.Fprintf(w, "Yield before: %s  (%s)\n", fmtPct(r.Before.Yield()), countsText(r.Before))
	fmt.Fprintf(w, "Yield after:  %s  (%s)\n", fmtPct(r.After.Yield()), countsText(r.After))

	groups := []struct {
		title string
		match func(Flip) bool
	}{
		{"pass → review/fail", func(f Flip) bool { return f.Old == VerdictPass }},
		{"review/fail → pass", func(f Flip) bool { return f.New == VerdictPass }},
		{"review ↔ fail", func(f Flip) bool { return f.Old != VerdictPass && f.New != VerdictPass }},
	}
	fmt.Fprintf(w, "\nFlips: %d\n", len(r.Flips))
	for _, g := range groups {
		var fs []Flip
		for _, f := range r.Flips {
			if g.match(f) {
				fs = append(fs, f)
			}
		}
		if len(fs) == 0 {
			continue
		}
		fmt.Fprintf(w, "  %s: %d\n", g.title, len(fs))
		for i, f := range fs {
			if i == maxListed {
				fmt.Fprintf(w, "    … and %d more\n", len(fs)-maxListed)
				break
			}
			when := ""
			if !f.Finished.IsZero() {
				when = " " + f.Finished.Format(time.DateTime)
			}
			fmt.Fprintf(w, "    %-16s %-7s → %-7s run %s%s  %s\n", f.Serial, f.Old, f.New, orDash(f.RunID), when, strings.Join(f.Limits, "; "))
		}
	}

	fmt.Fprintln(w, "\nFailures per limit under the new set:")
	most := 1
	width := 0
	for _, c := range r.Pareto {
		most = max(most, c.Fail+c.Review)
		width = max(width, len([]rune(c.Limit)))
	}
	for _, c := range r.Pareto {
		pad := strings.Repeat(" ", width-len([]rune(c.Limit)))
		fmt.Fprintf(w, "  %s%s  %7d fail %7d review  %s\n", c.Limit, pad, c.Fail, c.Review, bar(c.Fail+c.Review, most, 30))
	}

	for _, d := range r.Distributions {
		writeDistribution(w, d)
	}
}

func countsText(c VerdictCounts) string {
	s := fmt.Sprintf("%d pass, %d review, %d fail", c.Pass, c.Review, c.Fail)
	if c.Other > 0 {
		s += fmt.Sprintf(", %d other", c.Other)
	}
	return s
}

// bar draws n of most as a bar of up to width cells in eighth blocks.
func bar(n, most, width int) string {
	if n <= 0 || most <= 0 {
		return ""
	}
	eighths := int(math.Round(float64(n) / float64(most) * float64(width*8)))
	eighths = max(1, eighths)
	full, rest := eighths/8, eighths%8
	s := strings.Repeat("█", full)
	if rest > 0 {
		s += string([]rune("▏▎▍▌▋▊▉")[rest-1])
	}
	return s
}

func writeDistribution(w io.Writer, d Distribution) {
	l := unitLimit(d.Unit)
	if l == nil {
		l = unitLimit("")
	}
	u := ""
	if d.Unit != "" {
		u = " " + dispUnit(d.Unit)
	}
	fmt.Fprintf(w, "\n%s: %d values", d.Result, d.N)
	if d.Invalid > 0 {
		fmt.Fprintf(w, ", %d invalid or missing", d.Invalid)
	}
	if d.N == 0 {
		fmt.Fprintln(w)
		return
	}
	fmt.Fprintf(w, ", %s … %s%s\n", fmtIn(l, d.Min), fmtIn(l, d.Max), u)
	type mark struct {
		bin  int
		text string
	}
	var marks []mark
	var outside []string
	type edge struct {
		which, side, limit string
		v                  float64
	}
	var edges []edge
	for _, set := range []struct {
		which string
		bs    []Bound
	}{{"old", d.Old}, {"new", d.New}} {
		for _, b := range set.bs {
			if b.Lower != nil {
				edges = append(edges, edge{set.which, "lower", b.Limit, *b.Lower})
			}
			if b.Upper != nil {
				edges = append(edges, edge{set.which, "upper", b.Limit, *b.Upper})
			}
		}
	}
	// A bound that both sets have, on a limit of the same name, is shown once.
	kept := edges[:0:0]
	for i, e := range edges {
		dup := false
		if e.which == "old" {
			for _, n := range edges[i+1:] {
				dup = dup || n.which == "new" && n.side == e.side && nameKey(n.limit) == nameKey(e.limit) && eq(n.v, e.v)
			}
		}
		if dup {
			continue
		}
		for _, o := range edges[:i] {
			if e.which == "new" && o.which == "old" && o.side == e.side && nameKey(o.limit) == nameKey(e.limit) && eq(o.v, e.v) {
				e.which = "old = new"
			}
		}
		kept = append(kept, e)
	}
	for _, e := range kept {
		t := fmt.Sprintf("%s %s %s%s (%s)", e.which, e.side, fmtIn(l, e.v), u, e.limit)
		switch {
		case e.v < d.Min && !eq(e.v, d.Min):
			outside = append(outside, t+": below every value")
		case e.v > d.Max && !eq(e.v, d.Max):
			outside = append(outside, t+": above every value")
		default:
			marks = append(marks, mark{binOf(e.v, d.Min, d.Max), t})
		}
	}
	most := 1
	for _, c := range d.Bins {
		most = max(most, c)
	}
	step := (d.Max - d.Min) / HistBins
	labels := make([]string, len(d.Bins))
	lw := 0
	for k := range d.Bins {
		labels[k] = fmtSig(l.inUnit(d.Min+float64(k)*step), 4)
		lw = max(lw, len([]rune(labels[k])))
	}
	const barWidth = 40
	for k, c := range d.Bins {
		b := bar(c, most, barWidth)
		line := fmt.Sprintf("  %*s │%s%s│ %6d", lw, labels[k], b, strings.Repeat(" ", barWidth-len([]rune(b))), c)
		var ms []string
		for _, m := range marks {
			if m.bin == k {
				ms = append(ms, m.text)
			}
		}
		if len(ms) > 0 {
			line += "  ◀ " + strings.Join(ms, ", ")
		}
		fmt.Fprintln(w, line)
	}
	for _, o := range outside {
		fmt.Fprintf(w, "  %s\n", o)
	}
}
