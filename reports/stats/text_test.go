package stats_test

import (
	"bytes"
	"fmt"
	"math"
	"regexp"
	"slices"
	"strings"
	"testing"
	"time"

	"trimline/reports/stats"
	"trimline/sequencer/spc"
)

// sample is a synthetic report of 5 units, as Compute would make it: a
// two-sided pre-trim offset in mV, a two-sided post-trim offset in uV with an
// outlier above the band, a one-sided result with too few values, a Pareto,
// a pair, a trend by lot with one group beyond its limits, and a note.
func sample(t *testing.T) stats.Report {
	t.Helper()
	day := time.Date(2026, 12, 2, 9, 0, 0, 0, time.UTC)
	r := stats.Report{
		Ledger: "out/ledger.db",
		Filter: stats.Filter{Product: "BRX-200", Lot: "L7",
			Since: time.Date(2026, 12, 1, 0, 0, 0, 0, time.UTC), Until: time.Date(2026, 12, 3, 0, 0, 0, 0, time.UTC)},
		By:         stats.ByLot,
		Generated:  time.Date(2026, 12, 2, 18, 30, 0, 0, time.UTC),
		Population: []string{"A unit is a serial.", "Its latest completed run counts for yield and capability."},
		Counts: stats.Counts{Units: 5, Passed: 4, Failed: 1, FirstPass: 3, Retested: 1, Attempts: 6,
			Runs: 7, Faults: 1, Engineering: 2},
		Yield: 0.8, FirstPassYield: 0.6, RetestRate: 0.2, FaultRate: 1.0 / 7,
		Pareto: []stats.LimitFailures{{Limit: "offset after trim", Failed: 1, First: 2}},
		Notes:  []string{"gain_drift: 1 value, too few for capability."},
	}
	for i := range 5 {
		r.Units = append(r.Units, stats.UnitRow{Serial: fmt.Sprintf("BRX-%05d", i+1), Product: "BRX-200", Revision: "C",
			RunID: fmt.Sprintf("run-%d", i+1), Certificate: fmt.Sprintf("TL1-%06d", i+1), Station: "TL1", Site: "Harbor Road", Lot: "L7",
			Started: day.Add(time.Duration(i) * time.Minute), Finished: day.Add(time.Duration(i)*time.Minute + 40*time.Second),
			Verdict: "PASS", FirstVerdict: "PASS", Attempts: 1})
	}
	r.Units[2].Verdict, r.Units[2].FirstVerdict = "FAIL", "FAIL"
	r.Units[3].Attempts, r.Units[3].FirstVerdict = 2, "FAIL"
	lo, hi := -800.0, 800.0
	pre := result(t, "pre_offset", "as_found", "mV", ptr(-40), ptr(40), []float64{12.5, -3.1, 20.4, 7.7, -11.2}, []float64{0.1, 0.1, 0.1, 0.1, 0.1})
	post := result(t, "post_offset", "as_left", "uV", &lo, &hi, []float64{-120, 45.5, 1500, 310, -42}, []float64{100, 100, 100, 100, math.NaN()})
	one := stats.ResultStats{Name: "gain_drift", Result: "gain_drift", Stage: "as_left", Unit: "ppm", Upper: ptr(50), N: 1, Invalid: 4,
		Mean: 3, SDWithin: math.NaN(), SDOverall: math.NaN(), Min: 3, Max: 3, Cp: math.NaN(), Cpk: math.NaN(), Pp: math.NaN(), Ppk: math.NaN(),
		CpCI: [2]float64{math.NaN(), math.NaN()}, CpkCI: [2]float64{math.NaN(), math.NaN()}, FractionOutside: math.NaN(), MeanU: math.NaN(),
		Hist: spc.Bin([]float64{3}, -12.5, 62.5, 24), Values: []float64{3}, U: []float64{math.NaN()}, Units: []int{1}}
	r.Results = []stats.ResultStats{pre, post, one}
	r.Pairs = []stats.Pair{{Quantity: "offset", Pre: 0, Post: 1}}
	means, spreads, err := spc.Subgroups([][]float64{{-120, 45.5}, {1500, 310, -42}}, post.Mean, 20)
	if err != nil {
		t.Fatal(err)
	}
	r.Trends = []stats.Trend{{Result: 1, By: stats.ByLot, Means: means, Spreads: spreads,
		Groups: []stats.Group{{Key: "L6", N: 2, Mean: means.Points[0].Value, SD: spreads.Points[0].Value}, {Key: "L7", N: 3, Mean: means.Points[1].Value, SD: spreads.Points[1].Value}}}}
	return r
}

func ptr(v float64) *float64 { return &v }

// result is the stats of xs as Compute makes them: spc.Capable and spc.Bin
// over the band plus a quarter of its width on each side.
func result(t *testing.T, name, stage, unit string, lower, upper *float64, xs, us []float64) stats.ResultStats {
	t.Helper()
	c, err := spc.Capable(xs, lower, upper, 0.95)
	if err != nil {
		t.Fatal(err)
	}
	s := stats.ResultStats{Name: name, Result: name, Limit: name + " limit", Stage: stage, Quantity: "offset", Unit: unit,
		Lower: lower, Upper: upper, N: c.N, Mean: c.Mean, SDWithin: c.SDWithin, SDOverall: c.SDOverall,
		Cp: c.Cp, Cpk: c.Cpk, Pp: c.Pp, Ppk: c.Ppk, CpCI: c.CpCI, CpkCI: c.CpkCI, FractionOutside: c.FractionOutside,
		Min: math.Inf(1), Max: math.Inf(-1), Values: xs, U: us, Units: []int{0, 1, 2, 3, 4}}
	var sum float64
	var n int
	for i, x := range xs {
		if (lower != nil && x < *lower) || (upper != nil && x > *upper) {
			s.Outside++
		}
		s.Min, s.Max = math.Min(s.Min, x), math.Max(s.Max, x)
		if !math.IsNaN(us[i]) {
			sum += us[i]
			n++
		}
	}
	s.MeanU = sum / float64(n)
	m := (*upper - *lower) / 4
	s.Hist = spc.Bin(xs, *lower-m, *upper+m, 24)
	return s
}

func TestWriteText(t *testing.T) {
	r := sample(t)
	var b bytes.Buffer
	r.WriteText(&b)
	out := b.String()
	t.Log("\n" + out)
	flat := spaces.ReplaceAllString(out, " ")
	for _, want := range []string{
		"Quality numbers of out/ledger.db",
		"filter: product BRX-200, lot L7, finished from 2026-12-01, finished through 2026-12-02",
		"generated 2026-12-02 18:30 UTC",
		" - A unit is a serial.",
		"yield 80.0 % (4 of 5 units)",
		"first-pass yield 60.0 % (3 of 5 units)",
		"retest rate 20.0 % (1 of 5 units)",
		"fault rate 14.3 % (1 of 7 runs)",
		"engineering runs 2 (left out)",
		"offset after trim", // Pareto
		"post_offset", "µV", "−800 … 800",
		"gain_drift ppm ≤ 50 1 3 — —", "no value",
		"below −1200: 0", "above 1200: 1", "──── LSL −800", "──── USL 800",
		"Trends by lot",
		"Notes\n - gain_drift: 1 value, too few for capability.",
	} {
		if !strings.Contains(flat, want) {
			t.Errorf("text lacks %q", want)
		}
	}
	if strings.Contains(out, "NaN") {
		t.Error("text shows NaN; a number that cannot be computed is —")
	}
	// The capability table: every row has a cell under each heading, and the
	// one-sided result's Cp is "—".
	lines := strings.Split(out, "\n")
	var head []string
	for _, l := range lines {
		cells := cellSep.Split(strings.TrimSpace(l), -1)
		if cells[0] == "result" {
			head = cells
		}
		if cells[0] == "gain_drift" && head != nil {
			if len(cells) != len(head) {
				t.Fatalf("%d cells under %d headings:\n%q\n%q", len(cells), len(head), head, cells)
			}
			if i := slices.Index(head, "Cp [CI]"); cells[i] != "—" {
				t.Errorf("gain_drift's Cp is %q, want —", cells[i])
			}
		}
	}
	// The trend marks the group beyond its limits (1500 in L7 against a
	// sigma of 20) and only that one.
	for _, l := range lines {
		if strings.HasPrefix(l, "    L7") && !strings.Contains(l, "*") {
			t.Errorf("L7 is beyond its limits but not marked: %q", l)
		}
	}
}

var (
	spaces  = regexp.MustCompile(` +`)
	cellSep = regexp.MustCompile(`  +`)
)

// The histogram's rows hold every value within the band plus margin once:
// their counts, under and over add up to n.
func TestWriteTextHistogramCounts(t *testing.T) {
	r := sample(t)
	var b bytes.Buffer
	r.WriteText(&b)
	_, section, _ := strings.Cut(b.String(), "\npost_offset [µV]")
	section, _, _ = strings.Cut(section, "\n\n")
	total := 0
	for _, l := range strings.Split(section, "\n") {
		if _, after, ok := strings.Cut(l, "│"); ok {
			f := strings.Fields(strings.ReplaceAll(after, "█", ""))
			if len(f) > 0 {
				var n int
				fmt.Sscan(f[0], &n)
				total += n
			}
		}
		var n int
		if _, after, ok := strings.Cut(l, ": "); ok && (strings.HasPrefix(l, "  below") || strings.HasPrefix(l, "  above")) {
			fmt.Sscan(after, &n)
			total += n
		}
	}
	if total != 5 {
		t.Errorf("histogram rows count %d values, want 5:\n%s", total, section)
	}
}

func TestWriteTextEmpty(t *testing.T) {
	nan := math.NaN()
	r := stats.Report{Ledger: "x.db", Yield: nan, FirstPassYield: nan, RetestRate: nan, FaultRate: nan}
	var b bytes.Buffer
	r.WriteText(&b)
	out := b.String()
	for _, want := range []string{"filter: none", "yield  —  (0 of 0 units)", "Failing limits", "no toleranced results"} {
		if !strings.Contains(out, want) {
			t.Errorf("text lacks %q:\n%s", want, out)
		}
	}
}

// A capable result fills few rows of the band's histogram: the values over
// their own range (DataHist) follow, so their shape shows; a result that
// fills the band does not get them.
func TestWriteTextDataHistogram(t *testing.T) {
	r := sample(t)
	xs := []float64{-3, -1, 0, 0.5, 1, 2, 2.5}
	s := result(t, "post_gain_error", "as_left", "ppm", ptr(-500), ptr(500), xs, []float64{42, 42, 42, 42, 42, 42, 42})
	s.DataHist = spc.Bin(xs, -4, 4, 8)
	r.Results = []stats.ResultStats{s, r.Results[0]}
	r.Results[1].DataHist = spc.Bin(r.Results[1].Values, -20, 30, 10)
	r.Pairs, r.Trends = nil, nil
	var b bytes.Buffer
	r.WriteText(&b)
	out := b.String()
	if n := strings.Count(out, "the same values over their own range"); n != 1 {
		t.Fatalf("the values over their own range shown %d times, want once (for post_gain_error):\n%s", n, out)
	}
	_, after, _ := strings.Cut(out, "the same values over their own range:\n")
	if !strings.HasPrefix(after, "  below −4: 0\n") || !strings.Contains(after, "  above 4: 0\n") {
		t.Errorf("data histogram:\n%s", after)
	}
}
