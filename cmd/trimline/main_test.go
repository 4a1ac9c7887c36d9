package main

import (
	"bytes"
	"context"
	"encoding/json"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"trimline/reports/ledger"
)

func runCLI(t *testing.T, args ...string) (code int, stdout, stderr string) {
	t.Helper()
	var o, e bytes.Buffer
	code = run(context.Background(), args, &o, &e)
	return code, o.String(), e.String()
}

func TestDemoEndToEnd(t *testing.T) {
	dir := t.TempDir()
	code, out, errOut := runCLI(t, "demo", "--out", dir, "--units", "6", "--seed", "3")
	if code != 0 {
		t.Fatalf("exit %d\n%s\n%s", code, out, errOut)
	}
	pdfs, _ := filepath.Glob(filepath.Join(dir, "certificates", "*.pdf"))
	if len(pdfs) != 6 {
		t.Fatalf("%d PDFs, want 6\n%s", len(pdfs), out)
	}
	led, err := ledger.Open(context.Background(), filepath.Join(dir, "ledger.db"))
	if err != nil {
		t.Fatal(err)
	}
	defer led.Close()
	counts, err := led.Counts(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	// 6 units × 2 sweeps × 11 points × 8 readings (the demo sequence).
	if counts["runs"] != 6 || counts["documents"] != 6 || counts["readings"] != 6*2*11*8 {
		t.Fatalf("ledger counts %v", counts)
	}
	if !strings.Contains(out, "yield") || !strings.Contains(out, "pre_offset ") {
		t.Errorf("no summary:\n%s", out)
	}
	if _, err := os.Stat(filepath.Join(dir, "trimline.log")); err != nil {
		t.Error(err)
	}
	// A PDF's text contains its serial number and verdict.
	if _, err := exec.LookPath("pdftotext"); err != nil {
		t.Skip("pdftotext not installed")
	}
	runs, err := led.Runs(context.Background(), "")
	if err != nil {
		t.Fatal(err)
	}
	for _, r := range runs {
		pdf := ""
		for _, p := range pdfs {
			if strings.Contains(p, r.Certificate) {
				pdf = p
			}
		}
		txt, err := exec.Command("pdftotext", "-layout", pdf, "-").Output()
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Contains(txt, []byte(r.Serial)) || !bytes.Contains(txt, []byte(string(r.Verdict))) {
			t.Errorf("%s lacks serial %s or verdict %s", pdf, r.Serial, r.Verdict)
		}
	}
}

func TestRunExitCodes(t *testing.T) {
	dir := t.TempDir()
	station, sequence := writeReleasedDemo(t, dir, 1)
	code, out, errOut := runCLI(t, "run", "--station", station, "--sequence", sequence, "--serial", "BRX-00001", "--out", dir, "--json")
	if code != 0 {
		t.Fatalf("exit %d\n%s\n%s", code, out, errOut)
	}
	var u unitOut
	if err := json.NewDecoder(strings.NewReader(out)).Decode(&u); err != nil || u.Verdict != "PASS" || u.Certificate == "" {
		t.Fatalf("json %q: %v", out, err)
	}
	// A unit that fails its limits: force an open output through the station file.
	data, _ := os.ReadFile(station)
	broken := filepath.Join(dir, "open.yaml")
	os.WriteFile(broken, bytes.Replace(data, []byte(`seed: "1"`), []byte(`seed: "1"
      defect: open`), 1), 0o644)
	if code, out, _ := runCLI(t, "run", "--station", broken, "--sequence", sequence, "--serial", "BRX-00002", "--out", dir); code != exitFail {
		t.Errorf("open output: exit %d, want 1\n%s", code, out)
	}
	// Bad input: usage and a broken file.
	if code, _, _ := runCLI(t, "run", "--station", station); code != exitUsage {
		t.Errorf("missing flags: exit %d, want 2", code)
	}
	os.WriteFile(broken, bytes.Replace(data, []byte("max_source_voltage: 50 mV"), []byte("max_source_voltage: 50 mX"), 1), 0o644)
	code, _, errOut = runCLI(t, "run", "--station", broken, "--sequence", sequence, "--serial", "X")
	if code != exitUsage || !strings.Contains(errOut, "open.yaml:") || !strings.Contains(errOut, "unknown unit") {
		t.Errorf("bad unit: exit %d, %s", code, errOut)
	}
	// Bad input caught at load: an address no driver serves.
	os.WriteFile(broken, bytes.Replace(data, []byte("address: sim://meter"), []byte("address: sim://voltmeter"), 1), 0o644)
	if code, _, errOut := runCLI(t, "run", "--station", broken, "--sequence", sequence, "--serial", "X", "--out", dir); code != exitUsage ||
		!strings.Contains(errOut, "open.yaml:32:14:") {
		t.Errorf("bad address: exit %d, want 2: %s", code, errOut)
	}
	// Station fault: the source refuses a level mid-sweep (its range is too small).
	os.WriteFile(broken, bytes.Replace(data, []byte("    address: sim://source "), []byte("    settings: {range: 5 mV}\n    address: sim://source "), 1), 0o644)
	code, out, _ = runCLI(t, "run", "--station", broken, "--sequence", sequence, "--serial", "BRX-00003", "--out", dir)
	if code != exitStation || !strings.Contains(out, "FAULT") {
		t.Errorf("source fault: exit %d, want 3:\n%s", code, out)
	}
}

func TestCheck(t *testing.T) {
	dir := t.TempDir()
	station, sequence, err := writeDemoFiles(dir, 1, testNow())
	if err != nil {
		t.Fatal(err)
	}
	limitsFile := filepath.Join(dir, "brx200-limits.yaml")
	if code, out, _ := runCLI(t, "check", station, sequence, limitsFile); code != 0 || strings.Count(out, "ok  ") != 3 {
		t.Fatalf("clean files: exit %d\n%s", code, out)
	}
	data, _ := os.ReadFile(limitsFile)
	bad := filepath.Join(dir, "bad-limits.yaml")
	os.WriteFile(bad, bytes.Replace(data, []byte("uses: [post_noise]"), []byte("uses: [post_nois]"), 1), 0o644)
	code, out, _ := runCLI(t, "check", bad)
	if code != exitUsage || !strings.Contains(out, "bad-limits.yaml:") || !strings.Contains(out, "post_nois") {
		t.Fatalf("bad limits: exit %d\n%s", code, out)
	}
	other := filepath.Join(dir, "other.yaml")
	os.WriteFile(other, []byte("hello: world\n"), 0o644)
	if code, out, _ := runCLI(t, "check", other); code != exitUsage || !strings.Contains(out, "cannot tell the kind") {
		t.Fatalf("unknown kind: exit %d\n%s", code, out)
	}
}

// trimline fit on NIST StRD Norris prints the certified values (NIST StRD, Norris:
// B0 = -0.262323073774029, B1 = 1.00211681802045, residual SD 0.884796396144373).
func TestFitNorrisJSON(t *testing.T) {
	code, out, errOut := runCLI(t, "fit", "--json", filepath.Join("..", "..", "testdata", "nist-strd-norris.csv"))
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errOut)
	}
	var r struct {
		Coefficients []float64   `json:"coefficients"`
		StdUnc       []float64   `json:"std_uncertainties"`
		Covariance   [][]float64 `json:"covariance"`
		ResidualSD   float64     `json:"residual_sd"`
		DOF          int         `json:"dof"`
		RSquared     float64     `json:"r_squared"`
	}
	if err := json.Unmarshal([]byte(out), &r); err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct{ got, want float64 }{
		{r.Coefficients[0], -0.262323073774029}, {r.Coefficients[1], 1.00211681802045},
		{r.StdUnc[0], 0.232818234301152}, {r.StdUnc[1], 0.429796848199937e-03},
		{r.ResidualSD, 0.884796396144373}, {r.RSquared, 0.999993745883712},
	} {
		if math.Abs(c.got-c.want) > 1e-10*math.Abs(c.want) {
			t.Errorf("got %.15g, want %.15g", c.got, c.want)
		}
	}
	if r.DOF != 34 || len(r.Covariance) != 2 {
		t.Errorf("dof %d", r.DOF)
	}
	bad := filepath.Join(t.TempDir(), "bad.csv")
	os.WriteFile(bad, []byte("x,y\n1,2\n2,abc\n"), 0o644)
	if code, _, errOut := runCLI(t, "fit", bad); code != exitUsage || !strings.Contains(errOut, "bad.csv:3:3") {
		t.Errorf("bad csv: exit %d: %s", code, errOut)
	}
}

// trimline fit --at on GUM H.3 predicts b(30 °C) = −0.1494 °C with u = 0.0041 °C
// (JCGM 100:2008 Annex H.3; recomputed −0.149377, 0.0041386).
func TestFitPredictionGUMH3(t *testing.T) {
	code, out, errOut := runCLI(t, "fit", "--json", "--x0", "20", "--at", "30", filepath.Join("..", "..", "testdata", "gum-h3-thermometer.csv"))
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errOut)
	}
	var r struct {
		Prediction struct{ X, Y, U float64 } `json:"prediction"`
	}
	if err := json.Unmarshal([]byte(out), &r); err != nil {
		t.Fatal(err)
	}
	if r.Prediction.X != 30 || math.Abs(r.Prediction.Y-(-0.149377)) > 1e-6 || math.Abs(r.Prediction.U-0.0041386) > 1e-7 {
		t.Errorf("prediction %+v", r.Prediction)
	}
	// Known per-point uncertainties: a weighted fit with (XᵀWX)⁻¹; with u equal to the
	// unweighted fit's residual SD (0.00349756, GUM H.3 recomputed) the coefficient
	// uncertainties equal the unweighted ones (hand-worked: s²(XᵀX)⁻¹ = (XᵀWX)⁻¹ then).
	code, out, errOut = runCLI(t, "fit", "--json", "--x0", "20", "--u-y", "0.00349756", filepath.Join("..", "..", "testdata", "gum-h3-thermometer.csv"))
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errOut)
	}
	var w struct {
		StdUnc []float64 `json:"std_uncertainties"`
	}
	json.Unmarshal([]byte(out), &w)
	if len(w.StdUnc) != 2 || math.Abs(w.StdUnc[0]-0.00287760) > 1e-7 || math.Abs(w.StdUnc[1]-0.000667939) > 1e-8 {
		t.Errorf("weighted std uncertainties %v", w.StdUnc)
	}
}

// Production refuses files nobody released; --engineering runs them with marked
// certificates from their own number series; a release (21 CFR 11.50: name,
// meaning, time, signature) lets production run.
func TestReleaseAndEngineeringRuns(t *testing.T) {
	dir := t.TempDir()
	station, sequence, err := writeDemoFiles(dir, 1, testNow())
	if err != nil {
		t.Fatal(err)
	}
	code, _, errOut := runCLI(t, "run", "--station", station, "--sequence", sequence, "--serial", "BRX-00011", "--out", dir)
	if code != exitUsage || !strings.Contains(errOut, "not released by a trusted approver") {
		t.Fatalf("unreleased: exit %d %s", code, errOut)
	}
	code, out, errOut := runCLI(t, "run", "--engineering", "--station", station, "--sequence", sequence, "--serial", "BRX-00012", "--out", dir)
	if code != 0 || !strings.Contains(out, "TL1-ENG-000001") {
		t.Fatalf("engineering: exit %d\n%s%s", code, out, errOut)
	}
	if _, err := exec.LookPath("pdftotext"); err == nil {
		txt, _ := exec.Command("pdftotext", filepath.Join(dir, "certificates", "TL1-ENG-000001_BRX-00012.pdf"), "-").Output()
		if !bytes.Contains(txt, []byte("ENGINEERING RUN — NOT FOR SHIPMENT")) {
			t.Error("engineering certificate is not marked")
		}
	}
	for _, f := range []string{sequence, filepath.Join(dir, "brx200-limits.yaml")} {
		// A release is signed by a trusted approver's key; there is no unsigned one.
		if code, _, _ := runCLI(t, "limits", "release", f, "--decision", "approve", "--station", station); code != exitUsage {
			t.Fatalf("unsigned release: exit %d", code)
		}
		code, out, errOut := runCLI(t, "limits", "release", f, "--decision", "approve", "--station", station,
			"--key", filepath.Join(dir, "keys", "approvers", "demo-qe.key"))
		if code != 0 || !strings.Contains(out, "Demo Quality Engineer — approved") || !strings.Contains(out, "signed with ed25519:") {
			t.Fatalf("release %s: exit %d\n%s%s", f, code, out, errOut)
		}
	}
	// The station file's output folder is dir/out; production uses that ledger.
	code, out, errOut = runCLI(t, "run", "--station", station, "--sequence", sequence, "--serial", "BRX-00013")
	if code != 0 || !strings.Contains(out, "TL1-000001") {
		t.Fatalf("released: exit %d\n%s%s", code, out, errOut)
	}
}

// limits whatif on the demo ledger: a tightened offset tolerance flips units, and
// the report counts them against a direct re-judging of the stored results.
func TestLimitsWhatIfOnDemoLedger(t *testing.T) {
	dir := t.TempDir()
	if code, out, errOut := runCLI(t, "demo", "--out", dir, "--units", "25"); code != 0 {
		t.Fatalf("demo: %d\n%s%s", code, out, errOut)
	}
	lim, _ := os.ReadFile(filepath.Join(dir, "brx200-limits.yaml"))
	tight := filepath.Join(dir, "tight.yaml")
	os.WriteFile(tight, bytes.Replace(lim, []byte("tolerance: {lower: -800, upper: 800}"), []byte("tolerance: {lower: -20, upper: 20}"), 1), 0o644)
	report := filepath.Join(dir, "whatif.pdf")
	code, out, errOut := runCLI(t, "limits", "whatif", tight, "--ledger", filepath.Join(dir, "ledger.db"), "--pdf", report)
	if code != 0 || !strings.Contains(out, "Units re-judged: 25") || !strings.Contains(out, "Yield before: 92 %") {
		t.Fatalf("whatif: exit %d\n%s%s", code, out, errOut)
	}
	// With ±20 µV the guard band (U ≈ 150 µV) leaves no acceptance interval:
	// every passing unit turns into a conditional pass, held for review.
	if st, err := os.Stat(report); err != nil || st.Size() == 0 {
		t.Errorf("no PDF report: %v", err)
	}
	if !strings.Contains(out, "pass → review") {
		t.Errorf("no unit flipped to review under a tolerance inside the guard band:\n%s", out)
	}
	if code, out, _ := runCLI(t, "limits", "diff", filepath.Join(dir, "brx200-limits.yaml"), tight); code != 0 || !strings.Contains(out, "tightened") {
		t.Errorf("diff: exit %d\n%s", code, out)
	}
}
