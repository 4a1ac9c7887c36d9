package main

import (
	"bytes"
	"encoding/json"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
)

// chartJSONOut is what trimline chart --json writes, decoded with unknown
// fields disallowed so that the test notices a change of the schema.
type chartJSONOut struct {
	Chart       string         `json:"chart"`
	Column      string         `json:"column"`
	N           int            `json:"n"`
	Center      float64        `json:"center"`
	UCL         float64        `json:"ucl"`
	LCL         float64        `json:"lcl"`
	Sigma       float64        `json:"sigma"`
	Points      []chartJSONPt  `json:"points"`
	Signals     []chartJSONSig `json:"signals"`
	MovingRange *chartJSONOut  `json:"moving_range"`
}

type chartJSONPt struct {
	Value     float64  `json:"value"`
	Statistic float64  `json:"statistic"`
	UCL       float64  `json:"ucl"`
	LCL       float64  `json:"lcl"`
	Lower     *float64 `json:"lower"`
}

type chartJSONSig struct {
	Index int    `json:"index"`
	Rule  string `json:"rule"`
}

// writeChartCSV writes rows under a header into a file in a test folder.
func writeChartCSV(t *testing.T, name, header string, rows ...string) string {
	t.Helper()
	path := filepath.Join(t.TempDir(), name)
	if err := os.WriteFile(path, []byte(header+"\n"+strings.Join(rows, "\n")+"\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

func decodeChart(t *testing.T, out string) chartJSONOut {
	t.Helper()
	dec := json.NewDecoder(strings.NewReader(out))
	dec.DisallowUnknownFields()
	var c chartJSONOut
	if err := dec.Decode(&c); err != nil {
		t.Fatalf("decode --json: %v\n%s", err, out)
	}
	return c
}

// handbookIMR is the individuals example of NIST/SEMATECH e-Handbook
// §6.3.2.2, behind a serial column so that the first numeric column is found.
func handbookIMR(t *testing.T) string {
	t.Helper()
	vals := []string{"49.6", "47.6", "49.9", "51.3", "47.8", "51.2", "52.6", "52.4", "53.6", "52.1"}
	rows := make([]string, len(vals))
	for i, v := range vals {
		rows[i] = "SN-" + string(rune('A'+i)) + "," + v
	}
	return writeChartCSV(t, "imr.csv", "serial,offset_mV", rows...)
}

// The e-Handbook §6.3.2.2 example through the command: x̄ 50.81, MR̄ 1.8778,
// UCL 55.8041, LCL 45.8159 (x̄ ± 3·MR̄/1.128), MR chart UCL 6.1347 (3.267·MR̄).
func TestChartIMRHandbookText(t *testing.T) {
	path := handbookIMR(t)
	code, out, errOut := runCLI(t, "chart", path)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errOut)
	}
	for _, want := range []string{
		`Individuals and moving-range chart of "offset_mV" (10 points)`,
		"individuals:  center 50.81   UCL 55.8041   LCL 45.8159",
		"moving_range: center 1.87778   UCL 6.1347   LCL 0",
	} {
		if !strings.Contains(out, want) {
			t.Errorf("output lacks %q:\n%s", want, out)
		}
	}
	// Row 2: value 47.6, moving range |47.6 − 49.6| = 2.
	if !strings.Contains(out, "    2           47.6              2        45.8159        55.8041") {
		t.Errorf("row 2 is not value 47.6, MR 2, LCL 45.8159, UCL 55.8041:\n%s", out)
	}
}

func TestChartIMRHandbookJSON(t *testing.T) {
	path := handbookIMR(t)
	code, out, errOut := runCLI(t, "chart", "--column", "offset_mV", "--json", path)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errOut)
	}
	c := decodeChart(t, out)
	// e-Handbook §6.3.2.2: values published to 4 decimals.
	if c.Chart != "individuals" || c.Column != "offset_mV" || c.N != 10 || len(c.Points) != 10 ||
		!within(c.Center, 50.81, 1e-9) || !within(c.UCL, 55.8041, 5e-5) || !within(c.LCL, 45.8159, 5e-5) {
		t.Fatalf("individuals chart: got %+v", c)
	}
	if p := c.Points[8]; p.Value != 53.6 || p.Statistic != 53.6 || !within(p.UCL, 55.8041, 5e-5) {
		t.Errorf("point 9: got %+v, want value and statistic 53.6 within 55.8041", p)
	}
	// No point breaks Western Electric rules 1–4 (e-Handbook §6.3.2): by hand,
	// σ = 1.8778/1.128 = 1.6647, no point beyond 2σ (54.14, 47.48), at most 2
	// of any 5 beyond 1σ (52.47, 49.15) on one side, no run of 8 on one side.
	if len(c.Signals) != 0 {
		t.Errorf("signals: got %+v, want none", c.Signals)
	}
	mr := c.MovingRange
	if mr == nil || mr.Chart != "moving_range" || len(mr.Points) != 9 ||
		!within(mr.Center, 1.8778, 5e-5) || !within(mr.UCL, 6.1347, 5e-5) || mr.LCL != 0 {
		t.Fatalf("moving-range chart: got %+v", mr)
	}
	if !within(mr.Points[0].Statistic, 2, 1e-12) {
		t.Errorf("first moving range: got %g, want |47.6 − 49.6| = 2", mr.Points[0].Statistic)
	}
}

// The tabular CUSUM example of e-Handbook §6.3.2.3: target 325, k 0.3175,
// h 4.1959; the first signal is at group 14 (S_hi 4.94), S_hi is 19.04 at 20.
func TestChartCUSUMHandbook(t *testing.T) {
	vals := []string{"324.925", "324.675", "324.725", "324.350", "325.350", "325.225", "324.125", "324.525",
		"325.225", "324.600", "324.625", "325.150", "328.325", "327.250", "327.825", "328.500", "326.675",
		"327.775", "326.875", "328.350"}
	path := writeChartCSV(t, "cusum.csv", "group_mean", vals...)
	args := []string{"chart", "--kind", "cusum", "--target", "325", "--k", "0.3175", "--h", "4.1959"}
	code, out, errOut := runCLI(t, append(append(args, "--json"), path)...)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errOut)
	}
	c := decodeChart(t, out)
	if len(c.Points) != 20 || len(c.Signals) == 0 {
		t.Fatalf("got %d points, signals %+v", len(c.Points), c.Signals)
	}
	if s := c.Signals[0]; s.Index != 14 || s.Rule != "cusum_high" {
		t.Errorf("first signal: got %+v, want point 14 cusum_high", s)
	}
	if p := c.Points[13]; !within(p.Statistic, 4.94, 0.005) || p.Lower == nil {
		t.Errorf("S_hi at 14: got %+v, want 4.94 and an S_lo", p)
	}
	if got := c.Points[19].Statistic; !within(got, 19.04, 0.005) {
		t.Errorf("S_hi at 20: got %g, want 19.04", got)
	}
	if !within(c.UCL, 4.1959, 1e-12) || !within(c.LCL, -4.1959, 1e-12) {
		t.Errorf("limits: got %g, %g, want ±4.1959", c.LCL, c.UCL)
	}
	code, out, errOut = runCLI(t, append(args, path)...)
	if code != 0 || !strings.Contains(out, "point 14: cusum_high (cusum)") || strings.Contains(out, "point 13: cusum_high") {
		t.Errorf("text: exit %d, want the first signal at point 14:\n%s%s", code, out, errOut)
	}
}

// EWMA limits derived by hand from the e-Handbook §6.3.2.4 formula for
// x = 10, 12 with λ = 0.5, target 10, σ 1, L = 3:
// z1 = 0.5·10 + 0.5·10 = 10, z2 = 0.5·12 + 0.5·10 = 11;
// t = 1: 10 ± 3·√(0.5/1.5·(1 − 0.5²)) = 10 ± 1.5;
// t = 2: 10 ± 3·√(1/3·(1 − 0.5⁴)) = 10 ± 3·√0.3125 = 10 ± 1.677051;
// steady state 10 ± 3·√(1/3) = 10 ± 1.732051.
func TestChartEWMALimitsByHand(t *testing.T) {
	path := writeChartCSV(t, "ewma.csv", "v", "10", "12")
	code, out, errOut := runCLI(t, "chart", "--kind", "ewma", "--lambda", "0.5", "--target", "10", "--sigma", "1", "--json", path)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errOut)
	}
	c := decodeChart(t, out)
	if len(c.Points) != 2 || !within(c.Points[0].Statistic, 10, 1e-12) || !within(c.Points[1].Statistic, 11, 1e-12) {
		t.Fatalf("EWMA statistic: got %+v", c.Points)
	}
	if !within(c.Points[0].UCL, 11.5, 1e-9) || !within(c.Points[0].LCL, 8.5, 1e-9) ||
		!within(c.Points[1].UCL, 11.677051, 1e-6) || !within(c.UCL, 11.732051, 1e-6) || !within(c.LCL, 8.267949, 1e-6) {
		t.Errorf("EWMA limits: got %+v (steady %g, %g)", c.Points, c.LCL, c.UCL)
	}
}

// A bad cell is reported at file:line:col, as trimline fit reports it; a
// missing column names the ones there are; wrong flags are usage errors.
func TestChartBadInput(t *testing.T) {
	bad := writeChartCSV(t, "bad.csv", "serial,offset_mV", "SN-1,1.5", "SN-2,abc", "SN-3,1.7")
	code, _, errOut := runCLI(t, "chart", bad)
	if code != exitUsage || !strings.Contains(errOut, `bad.csv:3:6: expected a number in column "offset_mV", found "abc"`) {
		t.Errorf("bad cell: exit %d, %s", code, errOut)
	}
	code, _, errOut = runCLI(t, "chart", "--column", "gain", bad)
	if code != exitUsage || !strings.Contains(errOut, `bad.csv:1:1: no column headed "gain": expected one of "serial", "offset_mV"`) {
		t.Errorf("missing column: exit %d, %s", code, errOut)
	}
	one := writeChartCSV(t, "one.csv", "v", "1.5")
	if code, _, errOut = runCLI(t, "chart", one); code != exitUsage || !strings.Contains(errOut, "one.csv") {
		t.Errorf("one point: exit %d, %s", code, errOut)
	}
	for _, args := range [][]string{
		{"chart", "--kind", "ewma", one},
		{"chart", "--kind", "cusum", "--target", "1", one},
		{"chart", "--kind", "imr", "--lambda", "0.2", one},
		{"chart", "--kind", "xbar", one},
	} {
		if code, _, errOut := runCLI(t, args...); code != exitUsage || !strings.Contains(errOut, "--kind") {
			t.Errorf("%v: exit %d, %s", args, code, errOut)
		}
	}
	// spc takes a width of 0 for 3: the command refuses it rather than print L = 0.
	if code, _, errOut := runCLI(t, "chart", "--kind", "ewma", "--lambda", "0.2", "--width", "0", one); code != exitUsage || !strings.Contains(errOut, "--width must be a positive") {
		t.Errorf("--width 0: exit %d, %s", code, errOut)
	}
}

// --pdf draws the chart: a PDF whose text has the title and the labelled
// centre line and limits (checked with pdftotext where it is installed).
func TestChartPDF(t *testing.T) {
	path := handbookIMR(t)
	pdf := filepath.Join(t.TempDir(), "imr.pdf")
	code, out, errOut := runCLI(t, "chart", "--pdf", pdf, path)
	if code != 0 || !strings.Contains(out, "chart drawn: "+pdf) {
		t.Fatalf("exit %d: %s%s", code, out, errOut)
	}
	b, err := os.ReadFile(pdf)
	if err != nil || !bytes.HasPrefix(b, []byte("%PDF-")) {
		t.Fatalf("not a PDF: %v", err)
	}
	// The same input gives the same bytes.
	pdf2 := filepath.Join(t.TempDir(), "again.pdf")
	if code, _, errOut := runCLI(t, "chart", "--pdf", pdf2, path); code != 0 {
		t.Fatal(errOut)
	}
	if b2, _ := os.ReadFile(pdf2); !bytes.Equal(b, b2) {
		t.Error("two runs gave different PDFs")
	}
	if _, err := exec.LookPath("pdftotext"); err != nil {
		t.Skip("pdftotext not installed")
	}
	txt, err := exec.Command("pdftotext", "-layout", pdf, "-").Output()
	if err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"Individuals and moving-range chart of offset_mV", "UCL 55.804", "CL 50.81", "LCL 45.816", "UCL 6.1347", "Signals: none."} {
		if !strings.Contains(string(txt), want) {
			t.Errorf("PDF text lacks %q:\n%s", want, txt)
		}
	}
}

// within reports whether got is within tol of want (an absolute tolerance:
// the published values have a fixed number of decimals).
func within(got, want, tol float64) bool { return math.Abs(got-want) <= tol }

// The column read: by header with semicolons, or, in a table without a
// header (judged as trimline fit judges it), the first numeric column.
func TestChartColumns(t *testing.T) {
	semi := writeChartCSV(t, "semi.csv", "# a comment\nserial; gain_ppm; offset_uV", "A1; 10; 1", "A2; 12; 3", "A3; 11; 2")
	code, out, errOut := runCLI(t, "chart", "--column", "offset_uV", "--json", semi)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errOut)
	}
	c := decodeChart(t, out)
	if c.Column != "offset_uV" || len(c.Points) != 3 || c.Points[1].Value != 3 {
		t.Errorf("--column offset_uV: got %+v", c)
	}
	bare := writeChartCSV(t, "bare.csv", "10", "12", "11")
	code, out, errOut = runCLI(t, "chart", "--json", bare)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errOut)
	}
	if c := decodeChart(t, out); c.Column != "column 1" || len(c.Points) != 3 || c.Points[0].Value != 10 {
		t.Errorf("no header: got %+v, want 3 points from 10", c)
	}
}
