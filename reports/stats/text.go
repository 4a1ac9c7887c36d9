package stats

import (
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"time"

	"trimline/instruments/units"
	"trimline/sequencer/spc"
)

// textDash stands for a number that cannot be computed (NaN) in the text.
const textDash = "—"

// textHistRows is the most rows WriteText gives one histogram: adjacent bins are
// merged (two, three, …) until they fit, so that a bin edge stays a bin edge.
const textHistRows = 12

// textBarWidth is the length of the longest histogram or Pareto bar.
const textBarWidth = 40

// WriteText writes the report for a terminal: the heading (ledger, filter,
// when), the population rules, the counts and rates, the Pareto of failing
// limits, a capability table, the pre-trim results beside the post-trim ones,
// a histogram of each result over its tolerance band, the trends and the
// notes. Numbers are in each result's limit unit; a number that cannot be
// computed is "—". Errors of w are not reported: w is a terminal or a buffer.
func (r Report) WriteText(w io.Writer) {
	fmt.Fprintf(w, "Quality numbers of %s\n", textOrNone(r.Ledger))
	fmt.Fprintf(w, "filter: %s\n", r.Filter.textDescribe())
	if !r.Generated.IsZero() {
		fmt.Fprintf(w, "generated %s\n", r.Generated.UTC().Format("2006-01-02 15:04 UTC"))
	}

	fmt.Fprintln(w, "\nPopulation")
	for _, p := range r.Population {
		fmt.Fprintf(w, "  - %s\n", p)
	}

	r.textCounts(w)
	r.textPareto(w)
	r.textCapability(w)
	r.textPairs(w)
	for _, s := range r.Results {
		textHistogram(w, s)
	}
	r.textTrends(w)

	if len(r.Notes) > 0 {
		fmt.Fprintln(w, "\nNotes")
		for _, n := range r.Notes {
			fmt.Fprintf(w, "  - %s\n", n)
		}
	}
}

// textDescribe says in words which runs the filter lets through.
func (f Filter) textDescribe() string {
	var parts []string
	for _, p := range []struct{ name, v string }{
		{"product", f.Product}, {"revision", f.Revision}, {"station", f.Station}, {"site", f.Site}, {"lot", f.Lot},
	} {
		if p.v != "" {
			parts = append(parts, p.name+" "+p.v)
		}
	}
	if !f.Since.IsZero() {
		parts = append(parts, "finished from "+textTime(f.Since))
	}
	if !f.Until.IsZero() {
		if textMidnight(f.Until) {
			parts = append(parts, "finished through "+f.Until.UTC().AddDate(0, 0, -1).Format(time.DateOnly))
		} else {
			parts = append(parts, "finished before "+textTime(f.Until))
		}
	}
	if f.IncludeEngineering {
		parts = append(parts, "engineering runs included")
	}
	if len(parts) == 0 {
		return "none (every production run of the ledger)"
	}
	return strings.Join(parts, ", ")
}

// textTime is t as a UTC day when it is midnight, else as RFC 3339 in UTC.
func textTime(t time.Time) string {
	if textMidnight(t) {
		return t.UTC().Format(time.DateOnly)
	}
	return t.UTC().Format(time.RFC3339)
}

func textMidnight(t time.Time) bool {
	u := t.UTC()
	return u.Equal(time.Date(u.Year(), u.Month(), u.Day(), 0, 0, 0, 0, time.UTC))
}

func (r Report) textCounts(w io.Writer) {
	c := r.Counts
	fmt.Fprintf(w, "\nUnits: %d (passed %d, failed %d, held for review %d)\n", c.Units, c.Passed, c.Failed, c.Held)
	t := textTable{align: "lrl"}
	rate := func(name string, v float64, n, of int, what string) {
		t.add(name, textPercent(v), fmt.Sprintf("(%d of %d %s)", n, of, what))
	}
	rate("yield", r.Yield, c.Passed, c.Units, "units")
	rate("first-pass yield", r.FirstPassYield, c.FirstPass, c.Units, "units")
	rate("retest rate", r.RetestRate, c.Retested, c.Units, "units")
	rate("fault rate", r.FaultRate, c.Faults, c.Runs, "runs")
	t.write(w, "  ")
	fmt.Fprintf(w, "  runs %d: attempts %d, faults %d, aborted %d; review decisions %d", c.Runs, c.Attempts, c.Faults, c.Aborted, c.Decisions)
	if c.Engineering > 0 {
		if r.Filter.IncludeEngineering {
			fmt.Fprintf(w, "; engineering runs %d (included)", c.Engineering)
		} else {
			fmt.Fprintf(w, "; engineering runs %d (left out)", c.Engineering)
		}
	}
	if c.NoCompleted > 0 {
		fmt.Fprintf(w, "; serials with only faulted or aborted runs %d", c.NoCompleted)
	}
	fmt.Fprintln(w)
}

func (r Report) textPareto(w io.Writer) {
	fmt.Fprintln(w, "\nFailing limits (Pareto: units whose latest attempt did not pass the limit)")
	if len(r.Pareto) == 0 {
		fmt.Fprintln(w, "  none")
		return
	}
	most := 1
	for _, p := range r.Pareto {
		most = max(most, p.Failed+p.Held)
	}
	t := textTable{align: "llrrrl"}
	t.add("limit", "channel", "failed", "held", "first attempt", "")
	for _, p := range r.Pareto {
		t.add(p.Limit, p.Channel, strconv.Itoa(p.Failed), strconv.Itoa(p.Held), strconv.Itoa(p.First), textBar(p.Failed+p.Held, most, textBarWidth/2))
	}
	t.write(w, "  ")
}

func (r Report) textCapability(w io.Writer) {
	fmt.Fprintln(w, "\nCapability of the toleranced results (e-Handbook §6.1.6)")
	if len(r.Results) == 0 {
		fmt.Fprintln(w, "  no toleranced results")
		return
	}
	fmt.Fprintln(w, "  Cp, Cpk from sd within (MR̄/1.128, units in test order); Pp, Ppk from sd overall;")
	fmt.Fprintf(w, "  [low, high] %s confidence intervals: χ² for Cp, Bissell (1990) for Cpk;\n", textLevel(r.Confidence))
	fmt.Fprintln(w, "  expected: outside the tolerance by the normal model (sd overall); measured: values outside the tolerance")
	invalid := false
	for _, s := range r.Results {
		invalid = invalid || s.Invalid > 0
	}
	t := textTable{align: "lllrrrrrrrrrrr"}
	head := []string{"result", "unit", "tolerance", "n", "mean", "sd within", "sd overall", "Cp [CI]", "Cpk [CI]", "Pp", "Ppk", "expected", "measured"}
	if invalid {
		head = append(head, "no value")
	}
	t.add(head...)
	for _, s := range r.Results {
		row := []string{s.Name, units.Display(s.Unit), textTolerance(s.Lower, s.Upper), strconv.Itoa(s.N),
			textValue(s.Mean), textSD(s.SDWithin), textSD(s.SDOverall),
			textWithCI(s.Cp, s.CpCI), textWithCI(s.Cpk, s.CpkCI), textIndex(s.Pp), textIndex(s.Ppk), textOutside(s.FractionOutside), strconv.Itoa(s.Outside)}
		if invalid {
			row = append(row, strconv.Itoa(s.Invalid))
		}
		t.add(row...)
	}
	t.write(w, "  ")
}

// textLevel is a confidence level as a percentage ("95 %"), "" when unknown.
func textLevel(c float64) string {
	if !(c > 0 && c < 1) {
		return ""
	}
	return units.FormatSig(c*100, 3) + " %"
}

// textWithCI is an index with its interval: "1.32 [1.01, 1.63]".
func textWithCI(v float64, ci [2]float64) string {
	if math.IsNaN(v) {
		return textDash
	}
	return fmt.Sprintf("%s [%s, %s]", textIndex(v), textIndex(ci[0]), textIndex(ci[1]))
}

func (r Report) textPairs(w io.Writer) {
	if len(r.Pairs) == 0 {
		return
	}
	fmt.Fprintln(w, "\nPre-trim beside post-trim (what comes off assembly, what the trim achieves)")
	t := textTable{align: "llrrrllrrrr"}
	t.add("quantity", "pre-trim", "mean", "sd overall", "min … max", "", "post-trim", "mean", "sd overall", "min … max", "Ppk")
	for _, p := range r.Pairs {
		if p.Pre < 0 || p.Pre >= len(r.Results) || p.Post < 0 || p.Post >= len(r.Results) {
			continue
		}
		pre, post := r.Results[p.Pre], r.Results[p.Post]
		q := p.Quantity
		if p.Channel != "" {
			q += " @" + p.Channel
		}
		t.add(q, pre.Name, textWithUnit(textValue(pre.Mean), pre.Unit), textWithUnit(textSD(pre.SDOverall), pre.Unit), textSpan(pre), "→",
			post.Name, textWithUnit(textValue(post.Mean), post.Unit), textWithUnit(textSD(post.SDOverall), post.Unit), textSpan(post), textIndex(post.Ppk))
	}
	t.write(w, "  ")
}

func textSpan(s ResultStats) string {
	if s.N == 0 {
		return textDash
	}
	return textValue(s.Min) + " … " + textWithUnit(textValue(s.Max), s.Unit)
}

func textWithUnit(v, unit string) string {
	if v == textDash || unit == "" {
		return v
	}
	return v + " " + units.Display(unit)
}

// textHistogram draws s.Hist, the values over the tolerance band and a
// margin, as rows of bars (textHistRows at most), with the tolerance's limits
// marked between the rows they separate and the values below and above the
// band counted. When the band's histogram has nine in ten of its values in four bins or
// fewer (crowded: a capable process) s.DataHist follows, the values over their own range, so
// that their shape shows too.
func textHistogram(w io.Writer, s ResultStats) {
	h := s.Hist
	fmt.Fprintf(w, "\n%s [%s], tolerance %s, n %d\n", s.Name, units.Display(s.Unit), textTolerance(s.Lower, s.Upper), s.N)
	if len(h.Counts) == 0 {
		fmt.Fprintf(w, "  no histogram: below the middle %d, above %d\n", h.Under, h.Over)
		return
	}
	textHistRowsOf(w, h, s.Lower, s.Upper)
	if crowded(h) && len(s.DataHist.Counts) > 0 && s.N >= 2 {
		fmt.Fprintln(w, "  the same values over their own range:")
		textHistRowsOf(w, s.DataHist, s.Lower, s.Upper)
	}
}

// textHistRowsOf writes the rows of h, adjacent bins merged so that there
// are at most textHistRows, between the counts below and above it, and
// returns how many rows hold values.
func textHistRowsOf(w io.Writer, h spc.Histogram, lower, upper *float64) (filled int) {
	merge := (len(h.Counts) + textHistRows - 1) / textHistRows
	width := (h.Hi - h.Lo) / float64(len(h.Counts))
	type row struct {
		lo, hi float64
		n      int
	}
	var rows []row
	for i := 0; i < len(h.Counts); i += merge {
		j := min(i+merge, len(h.Counts))
		r := row{lo: h.Lo + float64(i)*width, hi: h.Lo + float64(j)*width}
		for _, c := range h.Counts[i:j] {
			r.n += c
		}
		rows = append(rows, r)
	}
	rows[len(rows)-1].hi = h.Hi
	most := 1
	for _, r := range rows {
		most = max(most, r.n)
		if r.n > 0 {
			filled++
		}
	}
	// Edges within a part in a million of a bin's width are the same edge.
	near := func(a, b float64) bool { return math.Abs(a-b) <= width*1e-6 }
	limit := func(name string, v *float64, at float64) {
		if v != nil && near(*v, at) {
			fmt.Fprintf(w, "  %s %s %s\n", strings.Repeat("─", 4), name, textValue(*v))
		}
	}
	marked := func(name string, v *float64, lo, hi float64) string {
		if v != nil && *v > lo && *v < hi && !near(*v, lo) && !near(*v, hi) {
			return "  ← " + name + " " + textValue(*v) + " within"
		}
		return ""
	}
	los := make([]string, len(rows))
	his := make([]string, len(rows))
	wl, wh := 0, 0
	for i, r := range rows {
		los[i], his[i] = textValue(r.lo), textValue(r.hi)
		wl, wh = max(wl, len([]rune(los[i]))), max(wh, len([]rune(his[i])))
	}
	fmt.Fprintf(w, "  below %s: %d\n", textValue(h.Lo), h.Under)
	for i, r := range rows {
		limit("LSL", lower, r.lo)
		limit("USL", upper, r.lo)
		b := textBar(r.n, most, textBarWidth)
		count := ""
		if r.n > 0 {
			count = " " + strconv.Itoa(r.n)
		}
		fmt.Fprintf(w, "  %s … %s │%s%s%s%s\n", textPad(los[i], wl), textPad(his[i], wh), b, count,
			marked("LSL", lower, r.lo, r.hi), marked("USL", upper, r.lo, r.hi))
	}
	limit("LSL", lower, h.Hi)
	limit("USL", upper, h.Hi)
	fmt.Fprintf(w, "  above %s: %d\n", textValue(h.Hi), h.Over)
	return filled
}

// textPad right-aligns s in n runes.
func textPad(s string, n int) string {
	return strings.Repeat(" ", max(0, n-len([]rune(s)))) + s
}

// textBar is n of most as a bar of at most width blocks; a count above zero gets
// at least one block.
func textBar(n, most, width int) string {
	if n <= 0 || most <= 0 {
		return ""
	}
	k := max(1, int(math.Round(float64(n)/float64(most)*float64(width))))
	return strings.Repeat("█", k)
}

func (r Report) textTrends(w io.Writer) {
	if len(r.Trends) == 0 {
		return
	}
	by := r.By
	if by == "" {
		by = ByDay
	}
	fmt.Fprintf(w, "\nTrends by %s (mean and sd per group; limits center ± 3·sd within/√n and from c4; * a group beyond its limits)\n", by)
	for _, t0 := range r.Trends {
		if t0.Result < 0 || t0.Result >= len(r.Results) {
			continue
		}
		s := r.Results[t0.Result]
		fmt.Fprintf(w, "  %s [%s]\n", s.Name, units.Display(s.Unit))
		meanSig, sdSig := textSignalled(t0.Means), textSignalled(t0.Spreads)
		t := textTable{align: "lrrrlrrl"}
		t.add(by, "n", "mean", "mean limits", "", "sd", "sd limits", "")
		for i, g := range t0.Groups {
			ml, sl := textDash, textDash
			if i < len(t0.Means.Points) {
				ml = textLimits(t0.Means.Points[i])
			}
			if i < len(t0.Spreads.Points) {
				sl = textLimits(t0.Spreads.Points[i])
			}
			t.add(g.Key, strconv.Itoa(g.N), textValue(g.Mean), ml, textMark(meanSig[i+1]), textSD(g.SD), sl, textMark(sdSig[i+1]))
		}
		t.write(w, "    ")
	}
}

// textSignalled is the 1-based indices of the points of c that signal.
func textSignalled(c spc.Chart) map[int]bool {
	m := make(map[int]bool, len(c.Signals))
	for _, s := range c.Signals {
		m[s.Index] = true
	}
	return m
}

func textMark(b bool) string {
	if b {
		return "*"
	}
	return ""
}

func textLimits(p spc.Point) string {
	if math.IsNaN(p.LCL) && math.IsNaN(p.UCL) {
		return textDash
	}
	return textValue(p.LCL) + " … " + textValue(p.UCL)
}

func textOrNone(s string) string {
	if s == "" {
		return "(no ledger named)"
	}
	return s
}

// textValue writes a result's value (a mean, a limit, a bin edge) in its limit
// unit with 4 significant digits; NaN is "—".
func textValue(v float64) string { return textSig(v, 4) }

// textSD writes a standard deviation with 3 significant digits; NaN is "—".
func textSD(v float64) string { return textSig(v, 3) }

func textSig(v float64, n int) string {
	switch {
	case math.IsNaN(v):
		return textDash
	case math.IsInf(v, 1):
		return "∞"
	case math.IsInf(v, -1):
		return "−∞"
	}
	return units.FormatSig(v, n)
}

// textIndex writes a capability index (Cp, Cpk, …) to two decimals below 10
// ("1.30", "0.11", common practice, as the lot report writes them) and to 3
// significant digits above ("26.1"); NaN is "—", an infinite index (no
// spread) ∞.
func textIndex(v float64) string {
	switch {
	case math.IsNaN(v):
		return textDash
	case math.IsInf(v, 1):
		return "∞"
	case math.IsInf(v, -1):
		return "−∞"
	}
	if math.Abs(v) < 10 {
		return units.FormatAt(v, 2)
	}
	return strings.Replace(units.FormatNumber(v, 3), "-", "−", 1)
}

// textPercent writes a rate (a fraction 0–1) as a percentage with one decimal:
// "92.0 %"; NaN is "—".
func textPercent(v float64) string {
	if math.IsNaN(v) {
		return textDash
	}
	return strconv.FormatFloat(100*v, 'f', 1, 64) + " %"
}

// textOutside writes an expected fraction outside the tolerance: in ppm below
// 0.1 % ("12 ppm", "< 0.001 ppm"), else as a percentage ("1.3 %"); NaN is "—".
func textOutside(f float64) string {
	switch {
	case math.IsNaN(f):
		return textDash
	case f < 1e-9: // 0 too: a normal tail that underflowed is not nothing
		return "< 0.001 ppm"
	case f < 1e-3:
		return units.FormatSig(f*1e6, 2) + " ppm"
	}
	return units.FormatSig(f*100, 2) + " %"
}

// textTolerance writes a tolerance in its unit's numbers: "−800 … 800",
// "≥ 0.5", "≤ 120".
func textTolerance(lower, upper *float64) string {
	switch {
	case lower != nil && upper != nil:
		return textValue(*lower) + " … " + textValue(*upper)
	case lower != nil:
		return "≥ " + textValue(*lower)
	case upper != nil:
		return "≤ " + textValue(*upper)
	}
	return textDash
}

// textTable is a table of text cells written with its columns aligned: align
// has a letter per column, l (left) or r (right), the last repeated for any
// further column. Widths are in runes (µ, −, … are one each).
type textTable struct {
	align string
	rows  [][]string
}

func (t *textTable) add(cells ...string) { t.rows = append(t.rows, cells) }

// write writes the rows, each after indent, columns two blanks apart,
// without trailing blanks.
func (t *textTable) write(w io.Writer, indent string) {
	var width []int
	for _, r := range t.rows {
		for i, c := range r {
			if i == len(width) {
				width = append(width, 0)
			}
			width[i] = max(width[i], len([]rune(c)))
		}
	}
	for _, r := range t.rows {
		var b strings.Builder
		b.WriteString(indent)
		for i, c := range r {
			if i > 0 {
				b.WriteString("  ")
			}
			gap := strings.Repeat(" ", width[i]-len([]rune(c)))
			a := byte('l')
			if len(t.align) > 0 {
				a = t.align[min(i, len(t.align)-1)]
			}
			if a == 'r' {
				b.WriteString(gap + c)
			} else {
				b.WriteString(c + gap)
			}
		}
		fmt.Fprintln(w, strings.TrimRight(b.String(), " "))
	}
}
