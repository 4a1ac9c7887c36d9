package chart

import (
	"bytes"
	"math"
	"os/exec"
	"strings"
	"testing"
	"time"

	"trimline/reports/internal/pdfdoc"
	"trimline/sequencer/spc"
)

// handChart is a chart written out by hand: a centre, limits and a signal,
// so the drawing is tested apart from the arithmetic of sequencer/spc.
func handChart() spc.Chart {
	c := spc.Chart{Kind: "individuals", Center: 10, UCL: 13, LCL: 7, Sigma: 1,
		Signals: []spc.Signal{{Index: 4, Rule: spc.RuleBeyond3Sigma}}}
	for _, v := range []float64{10, 11, 9, 14, 10} {
		c.Points = append(c.Points, spc.Point{Value: v, Statistic: v, UCL: 13, LCL: 7})
	}
	return c
}

func TestWritePDF(t *testing.T) {
	var a, b bytes.Buffer
	o := Options{Title: "Individuals chart of gain_ppm", Lines: []string{"test data"}}
	if err := WritePDF(&a, []spc.Chart{handChart()}, o); err != nil {
		t.Fatal(err)
	}
	if err := WritePDF(&b, []spc.Chart{handChart()}, o); err != nil {
		t.Fatal(err)
	}
	if !bytes.HasPrefix(a.Bytes(), []byte("%PDF-")) || !bytes.Equal(a.Bytes(), b.Bytes()) {
		t.Fatal("not a PDF, or two drawings of the same chart differ")
	}
	if err := WritePDF(&b, nil, o); err == nil {
		t.Error("no charts: want an error")
	}
	if err := WritePDF(&b, []spc.Chart{{Kind: "ewma"}}, o); err == nil {
		t.Error("a chart without points: want an error")
	}
	if _, err := exec.LookPath("pdftotext"); err != nil {
		t.Skip("pdftotext not installed")
	}
	cmd := exec.Command("pdftotext", "-layout", "-", "-")
	cmd.Stdin = &a
	txt, err := cmd.Output()
	if err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"Individuals chart of gain_ppm", "UCL 13", "CL 10", "LCL 7", "4 beyond_3_sigma"} {
		if !strings.Contains(string(txt), want) {
			t.Errorf("PDF text lacks %q:\n%s", want, txt)
		}
	}
}

// A long series is drawn as its envelope: 20 000 points, one signal, a page
// of well under a megabyte that still marks the signal (listed under it).
func TestWritePDFLongSeries(t *testing.T) {
	c := spc.Chart{Kind: "individuals", Center: 0, UCL: 3, LCL: -3, Sigma: 1,
		Signals: []spc.Signal{{Index: 12345, Rule: spc.RuleBeyond3Sigma}}}
	for i := range 20000 {
		v := float64(i%7-3) / 2
		if i == 12344 {
			v = 5
		}
		c.Points = append(c.Points, spc.Point{Value: v, Statistic: v, UCL: 3, LCL: -3})
	}
	var b bytes.Buffer
	if err := WritePDF(&b, []spc.Chart{c}, Options{Title: "long"}); err != nil {
		t.Fatal(err)
	}
	if b.Len() > 1<<20 {
		t.Errorf("PDF of 20 000 points: %d bytes, want under 1 MiB", b.Len())
	}
	if _, err := exec.LookPath("pdftotext"); err != nil {
		t.Skip("pdftotext not installed")
	}
	cmd := exec.Command("pdftotext", "-layout", "-", "-")
	cmd.Stdin = &b
	txt, err := cmd.Output()
	if err != nil || !strings.Contains(string(txt), "12345 beyond_3_sigma") {
		t.Errorf("PDF text lacks the signal (%v):\n%s", err, txt)
	}
}

// An X̄ and an s chart of unequal groups (spc.Subgroups) drawn as panels in
// boxes of a portrait page: per-point limits, the s of a group of one is NaN
// and is a gap (no coordinate of the drawing is NaN), and a chart without
// points is an empty frame.
func TestDrawPanelSubgroups(t *testing.T) {
	groups := [][]float64{{10, 11, 9}, {12}, {10, 10.5}, {9, 9.5, 10, 11, 10.2}, {13}}
	means, spreads, err := spc.Subgroups(groups, 10, 1)
	if err != nil {
		t.Fatal(err)
	}
	if !math.IsNaN(spreads.Points[1].Statistic) {
		t.Fatalf("s of a group of one = %v, want NaN", spreads.Points[1].Statistic)
	}
	pdf := pdfdoc.New(time.Unix(0, 0), 15, 15, 15)
	pdf.SetCompression(false)
	pdf.AddPage()
	d := &pdfdoc.Doc{PDF: pdf, Left: 15, Width: 180, Y: 15}
	keys := []string{"2026-12-01", "2026-12-02", "2026-12-03", "2026-12-04", "2026-12-05"}
	DrawPanel(d, means, 15, 20, 180, 60, keys)
	DrawPanel(d, spreads, 15, 90, 90, 50, nil)
	DrawPanel(d, spc.Chart{Kind: spc.KindMeans}, 110, 90, 80, 50, nil)
	var b bytes.Buffer
	if err := pdf.Output(&b); err != nil {
		t.Fatal(err)
	}
	// fmt writes a NaN or infinite coordinate as NaN, +Inf or -Inf.
	if bytes.Contains(b.Bytes(), []byte("NaN")) || bytes.Contains(b.Bytes(), []byte("Inf ")) {
		t.Error("the drawing has a NaN or infinite coordinate")
	}
}
