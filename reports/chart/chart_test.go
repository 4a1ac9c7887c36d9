package chart

import (
	"bytes"
	"os/exec"
	"strings"
	"testing"

	"trimline/sequencer/spc"
)

// Labels wanted closer than the gap are pushed apart, in their order, and
// kept inside the plot when there is room; labels far apart stay where they
// are wanted.
func TestSpreadKeepsLabelsApart(t *testing.T) {
	cases := []struct {
		name        string
		want        []float64
		gap, lo, hi float64
		expect      []float64
	}{
		{"apart", []float64{10, 50, 90}, 3, 0, 100, []float64{10, 50, 90}},
		{"UCL, CL, LCL on one line", []float64{50, 50, 50}, 3, 0, 100, []float64{50, 53, 56}},
		{"pushed up from the bottom", []float64{99, 100, 100}, 3, 0, 100, []float64{94, 97, 100}},
		{"any order", []float64{51, 50, 90}, 3, 0, 100, []float64{53, 50, 90}},
	}
	for _, c := range cases {
		got := spread(c.want, c.gap, c.lo, c.hi)
		for i := range got {
			if d := got[i] - c.expect[i]; d > 1e-9 || d < -1e-9 {
				t.Errorf("%s: got %v, want %v", c.name, got, c.expect)
				break
			}
		}
	}
}

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
