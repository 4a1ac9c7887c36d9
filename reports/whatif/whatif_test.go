package whatif_test

import (
	"bytes"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"trimline/limits"
	"trimline/reports/whatif"
	"trimline/sequencer"
)

var generated = time.Date(2025, 3, 14, 9, 30, 0, 0, time.UTC)

func loadPair(t testing.TB) (old, new *limits.Set) {
	t.Helper()
	old, err := limits.LoadFile("../../sequences/brx200-limits.yaml", sequencer.ResultCatalog)
	if err != nil {
		t.Fatal(err)
	}
	new, err = limits.LoadFile("../../testdata/limits/brx200-rev7.yaml", sequencer.ResultCatalog)
	if err != nil {
		t.Fatal(err)
	}
	return old, new
}

// genValues makes one BRX-200 unit's results in SI units (as limits/whatif_test.go
// does), with about 1 in 200 units carrying an invalid result.
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

func genUnits(old *limits.Set, n int, seed uint64) []limits.StoredUnit {
	r := rand.New(rand.NewPCG(seed, 1))
	t0 := time.Date(2025, 3, 1, 6, 0, 0, 0, time.UTC)
	us := make([]limits.StoredUnit, n)
	for i := range us {
		vals := genValues(r)
		u := limits.StoredUnit{Serial: fmt.Sprintf("BRX%07d", i), RunID: fmt.Sprintf("run-%d", i),
			Finished: t0.Add(time.Duration(i) * 40 * time.Second), Product: "BRX-200", Values: vals,
			OldVerdict: old.Verdicts(vals, nil)}
		if i%97 == 96 {
			u.Product = "BRX-100"
		}
		us[i] = u
	}
	return us
}

func report(t testing.TB, n int) limits.WhatIfReport {
	old, new := loadPair(t)
	rep := limits.WhatIf(old, new, genUnits(old, n, 11))
	if len(rep.Flips) == 0 || len(rep.Distributions) == 0 {
		t.Fatalf("report has %d flips, %d distributions; the test needs both", len(rep.Flips), len(rep.Distributions))
	}
	return rep
}

func render(t testing.TB, rep limits.WhatIfReport) []byte {
	t.Helper()
	var b bytes.Buffer
	if err := whatif.Write(&b, rep, generated); err != nil {
		t.Fatal(err)
	}
	if !bytes.HasPrefix(b.Bytes(), []byte("%PDF-")) {
		t.Fatalf("output is not a PDF: %q", b.Bytes()[:min(16, b.Len())])
	}
	return b.Bytes()
}

func pdfText(t *testing.T, pdf []byte) string {
	t.Helper()
	if _, err := exec.LookPath("pdftotext"); err != nil {
		t.Skip("pdftotext not installed")
	}
	dir := t.TempDir()
	p := filepath.Join(dir, "r.pdf")
	if err := os.WriteFile(p, pdf, 0o644); err != nil {
		t.Fatal(err)
	}
	out, err := exec.Command("pdftotext", "-layout", p, "-").Output()
	if err != nil {
		t.Fatalf("pdftotext: %v", err)
	}
	return string(out)
}

func pct(f float64) string { return strconv.FormatFloat(f*100, 'f', 2, 64) + " %" }

func TestDeterministic(t *testing.T) {
	rep := report(t, 500)
	a, b := render(t, rep), render(t, rep)
	if !bytes.Equal(a, b) {
		t.Fatal("two renderings of the same report differ")
	}
	// A third after rendering something else: no shared state (fonts) leaks.
	render(t, limits.WhatIfReport{})
	if c := render(t, rep); !bytes.Equal(a, c) {
		t.Fatal("rendering differs after another document")
	}
}

func TestContent(t *testing.T) {
	rep := report(t, 500)
	txt := pdfText(t, render(t, rep))
	for _, want := range []string{
		"What-if re-judging", "Yield before", "Yield after",
		pct(rep.Before.Yield()), pct(rep.After.Yield()),
		rep.Flips[0].Serial, rep.Flips[len(rep.Flips)-1].Serial,
		"BRX-200 end-of-line limits", "2025-03-14 09:30 UTC",
		fmt.Sprintf("%d re-judged", rep.Units),
		rep.Distributions[0].Result,
	} {
		if !strings.Contains(txt, want) {
			t.Errorf("PDF text lacks %q", want)
		}
	}
	if pct(rep.Before.Yield()) == pct(rep.After.Yield()) {
		t.Errorf("yields before and after are equal (%s): the test shows nothing", pct(rep.After.Yield()))
	}
}

// TestManyFlips caps the table at MaxFlipRows with a closing count.
func TestManyFlips(t *testing.T) {
	rep := report(t, 500)
	base := rep.Flips[0]
	rep.Flips = nil
	for i := range whatif.MaxFlipRows + 37 {
		f := base
		f.Serial = fmt.Sprintf("X%05d", i)
		rep.Flips = append(rep.Flips, f)
	}
	txt := pdfText(t, render(t, rep))
	if !strings.Contains(txt, "… and 37 more") {
		t.Error(`no "… and 37 more" line`)
	}
	if !strings.Contains(txt, fmt.Sprintf("X%05d", whatif.MaxFlipRows-1)) || strings.Contains(txt, fmt.Sprintf("X%05d", whatif.MaxFlipRows)) {
		t.Errorf("table does not stop after %d rows", whatif.MaxFlipRows)
	}
}

// TestEdgeCases renders empty distributions, a single value, bounds far outside
// the data and an empty report without error.
func TestEdgeCases(t *testing.T) {
	f := func(v float64) *float64 { return &v }
	rep := limits.WhatIfReport{
		Old: "a", New: "b", Units: 3,
		Before: limits.VerdictCounts{Pass: 3}, After: limits.VerdictCounts{Pass: 1, Fail: 2},
		Distributions: []limits.Distribution{
			{Result: "empty", Unit: "uV", Invalid: 3, Bins: make([]int, limits.HistBins),
				New: []limits.Bound{{Limit: "l", Lower: f(-1e-4), Upper: f(1e-4)}}},
			{Result: "single", Unit: "%", N: 3, Min: 0.01, Max: 0.01, Bins: append([]int{3}, make([]int, limits.HistBins-1)...),
				Old: []limits.Bound{{Limit: "l", Upper: f(0.02)}}, New: []limits.Bound{{Limit: "l", Upper: f(0.015)}}},
			{Result: "far", Unit: "weird-unit", N: 3, Min: 1, Max: 2, Bins: append([]int{1, 2}, make([]int, limits.HistBins-2)...),
				Old: []limits.Bound{{Limit: "l", Lower: f(-100), Upper: f(100)}}, New: []limits.Bound{{Limit: "l", Lower: f(1.5), Upper: f(1e6)}}},
			{Result: "nobounds", N: 2, Min: -1, Max: 1, Bins: append([]int{1}, append(make([]int, limits.HistBins-2), 1)...)},
		},
	}
	txt := pdfText(t, render(t, rep))
	if !strings.Contains(txt, "No valid values") || !strings.Contains(txt, "off scale") {
		t.Errorf("edge cases not marked:\n%s", txt)
	}
	render(t, limits.WhatIfReport{})
}

func TestWriteFile(t *testing.T) {
	rep := report(t, 300)
	dir := t.TempDir()
	p := filepath.Join(dir, "whatif.pdf")
	if err := whatif.WriteFile(p, rep, generated); err != nil {
		t.Fatal(err)
	}
	got, err := os.ReadFile(p)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(got, render(t, rep)) {
		t.Error("WriteFile wrote other bytes than Write")
	}
	ents, _ := os.ReadDir(dir)
	if len(ents) != 1 {
		t.Errorf("directory holds %d entries, want the PDF only", len(ents))
	}
	if out := os.Getenv("WHATIF_OUT"); out != "" { // keep a copy to look at
		if err := whatif.WriteFile(out, rep, generated); err != nil {
			t.Error(err)
		}
	}
}
