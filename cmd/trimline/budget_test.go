package main

import (
	"strings"
	"testing"
	"unicode/utf8"
)

// trimline check prints, under the TUR lines, the budget on paper of each
// toleranced result. On the demo station the offset after trim is dominated by
// the source's range term: 5 ppm of 100 mV = 0.5 µV half-width at the input,
// u = a/√3 = 0.289 µV (JCGM 100 §4.3.7), ×200 V/V = 57.7 µV, 58.1 % of u² =
// (57.7² + 43.3² + 23.1²) µV² (JCGM 100 §5.1.3, eq. (10)); the meter's 30 ppm
// of the 2.5 V reading gives 43.3 µV. The columns line up: every row of the
// budgets ends at the same column.
func TestCheckPrintsBudgets(t *testing.T) {
	dir := t.TempDir()
	station, sequence, err := writeDemoFiles(dir, 1, testNow())
	if err != nil {
		t.Fatal(err)
	}
	code, out, _ := runCLI(t, "check", station, sequence)
	if code != 0 {
		t.Fatalf("exit %d\n%s", code, out)
	}
	_, budgets, ok := strings.Cut(out, "Uncertainty budgets on paper")
	if !ok {
		t.Fatalf("no budgets:\n%s", out)
	}
	_, post, ok := strings.Cut(budgets, "offset after trim (post_offset): U = ")
	if !ok {
		t.Fatalf("no post_offset budget:\n%s", budgets)
	}
	_, post, _ = strings.Cut(post, "\n") // U as the certificate rounds it, k
	lines := strings.Split(post, "\n")
	want := [][]string{
		{"meter resolution", "B", "289 nV", "per point (11)", "87 nV", "∞", "< 0.1 %"},
		{"meter gain", "B", "17.3 ppm", "−2.5 µV/ppm", "43.3 µV", "∞", "32.7 %"},
		{"meter offset", "B", "23.1 µV", "−1 V/V", "23.1 µV", "∞", "9.3 %"},
		{"source offset", "B", "289 nV", "−200 V/V", "57.7 µV", "∞", "58.1 %"},
		{"combined u", "75.8 µV", "∞", "100 %"},
	}
	width := utf8.RuneCountInString(lines[0])
	for i, w := range want {
		l := lines[i]
		if got := strings.Join(strings.Fields(l), " "); got != strings.Join(w, " ") {
			t.Errorf("row %d: %q, want %q", i, got, strings.Join(w, " "))
		}
		if n := utf8.RuneCountInString(l); n != width {
			t.Errorf("row %d ends at column %d, row 0 at %d:\n%s", i, n, width, post)
		}
	}
}
