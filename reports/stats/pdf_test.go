package stats_test

import (
	"bytes"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"trimline/reports/stats"
	"trimline/sequencer/spc"
)

// lotReport is a synthetic lot report (the numbers are made up, not
// computed): two lots, a pre-trim and a post-trim offset with one outlier
// beyond the band, a one-sided noise result, a Pareto and a trend whose s
// chart has a group of one.
func lotReport(t testing.TB) stats.Report {
	t.Helper()
	f := func(v float64) *float64 { return &v }
	gen := time.Date(2026, 12, 2, 20, 0, 0, 0, time.UTC)
	pre := stats.ResultStats{Name: "pre_offset", Result: "pre_offset", Limit: "untrimmed offset in range", Stage: "as_found",
		Quantity: "offset", Unit: "mV", Lower: f(-20), Upper: f(20), N: 198, Mean: 0.8, SDWithin: 4.1, SDOverall: 4.3,
		Min: -11.2, Max: 12.5, Cp: 1.63, Cpk: 1.56, Pp: 1.55, Ppk: 1.49, CpCI: [2]float64{1.47, 1.79}, CpkCI: [2]float64{1.40, 1.72},
		FractionOutside: 4.1e-6, MeanU: 0.012}
	post := stats.ResultStats{Name: "post_offset", Result: "post_offset", Limit: "offset after trim", Stage: "as_left",
		Quantity: "offset", Unit: "uV", Lower: f(-800), Upper: f(800), N: 198, Invalid: 2, Mean: -12.5, SDWithin: 61.7, SDOverall: 902.1,
		Min: -12384.1, Max: 163.6, Cp: 4.32, Cpk: 4.25, Pp: 0.296, Ppk: 0.291, CpCI: [2]float64{3.9, 4.7}, CpkCI: [2]float64{3.8, 4.7},
		FractionOutside: 0.378, MeanU: 9.6}
	noise := stats.ResultStats{Name: "post_noise", Result: "post_noise", Limit: "output noise", Stage: "as_left", Unit: "uV",
		Upper: f(60), N: 198, Mean: 24.1, SDWithin: 2.2, SDOverall: 2.4, Min: 19.7, Max: 33.0, Cp: math.NaN(), Cpk: 5.4,
		Pp: math.NaN(), Ppk: 4.99, CpCI: [2]float64{math.NaN(), math.NaN()}, CpkCI: [2]float64{4.8, 6.0}, FractionOutside: 0, MeanU: math.NaN()}
	rng := func(i int) float64 { return math.Sin(float64(i)*1.7) * 3 }
	for i := range 198 {
		pre.Values = append(pre.Values, 0.8+rng(i))
		post.Values = append(post.Values, -12.5+rng(i+5)*20)
		noise.Values = append(noise.Values, 24+rng(i+9))
	}
	post.Values[17] = -12384.1
	pre.Hist = spc.Bin(pre.Values, -25, 25, stats.DefaultBins)
	post.Hist = spc.Bin(post.Values, -1000, 1000, stats.DefaultBins)
	noise.Hist = spc.Bin(noise.Values, 19.7-0.25*(60-19.7), 60+0.25*(60-19.7), stats.DefaultBins)
	groups := [][]float64{post.Values[:120], post.Values[120:197], post.Values[197:]}
	means, spreads, err := spc.Subgroups(groups, post.Mean, post.SDWithin)
	if err != nil {
		t.Fatal(err)
	}
	return stats.Report{
		Ledger: "/var/lib/trimline/ledger.db", Filter: stats.Filter{Product: "BRX-200", Lot: "L-0412"}, By: stats.ByLot, Generated: gen,
		Population: []string{"A unit is a serial; its latest completed run counts for yield and capability.",
			"Earlier attempts count only for the retest rate; FAULT and ABORTED runs only for the fault rate."},
		Counts: stats.Counts{Units: 198, Passed: 190, Failed: 6, Held: 2, FirstPass: 185, Retested: 9, Attempts: 207, Decisions: 1, Runs: 212, Faults: 3, Aborted: 2, Engineering: 4},
		Yield:  190.0 / 198, FirstPassYield: 185.0 / 198, RetestRate: 9.0 / 198, FaultRate: 3.0 / 212,
		Pareto:  []stats.LimitFailures{{Limit: "offset after trim", Failed: 4, Held: 1, First: 6}, {Limit: "gain after trim", Channel: "ch2", Failed: 2, First: 3}},
		Results: []stats.ResultStats{pre, post, noise},
		Pairs:   []stats.Pair{{Quantity: "offset", Pre: 0, Post: 1}},
		Trends: []stats.Trend{{Result: 1, By: stats.ByLot, Groups: []stats.Group{{Key: "L-0411", N: 120}, {Key: "L-0412", N: 77}, {Key: "L-0413", N: 1}},
			Means: means, Spreads: spreads}},
		Notes: []string{"post_offset: 2 unit(s) have no valid value in their latest run; they are left out of its numbers."},
	}
}

func pdfText(t *testing.T, pdf []byte) string {
	t.Helper()
	if _, err := exec.LookPath("pdftotext"); err != nil {
		if os.Getenv("CI") == "true" {
			t.Fatal("pdftotext not installed (poppler-utils); CI must have it")
		}
		t.Skip("pdftotext not installed")
	}
	cmd := exec.Command("pdftotext", "-layout", "-", "-")
	cmd.Stdin = bytes.NewReader(pdf)
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("pdftotext: %v", err)
	}
	return string(out)
}

// The lot report is a PDF whose text holds the key numbers with their units,
// and the same Report gives the same bytes.
func TestWritePDF(t *testing.T) {
	r := lotReport(t)
	var a, b bytes.Buffer
	if err := stats.WritePDF(&a, r); err != nil {
		t.Fatal(err)
	}
	if err := stats.WritePDF(&b, lotReport(t)); err != nil {
		t.Fatal(err)
	}
	if !bytes.HasPrefix(a.Bytes(), []byte("%PDF-")) || !bytes.HasSuffix(bytes.TrimSpace(a.Bytes()), []byte("%%EOF")) {
		t.Fatal("not a PDF")
	}
	if !bytes.Equal(a.Bytes(), b.Bytes()) {
		t.Error("two drawings of the same report differ")
	}
	txt := pdfText(t, a.Bytes())
	for _, want := range []string{
		"/var/lib/trimline/ledger.db", "product BRX-200, lot L-0412", "2026-12-02 20:00 UTC",
		"A unit is a serial", "96 %", "93.4 %", "4.55 %", "1.42 %",
		"offset after trim", "4 failed, 1 held",
		"post_offset [µV]", "−800 … 800 µV", "1.56", "(1.4 – 1.72)", "0.291", "38 %", "± 9.6 µV",
		"1 below −1000", "LSL −800", "USL 800", "mean −12.5",
		"≤ 60 µV", "Pre-trim beside post-trim", "L-0413", "Signals",
	} {
		if !strings.Contains(txt, want) {
			t.Errorf("PDF text lacks %q", want)
		}
	}
	if t.Failed() {
		t.Logf("PDF text:\n%s", txt)
	}
}

// A report with nothing in it, and one whose every number is NaN, are still
// PDFs: no panic, a dash for every missing number.
func TestWritePDFEmptyAndNaN(t *testing.T) {
	nan := math.NaN()
	var b bytes.Buffer
	if err := stats.WritePDF(&b, stats.Report{}); err != nil {
		t.Fatal(err)
	}
	r := lotReport(t)
	r.Yield, r.FirstPassYield, r.RetestRate, r.FaultRate = nan, nan, nan, nan
	for i := range r.Results {
		rs := &r.Results[i]
		rs.Mean, rs.SDWithin, rs.SDOverall, rs.Min, rs.Max = nan, nan, nan, nan, nan
		rs.Cp, rs.Cpk, rs.Pp, rs.Ppk, rs.FractionOutside, rs.MeanU = nan, nan, nan, nan, nan, nan
		rs.CpCI, rs.CpkCI = [2]float64{nan, nan}, [2]float64{nan, nan}
		rs.Lower, rs.Upper = &nan, nil
		rs.Hist = spc.Bin(rs.Values, nan, nan, 10)
	}
	for i := range r.Trends {
		tr := &r.Trends[i]
		tr.Means.Center, tr.Means.UCL, tr.Means.LCL = nan, nan, nan
		for k := range tr.Means.Points {
			tr.Means.Points[k] = spc.Point{Value: nan, Statistic: nan, UCL: nan, LCL: nan}
		}
		tr.Spreads = spc.Chart{}
	}
	r.Pairs = append(r.Pairs, stats.Pair{Pre: 7, Post: -1}) // out of range: left out
	b.Reset()
	if err := stats.WritePDF(&b, r); err != nil {
		t.Fatal(err)
	}
	txt := pdfText(t, b.Bytes())
	if strings.Contains(txt, "NaN") || strings.Contains(txt, "Inf") {
		t.Errorf("a NaN is written as a number:\n%s", txt)
	}
}

func TestWriteFile(t *testing.T) {
	path := filepath.Join(t.TempDir(), "lot.pdf")
	if err := stats.WriteFile(path, lotReport(t)); err != nil {
		t.Fatal(err)
	}
	b, err := os.ReadFile(path)
	if err != nil || !bytes.HasPrefix(b, []byte("%PDF-")) {
		t.Fatalf("%v, %.8q", err, b)
	}
	if err := stats.WriteFile(filepath.Join(t.TempDir(), "missing", "lot.pdf"), lotReport(t)); err == nil {
		t.Error("a path in a directory that does not exist: want an error")
	}
	if os.Getenv("TRIMLINE_LOT_PDF") != "" { // for looking at the pages
		os.WriteFile(os.Getenv("TRIMLINE_LOT_PDF"), b, 0o644)
	}
}
