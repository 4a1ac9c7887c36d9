package limits_test

import (
	"bytes"
	"fmt"
	"math"
	"math/rand/v2"
	"reflect"
	"strings"
	"testing"
	"time"

	"trimline/limits"
)

func loadPair(t testing.TB) (old, new *limits.Set) {
	t.Helper()
	old, err := limits.LoadFile("../sequences/brx200-limits.yaml", catalog)
	if err != nil {
		t.Fatal(detail(err))
	}
	new, err = limits.LoadFile("../testdata/limits/brx200-rev7.yaml", catalog)
	if err != nil {
		t.Fatal(detail(err))
	}
	return old, new
}

// genValues makes one BRX-200 unit's results in SI units, spread as a production
// line would give them (the demo file's comments: U(post_offset) ≈ 150 µV at k = 2,
// trim DACs of 4096 codes), with about 1 in 200 units carrying an invalid result.
func genValues(r *rand.Rand) map[string]limits.Value {
	inf := math.Inf(1)
	n := r.NormFloat64
	code := func(mid, sd float64) float64 { return math.Max(0, math.Min(4095, math.Round(mid+sd*n()))) }
	v := map[string]limits.Value{
		"pre_offset":        {V: 6e-3 * n(), Valid: true, U: 20e-6, K: 2, DOF: inf},
		"pre_gain_error":    {V: 6e-3 * n(), Valid: true, U: 50e-6, K: 2, DOF: inf},
		"pre_nonlinearity":  {V: math.Abs(5e-4 * n()), Valid: true},
		"offset_code":       {V: code(2048, 700), Valid: true},
		"gain_code":         {V: code(2048, 600), Valid: true},
		"post_offset":       {V: 250e-6 * n(), Valid: true, U: 150e-6, K: 2, DOF: inf},
		"post_gain_error":   {V: 20e-6 + 150e-6*n(), Valid: true, U: 40e-6, DOF: 12},
		"post_nonlinearity": {V: math.Abs(30e-6 * n()), Valid: true, U: 5e-6, DOF: 12},
		"post_max_error":    {V: 300e-6 + math.Abs(200e-6*n()), Valid: true, U: 60e-6, DOF: 12},
		"post_noise":        {V: 20e-6 + math.Abs(10e-6*n()), Valid: true, Std: 2e-6, DOF: 12},
	}
	if r.IntN(200) == 0 {
		names := []string{"post_offset", "post_gain_error", "post_noise", "offset_code"}
		k := names[r.IntN(len(names))]
		v[k] = limits.Value{V: math.NaN(), Why: "meter overload"}
	}
	return v
}

// genUnits makes n stored units judged by old (Judge and Overall when full, else
// Verdicts, for speed); every 97th is of another product.
func genUnits(old *limits.Set, n int, seed uint64, full bool) []limits.StoredUnit {
	r := rand.New(rand.NewPCG(seed, 1))
	t0 := time.Date(2025, 3, 1, 6, 0, 0, 0, time.UTC)
	us := make([]limits.StoredUnit, n)
	for i := range us {
		vals := genValues(r)
		u := limits.StoredUnit{Serial: fmt.Sprintf("BRX%07d", i), RunID: fmt.Sprintf("run-%d", i),
			Finished: t0.Add(time.Duration(i) * 40 * time.Second), Product: "BRX-200", Values: vals}
		if full {
			u.OldVerdict = old.Overall(old.Judge(vals))
		} else {
			u.OldVerdict = old.Verdicts(vals, nil)
		}
		if i%97 == 96 {
			u.Product = "BRX-100"
		}
		us[i] = u
	}
	return us
}

// TestVerdictsMatchesJudge: Verdicts gives, limit by limit and overall, the
// verdicts Overall gives for Judge's outcomes, on generated units and on edge cases
// (invalid values, unusable uncertainties, values on the limits) under several
// policies.
func TestVerdictsMatchesJudge(t *testing.T) {
	old, new := loadPair(t)
	refuse := setOf(t, offsetLimit("offset", "uV", "tolerance: {lower: -50, upper: 50}", "rule: guarded", "statements: non-binary")+
		"decision: {tur_policy: refuse, conditional_pass: ship, conditional_fail: review}\n")
	sets := []*limits.Set{old, new, loadTol(t), loadGood(t), refuse}
	r := rand.New(rand.NewPCG(7, 7))
	var cases []map[string]limits.Value
	for range 3000 {
		cases = append(cases, genValues(r))
	}
	edge := []limits.Value{
		{V: math.NaN(), Valid: true}, {V: math.Inf(1), Valid: true}, {V: 1e-5}, {V: 1e-5, Valid: true, U: -1},
		{V: 1e-5, Valid: true, U: math.NaN()}, {V: 1e-5, Valid: true, U: math.MaxFloat64, K: 2},
		{V: 50e-6, Valid: true, U: 8e-6, K: 2}, {V: 42e-6, Valid: true, U: 8e-6, K: 2}, {V: -58e-6, Valid: true, U: 8e-6, K: 2},
		{V: 800e-6, Valid: true}, {V: 45e-6, Valid: true, U: 30e-6, K: 2}, {V: 0, Valid: true, U: 30e-6, K: 2},
		{V: 1e308, Valid: true}, {V: 1e-5, Valid: true, Std: 1e-6, DOF: 3},
	}
	for _, e := range edge {
		for _, name := range []string{"post_offset", "post_noise", "gain_code", "offset_code", "post_gain_error"} {
			c := genValues(r)
			c[name] = e
			cases = append(cases, c)
		}
	}
	for si, s := range sets {
		vs := make([]string, len(s.Limits))
		for ci, c := range cases {
			outs := s.Judge(c)
			want := s.Overall(outs)
			if got := s.Verdicts(c, vs); got != want {
				t.Fatalf("set %d case %d: Verdicts = %s, Overall(Judge) = %s (contract)", si, ci, got, want)
			}
			for j, o := range outs {
				if w := s.Overall([]limits.Outcome{o}); vs[j] != w {
					t.Fatalf("set %d case %d limit %q: Verdicts %s, Judge %s (%s) (contract)", si, ci, o.Name, vs[j], w, o.Reason)
				}
			}
		}
	}
	if got := new.Verdicts(cases[0], nil); got != new.Overall(new.Judge(cases[0])) {
		t.Errorf("Verdicts with nil verdicts = %s", got)
	}
}

// TestWhatIfMatchesDirectLoop re-judges generated units with the rev 7 file and
// checks every number of the report against a plain loop over Judge and Overall.
func TestWhatIfMatchesDirectLoop(t *testing.T) {
	old, new := loadPair(t)
	units := genUnits(old, 4000, 11, true)
	units[5].OldVerdict = "" // an unknown recorded verdict: counted as other, never a flip
	rep := limits.WhatIf(old, new, units)

	var before, after limits.VerdictCounts
	var judged, skipped int
	type flip struct{ serial, old, new string }
	var flips []flip
	fails := map[string][2]int{}
	for _, u := range units {
		if u.Product != new.Product {
			skipped++
			continue
		}
		judged++
		outs := new.Judge(u.Values)
		v := new.Overall(outs)
		for _, c := range []struct {
			c *limits.VerdictCounts
			v string
		}{{&before, u.OldVerdict}, {&after, v}} {
			switch c.v {
			case "pass":
				c.c.Pass++
			case "review":
				c.c.Review++
			case "fail":
				c.c.Fail++
			default:
				c.c.Other++
			}
		}
		if u.OldVerdict != "" && u.OldVerdict != v {
			flips = append(flips, flip{u.Serial, u.OldVerdict, v})
		}
		for _, o := range outs {
			c := fails[o.Name]
			switch new.Overall([]limits.Outcome{o}) {
			case "fail":
				c[0]++
			case "review":
				c[1]++
			}
			fails[o.Name] = c
		}
	}
	if rep.Units != judged || rep.Skipped != skipped || rep.Before != before || rep.After != after {
		t.Fatalf("units %d skipped %d before %+v after %+v\nwant %d %d %+v %+v (direct loop)", rep.Units, rep.Skipped, rep.Before, rep.After, judged, skipped, before, after)
	}
	if len(rep.Flips) != len(flips) || len(flips) == 0 {
		t.Fatalf("%d flips, want %d (direct loop; the rev 7 file must flip some)", len(rep.Flips), len(flips))
	}
	for i, f := range flips {
		g := rep.Flips[i]
		if g.Serial != f.serial || g.Old != f.old || g.New != f.new {
			t.Errorf("flip %d = %s %s→%s, want %s %s→%s (direct loop)", i, g.Serial, g.Old, g.New, f.serial, f.old, f.new)
		}
		if len(g.Limits) == 0 {
			t.Errorf("flip %d (%s %s→%s) names no limit", i, g.Serial, g.Old, g.New)
		}
	}
	var toPass, fromPass int
	for _, f := range rep.Flips {
		switch {
		case f.New == "pass":
			toPass++
		case f.Old == "pass":
			fromPass++
		}
	}
	if toPass == 0 || fromPass == 0 {
		t.Errorf("flips to pass %d, from pass %d: the generated units should flip both ways (rev 7 loosens and tightens)", toPass, fromPass)
	}
	if len(rep.Pareto) != len(new.Limits) {
		t.Fatalf("Pareto has %d limits, want %d", len(rep.Pareto), len(new.Limits))
	}
	for i, c := range rep.Pareto {
		if w := fails[c.Limit]; c.Fail != w[0] || c.Review != w[1] {
			t.Errorf("Pareto %q: %d fail %d review, want %d %d (direct loop)", c.Limit, c.Fail, c.Review, w[0], w[1])
		}
		if i > 0 && (c.Fail > rep.Pareto[i-1].Fail) {
			t.Errorf("Pareto not sorted by failures at %d", i)
		}
	}

	// Distributions: every result with a toleranced limit, or a simple expression, in
	// either file.
	var names []string
	for _, d := range rep.Distributions {
		names = append(names, d.Result)
	}
	wantNames := []string{"pre_offset", "pre_gain_error", "post_offset", "post_gain_error", "post_nonlinearity", "post_max_error", "post_noise", "pre_nonlinearity"}
	if !reflect.DeepEqual(names, wantNames) {
		t.Fatalf("distributions of %v, want %v (rev 7's order, then rev 6's)", names, wantNames)
	}
	for _, d := range rep.Distributions {
		lo, hi := math.Inf(1), math.Inf(-1)
		var vals []float64
		invalid := 0
		for _, u := range units {
			if u.Product != new.Product {
				continue
			}
			v, ok := u.Values[d.Result]
			if !ok || !v.Valid || math.IsNaN(v.V) {
				invalid++
				continue
			}
			vals = append(vals, v.V)
			lo, hi = math.Min(lo, v.V), math.Max(hi, v.V)
		}
		bins := make([]int, limits.HistBins)
		for _, v := range vals {
			k := int(math.Floor((v - lo) / (hi - lo) * limits.HistBins))
			bins[min(k, limits.HistBins-1)]++
		}
		if d.N != len(vals) || d.Invalid != invalid || d.Min != lo || d.Max != hi || !reflect.DeepEqual(d.Bins, bins) {
			t.Errorf("%s: N %d invalid %d [%g, %g] bins %v\nwant %d %d [%g, %g] %v (direct loop)", d.Result, d.N, d.Invalid, d.Min, d.Max, d.Bins,
				len(vals), invalid, lo, hi, bins)
		}
	}
	po := rep.Distributions[2]
	if len(po.Old) != 1 || len(po.New) != 1 || *po.Old[0].Upper != 800e-6 || !within(*po.New[0].Lower, -600e-6, 1e-12) {
		t.Errorf("post_offset bounds old %+v new %+v, want ±800 µV → ±600 µV (hand-made pair)", po.Old, po.New)
	}

	var b bytes.Buffer
	rep.WriteText(&b)
	out := b.String()
	for _, want := range []string{
		fmt.Sprintf("Units re-judged: %d (%d of another product skipped)", judged, skipped),
		"Yield before: ", "Yield after:  ", "pass → review/fail: ", "review/fail → pass: ",
		"post_offset: ", "◀ new lower −600 µV (offset after trim)", "◀ old upper 800 µV (offset after trim)", "█",
	} {
		if !strings.Contains(out, want) {
			t.Errorf("WriteText lacks %q:\n%s", want, out)
		}
	}
	if testing.Verbose() {
		t.Log("\n" + out)
	}
}

func TestWhatIfEmpty(t *testing.T) {
	old, new := loadPair(t)
	rep := limits.WhatIf(old, new, nil)
	if rep.Units != 0 || len(rep.Flips) != 0 || rep.After.Yield() != 0 {
		t.Errorf("empty report = %+v", rep)
	}
	var b bytes.Buffer
	rep.WriteText(&b) // must not panic
	if rep := limits.WhatIf(nil, nil, genUnits(old, 3, 1, true)); rep.Units != 0 {
		t.Errorf("no new set: %d units judged", rep.Units)
	}
}

// BenchmarkWhatIf100k re-judges 100 000 generated BRX-200 units (the rev 6 demo
// file recorded, the hand-made rev 7 as the new set) per op.
func BenchmarkWhatIf100k(b *testing.B) {
	old, new := loadPair(b)
	units := genUnits(old, 100_000, 3, false)
	b.ReportAllocs()
	var rep limits.WhatIfReport
	for b.Loop() {
		rep = limits.WhatIf(old, new, units)
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/float64(len(units)), "ns/unit")
	if rep.Units == 0 {
		b.Fatal("nothing judged")
	}
}

// BenchmarkVerdicts judges the unit of BenchmarkJudgeToleranced with Verdicts:
// the same verdicts without statements, reasons or probabilities.
func BenchmarkVerdicts(b *testing.B) {
	set, err := limits.LoadFile("../sequences/brx200-limits.yaml", catalog)
	if err != nil {
		b.Fatal(detail(err))
	}
	inf := math.Inf(1)
	r := map[string]limits.Value{
		"pre_offset":        {V: 3.1e-3, Valid: true, U: 20e-6, K: 2, DOF: inf},
		"pre_gain_error":    {V: 0.013, Valid: true, U: 50e-6, K: 2, DOF: inf},
		"pre_nonlinearity":  {V: 0.001, Valid: true},
		"offset_code":       {V: 512, Valid: true},
		"gain_code":         {V: 2048, Valid: true},
		"post_offset":       {V: 1.23e-5, Valid: true, U: 8e-6, K: 2, DOF: inf},
		"post_gain_error":   {V: 12e-6, Valid: true, U: 6e-6, DOF: 12},
		"post_nonlinearity": {V: 5e-5, Valid: true, U: 5e-6, DOF: 12},
		"post_max_error":    {V: 1.2e-4, Valid: true, U: 30e-6, DOF: 12},
		"post_noise":        {V: 8e-6, Valid: true, Std: 1e-6, DOF: 12},
	}
	vs := make([]string, len(set.Limits))
	b.ReportAllocs()
	for b.Loop() {
		if set.Verdicts(r, vs) != limits.VerdictPass {
			b.Fatal("demo unit did not pass")
		}
	}
}
