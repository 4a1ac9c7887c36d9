package main

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"trimline/reports/stats"
	"trimline/sequencer/spc"
)

// TestStats runs stats on one demo ledger: 25 units of lot L7 (seed 8 fails
// some), then the first 5 retested as lot L8.
func TestStats(t *testing.T) {
	if testing.Short() {
		t.Skip("runs the demo with 30 units")
	}
	dir := t.TempDir()
	if code, out, errOut := runCLI(t, "demo", "--out", dir, "--units", "25", "--seed", "8", "--lot", "L7"); code != exitFail && code != exitPass {
		t.Fatalf("demo: exit %d\n%s%s", code, out, errOut)
	}
	if code, out, errOut := runCLI(t, "demo", "--out", dir, "--units", "5", "--seed", "8", "--lot", "L8", "--retest"); code != exitFail && code != exitPass {
		t.Fatalf("demo --retest: exit %d\n%s%s", code, out, errOut)
	}
	led := filepath.Join(dir, "ledger.db")

	var report statsOut
	t.Run("json", func(t *testing.T) {
		code, out, errOut := runCLI(t, "stats", "--ledger", led, "--json")
		if code != exitPass {
			t.Fatalf("exit %d\n%s", code, errOut)
		}
		lines := jsonLines(t, out)
		if len(lines) != 1 {
			t.Fatalf("%d lines, want one object", len(lines))
		}
		decodeStrict(t, lines[0], &report)
		if report.Kind != kindStats || report.Version != jsonVersion || report.Ledger != led {
			t.Errorf("kind %q version %d ledger %q", report.Kind, report.Version, report.Ledger)
		}
		if report.Units != 25 || report.Counts.Units != 25 || report.Counts.Retested != 5 {
			t.Errorf("units %d, counts %+v; want 25 units, 5 retested", report.Units, report.Counts)
		}
		for name, v := range map[string]*float64{"yield": report.Yield, "first_pass_yield": report.FirstPassYield,
			"retest_rate": report.RetestRate, "fault_rate": report.FaultRate} {
			if v == nil || *v < 0 || *v > 1 {
				t.Errorf("%s = %v, want a fraction 0–1", name, v)
			}
		}
		if *report.RetestRate != 0.2 {
			t.Errorf("retest rate %v, want 5/25", *report.RetestRate)
		}
		if c := report.Counts; *report.Yield != float64(c.Passed)/float64(c.Units) || c.Passed+c.Failed+c.Held != c.Units {
			t.Errorf("yield %v from counts %+v", *report.Yield, c)
		}
		if len(report.Population) == 0 || len(report.Results) == 0 {
			t.Fatalf("no population or no results:\n%s", out)
		}
		for _, r := range report.Results {
			if r.N < 2 || r.Unit == "" || r.Mean == nil || r.Cpk == nil || r.CpkCI[0] == nil || r.Ppk == nil {
				t.Errorf("result %s: n %d unit %q, a number missing: %s", r.Name, r.N, r.Unit, lines[0])
			}
			if (r.Lower == nil || r.Upper == nil) && (r.Cp != nil || r.Pp != nil) {
				t.Errorf("result %s is one-sided but has Cp %v, Pp %v; want null", r.Name, r.Cp, r.Pp)
			}
			if r.Cpk != nil && r.CpkCI[0] != nil && !(*r.CpkCI[0] <= *r.Cpk && *r.Cpk <= *r.CpkCI[1]) {
				t.Errorf("result %s: Cpk %v outside its interval [%v, %v]", r.Name, *r.Cpk, *r.CpkCI[0], *r.CpkCI[1])
			}
			n := r.Histogram.Under + r.Histogram.Over
			for _, c := range r.Histogram.Counts {
				n += c
			}
			if n != r.N {
				t.Errorf("result %s: the histogram counts %d values, n is %d", r.Name, n, r.N)
			}
		}
		// JSON has no NaN: a number that cannot be computed is null, and a
		// fault rate of no faults is 0, not null.
		if strings.Contains(out, "NaN") || *report.FaultRate != 0 {
			t.Errorf("NaN or a fault rate: %s", out)
		}
	})

	t.Run("text", func(t *testing.T) {
		code, out, errOut := runCLI(t, "stats", "--ledger", led, "--by", "lot")
		if code != exitPass {
			t.Fatalf("exit %d\n%s", code, errOut)
		}
		t.Log("\n" + out)
		flat := strings.Join(strings.Fields(out), " ")
		for _, want := range []string{"Quality numbers of " + led, "filter: none", "Population",
			"retest rate 20.0 % (5 of 25 units)", "first-pass yield", "fault rate 0.0 % (0 of 30 runs)",
			"Capability of the toleranced results", "Cpk [CI]", "Pre-trim beside post-trim", "below ", "above ",
			"Trends by lot", "L7", "L8"} {
			if !strings.Contains(flat, want) {
				t.Errorf("text lacks %q", want)
			}
		}
		if strings.Contains(out, "NaN") {
			t.Error("text shows NaN")
		}
	})

	t.Run("csv", func(t *testing.T) {
		code, out, errOut := runCLI(t, "stats", "--ledger", led, "--csv")
		if code != exitPass {
			t.Fatalf("exit %d\n%s", code, errOut)
		}
		recs, err := csv.NewReader(strings.NewReader(out)).ReadAll()
		if err != nil {
			t.Fatalf("%v\n%s", err, out)
		}
		if len(recs) != 1+len(report.Results) || recs[0][0] != "name" {
			t.Fatalf("%d rows, want a header and one per result (%d):\n%s", len(recs), len(report.Results), out)
		}
	})

	t.Run("values", func(t *testing.T) {
		values := filepath.Join(t.TempDir(), "units.csv")
		code, out, errOut := runCLI(t, "stats", "--ledger", led, "--values", values)
		if code != exitPass || !strings.Contains(out, "values per unit: "+values+" (25 units)") {
			t.Fatalf("exit %d\n%s%s", code, out, errOut)
		}
		b, err := os.ReadFile(values)
		if err != nil {
			t.Fatal(err)
		}
		recs, err := csv.NewReader(bytes.NewReader(b)).ReadAll()
		if err != nil {
			t.Fatal(err)
		}
		if len(recs) != 1+25 {
			t.Fatalf("%d rows, want a header and one per unit", len(recs))
		}
		head := strings.Join(recs[0], ",")
		if !strings.HasPrefix(head, "serial,") || !strings.Contains(head, " U [") {
			t.Errorf("header %s", head)
		}
	})

	t.Run("pdf", func(t *testing.T) {
		pdf := filepath.Join(t.TempDir(), "lot.pdf")
		code, out, errOut := runCLI(t, "stats", "--ledger", led, "--by", "lot", "--pdf", pdf)
		if code != exitPass || !strings.Contains(out, "lot report with plots: "+pdf) {
			t.Fatalf("exit %d\n%s%s", code, out, errOut)
		}
		if b, err := os.ReadFile(pdf); err != nil || !bytes.HasPrefix(b, []byte("%PDF-")) {
			t.Fatalf("no PDF at %s: %v", pdf, err)
		}
	})

	t.Run("lot", func(t *testing.T) {
		code, out, errOut := runCLI(t, "stats", "--ledger", led, "--lot", "l8", "--json")
		if code != exitPass {
			t.Fatalf("exit %d\n%s", code, errOut)
		}
		var r statsOut
		decodeStrict(t, out, &r)
		// Only the retests are of lot L8: each is its unit's only attempt
		// within the filter, and a retest: the unit was retested and did not
		// pass first time, whatever its first attempt in lot L7 said.
		if r.Units != 5 || r.Counts.Retested != 5 || r.Counts.FirstPass != 0 || r.Filter.Lot != "l8" {
			t.Errorf("--lot l8: units %d, counts %+v, filter %+v", r.Units, r.Counts, r.Filter)
		}
	})

	t.Run("nothing matches", func(t *testing.T) {
		code, out, errOut := runCLI(t, "stats", "--ledger", led, "--since", "2099-01-01", "--lot", "L7")
		if code != exitUsage || out != "" {
			t.Fatalf("exit %d, stdout %q", code, out)
		}
		for _, want := range []string{led, "--since 2099-01-01", "--lot L7", "nothing to report"} {
			if !strings.Contains(errOut, want) {
				t.Errorf("error lacks %q: %s", want, errOut)
			}
		}
		code, _, errOut = runCLI(t, "stats", "--ledger", led, "--lot", "none", "--json")
		var e errorOut
		decodeStrict(t, errOut, &e)
		if code != exitUsage || e.ExitCode != exitUsage || e.Command != "stats" {
			t.Errorf("--json: exit %d %+v", code, e)
		}
	})
}

// Usage errors say what was expected; a missing ledger is not created.
func TestStatsUsage(t *testing.T) {
	dir := t.TempDir()
	missing := filepath.Join(dir, "none.db")
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"stats"}, "--ledger DB"},
		{[]string{"stats", "ledger.db"}, "takes no arguments"},
		{[]string{"stats", "--ledger", missing, "--since", "yesterday"}, "YYYY-MM-DD"},
		{[]string{"stats", "--ledger", missing, "--until", "2026-13-01"}, "RFC 3339"},
		{[]string{"stats", "--ledger", missing, "--since", "2026-12-03", "--until", "2026-12-01"}, "not before --until"},
		{[]string{"stats", "--ledger", missing, "--by", "week"}, "day, lot or station"},
		{[]string{"stats", "--ledger", missing, "--json", "--csv"}, "give one"},
		{[]string{"stats", "--ledger", missing}, "no ledger at " + missing},
	} {
		code, out, errOut := runCLI(t, c.args...)
		if code != exitUsage || out != "" || !strings.Contains(errOut, c.want) {
			t.Errorf("%q: exit %d, stderr %q, want exit 2 and %q", c.args, code, errOut, c.want)
		}
	}
	if _, err := os.Stat(missing); !os.IsNotExist(err) {
		t.Errorf("stats created the missing ledger %s (%v)", missing, err)
	}
	code, _, errOut := runCLI(t, "stats", "--ledger", missing, "--by", "week", "--json")
	var e errorOut
	decodeStrict(t, errOut, &e)
	if code != exitUsage || !strings.Contains(e.Error, "--by") {
		t.Errorf("--json usage error: exit %d %+v", code, e)
	}
}

// parseDay: a day counts whole, --until to the end of it; a time is a moment.
func TestStatsParseDay(t *testing.T) {
	for _, c := range []struct {
		s    string
		end  bool
		want string
	}{
		{"2026-12-02", false, "2026-12-02T00:00:00Z"},
		{"2026-12-02", true, "2026-12-03T00:00:00Z"},
		{"2026-12-02T14:30:00+01:00", true, "2026-12-02T13:30:00Z"},
		{"2026-12-02T14:30:00.5Z", false, "2026-12-02T14:30:00.5Z"},
	} {
		got, err := parseDay("--x", c.s, c.end)
		if b, _ := json.Marshal(got); err != nil || string(b) != `"`+c.want+`"` {
			t.Errorf("parseDay(%q, %v) = %s, %v; want %s", c.s, c.end, b, err, c.want)
		}
	}
}

// A number that cannot be computed is null in the JSON: the rates of a
// report with no units, the Cp of a one-sided tolerance, the sd of a group
// of one; and the object decodes into statsOut with unknown fields refused.
func TestStatsJSONNull(t *testing.T) {
	nan := math.NaN()
	upper := 50.0
	r := stats.Report{Ledger: "x.db", By: stats.ByLot, Yield: nan, FirstPassYield: nan, RetestRate: nan, FaultRate: 1,
		Counts: stats.Counts{Runs: 2, Faults: 2},
		Results: []stats.ResultStats{{Name: "gain_drift", Unit: "ppm", Upper: &upper, N: 2, Mean: 3, SDWithin: 1, SDOverall: 1.5,
			Cp: nan, CpCI: [2]float64{nan, nan}, Cpk: 10.6, CpkCI: [2]float64{4, 17}, Pp: nan, Ppk: 10.4, FractionOutside: 0, MeanU: nan,
			Hist: spc.Histogram{Lo: 0, Hi: 60, Counts: []int{2, 0}}}},
		Trends: []stats.Trend{{Result: 0, By: stats.ByLot, Groups: []stats.Group{{Key: "L1", N: 1, Mean: 3, SD: nan}},
			Means:   spc.Chart{Center: 3, Sigma: 1, Points: []spc.Point{{Value: 3, UCL: 6, LCL: 0}}},
			Spreads: spc.Chart{Sigma: 1, Points: []spc.Point{{Value: nan, UCL: nan, LCL: nan}}}}},
	}
	var b bytes.Buffer
	writeJSON(&b, newStatsOut(r))
	var out statsOut
	decodeStrict(t, b.String(), &out)
	if out.Yield != nil || out.FirstPassYield != nil || out.RetestRate != nil || out.FaultRate == nil || *out.FaultRate != 1 {
		t.Errorf("rates: %s", b.String())
	}
	res := out.Results[0]
	if res.Cp != nil || res.CpCI[0] != nil || res.Pp != nil || res.MeanU != nil || res.Lower != nil || *res.Upper != 50 || *res.Cpk != 10.6 {
		t.Errorf("result: %s", b.String())
	}
	if g := out.Trends[0].Groups[0]; g.SD != nil || g.SDLimits[0] != nil || *g.MeanLimits[1] != 6 || out.Trends[0].Result != "gain_drift" {
		t.Errorf("trend: %s", b.String())
	}
	if !strings.Contains(b.String(), `"cp":null`) || !strings.Contains(b.String(), `"pareto":[]`) {
		t.Errorf("want null for a missing number and [] for an empty list: %s", b.String())
	}
}
