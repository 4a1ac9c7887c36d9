package main

import (
	"strings"
	"testing"
	"unicode/utf8"
)

// trimline check prints, under the TUR lines, the budget on paper of each
// toleranced result. Without a zero check the demo's offset after trim would be
// dominated by the source's range term (57.7 µV of 75.8 µV, see
// sequencer.TestBRX200BudgetOnPaper); the demo's zero check measures the source's
// offset, so on paper its row is Type A and holds only half a count of the meter's
// 1 µV resolution in each of its two states, referred to the input: √2 ·
// 1 µV/(2√3)/200 = 2.04 nV (JCGM 100 F.2.2.1); the meter's 30 ppm of the 2.5 V
// reading, u =
// 75 µV/√3 = 43.3 µV (JCGM 100 §4.3.7), leads with 43.3²/(43.3² + 23.1²) = 77.8 %
// of u² (JCGM 100 §5.1.3, eq. (10)). The columns line up: every row of the
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
		{"meter gain", "B", "17.3 ppm", "−2.5 µV/ppm", "43.3 µV", "∞", "77.8 %"},
		{"meter offset", "B", "23.1 µV", "−1 V/V", "23.1 µV", "∞", "22.1 %"},
		{"source offset", "A", "2.04 nV", "−200 V/V", "408 nV", "∞", "< 0.1 %"},
		{"combined u", "49.1 µV", "∞", "100 %"},
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
