package whatif

import (
	"fmt"
	"io"
	"math"
	"strings"
	"time"

	"trimline/instruments/units"
	"trimline/limits"
)

// maxListed is how many flips of each kind WriteText lists by serial.
const maxListed = 20

// WriteText writes the report for a terminal: yields, flips (up to 20 of each kind
// by serial), the failure Pareto with bars, and each distribution as a histogram of
// Unicode block bars with the old and new bounds marked on the bins they fall in.
func (r Report) WriteText(w io.Writer) {
	fmt.Fprintf(w, "What if: %s\n     →  %s\n", orDash(r.Old), orDash(r.New))
	fmt.Fprintf(w, "Units re-judged: %d", r.Units)
	if r.Skipped > 0 {
		fmt.Fprintf(w, " (%d of another product skipped)", r.Skipped)
	}
	fmt.Fprintln(w)
	fmt.Fprintf(w, "Yield before: %s  (%s)\n", units.FormatPercent(r.Before.Yield()), countsText(r.Before))
	fmt.Fprintf(w, "Yield after:  %s  (%s)\n", units.FormatPercent(r.After.Yield()), countsText(r.After))

	groups := []struct {
		title string
		match func(Flip) bool
	}{
		{"pass → review/fail", func(f Flip) bool { return f.Old == limits.VerdictPass }},
		{"review/fail → pass", func(f Flip) bool { return f.New == limits.VerdictPass }},
		{"review ↔ fail", func(f Flip) bool { return f.Old != limits.VerdictPass && f.New != limits.VerdictPass }},
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
	in := func(v float64) float64 { return limits.InUnit(v, d.Unit) }
	u := ""
	if d.Unit != "" {
		u = " " + units.Display(d.Unit)
	}
	fmt.Fprintf(w, "\n%s: %d values", d.Result, d.N)
	if d.Invalid > 0 {
		fmt.Fprintf(w, ", %d invalid or missing", d.Invalid)
	}
	if d.N == 0 {
		fmt.Fprintln(w)
		return
	}
	fmt.Fprintf(w, ", %s … %s%s\n", units.FormatSig(in(d.Min), 6), units.FormatSig(in(d.Max), 6), u)
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
		bs    []limits.Bound
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
				dup = dup || n.which == "new" && n.side == e.side && sameName(n.limit, e.limit) && sameValue(n.v, e.v)
			}
		}
		if dup {
			continue
		}
		for _, o := range edges[:i] {
			if e.which == "new" && o.which == "old" && o.side == e.side && sameName(o.limit, e.limit) && sameValue(o.v, e.v) {
				e.which = "old = new"
			}
		}
		kept = append(kept, e)
	}
	h := d.Hist
	for _, e := range kept {
		t := fmt.Sprintf("%s %s %s%s (%s)", e.which, e.side, units.FormatSig(in(e.v), 6), u, e.limit)
		switch {
		case e.v < d.Min && !sameValue(e.v, d.Min):
			t += ": below every value"
		case e.v > d.Max && !sameValue(e.v, d.Max):
			t += ": above every value"
		}
		if k := binOf(e.v, h); k >= 0 && k < len(h.Counts) {
			marks = append(marks, mark{k, t})
		} else {
			outside = append(outside, t)
		}
	}
	// The bins over the bounds plus a margin, with a row for the values
	// below and one for those above them (Distribution.Hist).
	most := max(1, h.Under, h.Over)
	for _, c := range h.Counts {
		most = max(most, c)
	}
	n := len(h.Counts)
	labels := make([]string, n+2)
	counts := make([]int, n+2)
	labels[0], counts[0] = "< "+units.FormatSig(in(h.Lo), 4), h.Under
	labels[n+1], counts[n+1] = "> "+units.FormatSig(in(h.Hi), 4), h.Over
	for k, c := range h.Counts {
		v := h.Lo + float64(k)*(h.Hi-h.Lo)/float64(n)
		if math.Abs(v) < 1e-9*(h.Hi-h.Lo) {
			v = 0 // not 5.4e−14 from rounding
		}
		labels[k+1], counts[k+1] = units.FormatSig(in(v), 4), c
	}
	lw := 0
	for _, l := range labels {
		lw = max(lw, len([]rune(l)))
	}
	const barWidth = 40
	for k, c := range counts {
		b := bar(c, most, barWidth)
		pad := lw - len([]rune(labels[k]))
		line := fmt.Sprintf("  %s%s │%s%s│ %6d", strings.Repeat(" ", pad), labels[k], b, strings.Repeat(" ", barWidth-len([]rune(b))), c)
		var ms []string
		for _, m := range marks {
			if m.bin == k-1 {
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

// sameName compares limit names as a limit file does: case and runs of white
// space do not count.
func sameName(a, b string) bool {
	key := func(s string) string { return strings.ToLower(strings.Join(strings.Fields(s), " ")) }
	return key(a) == key(b)
}

// sameValue reports finite x and y equal to about 12 significant digits.
func sameValue(x, y float64) bool {
	return x == y || math.Abs(x-y) <= 1e-12*math.Max(math.Abs(x), math.Abs(y))
}
