package whatif_test

import (
	"bytes"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"reflect"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	"trimline/instruments/units"
	"trimline/limits"
	"trimline/limits/limitstest"
	"trimline/reports/whatif"
	"trimline/sequencer"
	"trimline/sequencer/spc"
)

var generated = time.Date(2025, 3, 14, 9, 30, 0, 0, time.UTC)

func loadPair(t testing.TB) (old, new *limits.Set) {
	t.Helper()
	old, err := limits.LoadFile("../../sequences/brx200-limits.yaml", sequencer.FirstLayoutCatalog())
	if err != nil {
		t.Fatal(err)
	}
	new, err = limits.LoadFile("../../testdata/limits/brx200-rev7.yaml", sequencer.FirstLayoutCatalog())
	if err != nil {
		t.Fatal(err)
	}
	return old, new
}

// genUnits makes n stored units judged by old (Judge and Overall when full, else
// Verdicts, for speed); every 97th is of another product.
func genUnits(old *limits.Set, n int, seed uint64, full bool) []whatif.StoredUnit {
	r := rand.New(rand.NewPCG(seed, 1))
	t0 := time.Date(2025, 3, 1, 6, 0, 0, 0, time.UTC)
	us := make([]whatif.StoredUnit, n)
	for i := range us {
		vals := limitstest.Unit(r)
		u := whatif.StoredUnit{Serial: fmt.Sprintf("BRX%07d", i), RunID: fmt.Sprintf("run-%d", i),
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

func report(t testing.TB, n int) whatif.Report {
	old, new := loadPair(t)
	rep := whatif.Rejudge(old, new, genUnits(old, n, 11, false))
	if len(rep.Flips) == 0 || len(rep.Distributions) == 0 {
		t.Fatalf("report has %d flips, %d distributions; the test needs both", len(rep.Flips), len(rep.Distributions))
	}
	return rep
}

func render(t testing.TB, rep whatif.Report) []byte {
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
	render(t, whatif.Report{})
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
	rep := whatif.Report{
		Old: "a", New: "b", Units: 3,
		Before: whatif.VerdictCounts{Pass: 3}, After: whatif.VerdictCounts{Pass: 1, Fail: 2},
		Distributions: []whatif.Distribution{
			{Result: "empty", Unit: "uV", Invalid: 3, Hist: spc.Bin(nil, -1.5e-4, 1.5e-4, whatif.HistBins),
				New: []limits.Bound{{Limit: "l", Lower: f(-1e-4), Upper: f(1e-4)}}},
			{Result: "single", Unit: "%", N: 3, Min: 0.01, Max: 0.01, Hist: spc.Bin([]float64{0.01, 0.01, 0.01}, 0.0075, 0.025, whatif.HistBins),
				Old: []limits.Bound{{Limit: "l", Upper: f(0.02)}}, New: []limits.Bound{{Limit: "l", Upper: f(0.015)}}},
			// A band that leaves the bounds out (Rejudge's never does): they are
			// drawn off scale.
			{Result: "far", Unit: "weird-unit", N: 3, Min: 1, Max: 2, Hist: spc.Bin([]float64{1, 1.5, 2}, 0.75, 2.25, whatif.HistBins),
				Old: []limits.Bound{{Limit: "l", Lower: f(-100), Upper: f(100)}}, New: []limits.Bound{{Limit: "l", Lower: f(1.5), Upper: f(1e6)}}},
			{Result: "nobounds", N: 2, Min: -1, Max: 1, Hist: spc.Bin([]float64{-1, 1}, -1.5, 1.5, whatif.HistBins)},
			{Result: "nobins", N: 2, Min: -1, Max: 1, Hist: spc.Bin([]float64{-1, 1}, 0, 0, whatif.HistBins)},
		},
	}
	txt := pdfText(t, render(t, rep))
	if !strings.Contains(txt, "No valid values") || !strings.Contains(txt, "off scale") {
		t.Errorf("edge cases not marked:\n%s", txt)
	}
	render(t, whatif.Report{})
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

// TestWhatIfMatchesDirectLoop re-judges generated units with the rev 7 file and
// checks every number of the report against a plain loop over Judge and Overall.
func TestWhatIfMatchesDirectLoop(t *testing.T) {
	old, new := loadPair(t)
	units := genUnits(old, 4000, 11, true)
	units[5].OldVerdict = "" // an unknown recorded verdict: counted as other, never a flip
	rep := whatif.Rejudge(old, new, units)

	var before, after whatif.VerdictCounts
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
			c *whatif.VerdictCounts
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
		// The band holds every bound; the values are binned over it with
		// the ones outside it counted apart.
		hist := spc.Bin(vals, d.Hist.Lo, d.Hist.Hi, whatif.HistBins)
		if d.N != len(vals) || d.Invalid != invalid || d.Min != lo || d.Max != hi || !reflect.DeepEqual(d.Hist, hist) {
			t.Errorf("%s: N %d invalid %d [%g, %g] hist %+v\nwant %d %d [%g, %g] %+v (direct loop)", d.Result, d.N, d.Invalid, d.Min, d.Max, d.Hist,
				len(vals), invalid, lo, hi, hist)
		}
		for _, b := range append(slices.Clone(d.Old), d.New...) {
			for _, v := range []*float64{b.Lower, b.Upper} {
				if v != nil && (*v < d.Hist.Lo || *v > d.Hist.Hi) {
					t.Errorf("%s: bound %g outside the histogram's band [%g, %g]", d.Result, *v, d.Hist.Lo, d.Hist.Hi)
				}
			}
		}
	}
	po := rep.Distributions[2]
	if len(po.Old) != 1 || len(po.New) != 1 || *po.Old[0].Upper != 800e-6 || !within(*po.New[0].Lower, -600e-6, 1e-12) {
		t.Errorf("post_offset bounds old %+v new %+v, want ±800 µV → ±600 µV (hand-made pair)", po.Old, po.New)
	}
	// Hand-worked: the bounds span −800 … 800 µV, a quarter of that (400 µV)
	// beyond each.
	if !within(po.Hist.Lo, -1200e-6, 1e-12) || !within(po.Hist.Hi, 1200e-6, 1e-12) {
		t.Errorf("post_offset binned over [%g, %g], want [−1200, 1200] µV", po.Hist.Lo, po.Hist.Hi)
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
	rep := whatif.Rejudge(old, new, nil)
	if rep.Units != 0 || len(rep.Flips) != 0 || rep.After.Yield() != 0 {
		t.Errorf("empty report = %+v", rep)
	}
	var b bytes.Buffer
	rep.WriteText(&b) // must not panic
	if rep := whatif.Rejudge(nil, nil, genUnits(old, 3, 1, true)); rep.Units != 0 {
		t.Errorf("no new set: %d units judged", rep.Units)
	}
}

// BenchmarkWhatIf100k re-judges 100 000 generated BRX-200 units (the rev 6 demo
// file recorded, the hand-made rev 7 as the new set) per op.
func BenchmarkWhatIf100k(b *testing.B) {
	old, new := loadPair(b)
	units := genUnits(old, 100_000, 3, false)
	b.ReportAllocs()
	var rep whatif.Report
	for b.Loop() {
		rep = whatif.Rejudge(old, new, units)
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/float64(len(units)), "ns/unit")
	if rep.Units == 0 {
		b.Fatal("nothing judged")
	}
}

func within(got, want, rel float64) bool {
	return math.Abs(got-want) <= rel*math.Abs(want)
}

// Catalog is the union of what the stored runs of one product recorded; a
// result recorded in two units is an error naming both runs.
func TestCatalogFromStoredRuns(t *testing.T) {
	stored := []whatif.StoredUnit{
		{Serial: "OFX-0002", RunID: "run-2", Product: "OFX-10", Catalog: limits.Catalog{"zero_found": units.Volt}},
		{Serial: "OFX-0001", RunID: "run-1", Product: "ofx-10", Catalog: limits.Catalog{"post_noise": units.Volt}},
		{Serial: "BRX-0001", RunID: "run-0", Product: "BRX-200", Catalog: sequencer.FirstLayoutCatalog()},
	}
	cat, err := whatif.Catalog(stored, "OFX-10")
	if err != nil || len(cat) != 2 || cat["zero_found"] != units.Volt || cat["post_noise"] != units.Volt {
		t.Fatalf("Catalog = %v, %v; want zero_found and post_noise, both volts", cat, err)
	}
	if cat, err := whatif.Catalog(stored, "XYZ-1"); cat != nil || err != nil {
		t.Errorf("no runs of the product: %v, %v; want nil, nil", cat, err)
	}
	stored[1].Catalog["zero_found"] = units.Count
	_, err = whatif.Catalog(stored, "OFX-10")
	if err == nil || !strings.Contains(err.Error(), `"zero_found"`) || !strings.Contains(err.Error(), "run-2") || !strings.Contains(err.Error(), "run-1") {
		t.Errorf("a result recorded in two units: %v; want an error naming it and both runs", err)
	}
}
