package main

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"trimline/sequencer"
)

// planBudget writes a budget of the demo card beside a copy of its sequence
// and limit files, and returns its path.
func planBudget(t *testing.T, trim string) string {
	t.Helper()
	dir := t.TempDir()
	for _, f := range []string{"brx200-sequence.yaml", "brx200-limits.yaml"} {
		data, err := os.ReadFile(filepath.Join("..", "..", "sequences", f))
		if err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(dir, f), data, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	body := `budget:
  product: BRX-200
  revision: C
  limits: brx200-limits.yaml
transfer:
  gain: 200
  output_at_zero: 2.5 V
  input: {low: -10 mV, high: 10 mV}
sources:
  - name: input stage offset
    acts: input_offset
    normal: 10 uV
  - name: output stage offset
    acts: output_offset
    uniform: ±2 mV
  - name: reference
    acts: gain
    tolerance: ±0.2 %
trim:
` + trim
	p := filepath.Join(dir, "brx200-budget.yaml")
	if err := os.WriteFile(p, []byte(body), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

const planDACs = `  dacs:
    - {name: offset, adjusts: offset, bits: 12, lsb: 12.2 uV, no_correction: 2048, dnl: 0.3 LSB}
    - {name: gain, adjusts: gain, bits: 12, lsb: 10 ppm, no_correction: 2048}
`

// trimline plan writes the plan a designer reads: the pre-trim quantities by
// Monte Carlo beside the law of propagation, the DACs, what is left after
// trim with the common-practice figure labelled so, the yield with what it
// predicts and what it does not, and the recommendation.
func TestPlanText(t *testing.T) {
	b := planBudget(t, planDACs)
	code, out, errOut := runCLI(t, "plan", b, "--seed", "4")
	if code != 0 || errOut != "" {
		t.Fatalf("exit %d, stderr %q\n%s", code, errOut, out)
	}
	for _, want := range []string{
		"Trim plan of BRX-200 rev C", "JCGM 101:2008 §7.9", "pre_offset", "pre_gain_error", "law of propagation",
		"output stage offset", "offset, after gain", "common practice", "post_offset", "post_gain_error",
		"Predicted yield against", "Only post_offset and post_gain_error are predicted", "not predicted (other results): ",
		"linearity after trim", "Recommendation for a yield of 99.50 %", "saturates",
	} {
		if !strings.Contains(out, want) {
			t.Errorf("plan text lacks %q:\n%s", want, out)
		}
	}
}

// plan --json writes one object of kind "plan" that decodes into planOut with
// unknown fields refused; the same seed gives the same object.
func TestPlanJSON(t *testing.T) {
	b := planBudget(t, planDACs)
	code, out, errOut := runCLI(t, "plan", b, "--json", "--target-yield", "99 %", "--seed", "9")
	if code != 0 || errOut != "" {
		t.Fatalf("exit %d, stderr %q\n%s", code, errOut, out)
	}
	lines := jsonLines(t, out)
	if len(lines) != 1 {
		t.Fatalf("%d lines, want one object", len(lines))
	}
	var p planOut
	decodeStrict(t, lines[0], &p)
	if p.Kind != kindPlan || p.Version != jsonVersion || p.Product != "BRX-200" || p.Trials < 100000 || p.AdaptiveTrials < 10000 ||
		p.TargetYield != 0.99 || p.Seed != 9 || !strings.HasSuffix(p.Limits, "brx200-limits.yaml") {
		t.Errorf("plan %+v", p)
	}
	names := map[string]planQuantityOut{}
	for _, q := range p.Quantities {
		names[q.Name] = q
	}
	for _, n := range []string{"pre_offset", "pre_gain_error", "offset_code", "gain_code", "post_offset", "post_gain_error"} {
		q, ok := names[n]
		if !ok || q.Mean == nil || q.SD == nil || len(q.Interval95) != 2 || !(q.Interval95[0] <= q.Interval95[1]) {
			t.Errorf("quantity %s: %+v", n, q)
		}
	}
	pre := names["pre_offset"]
	if pre.Unit != "V" || len(pre.GUMInterval95) != 2 || len(pre.WorstCase) != 2 || len(pre.Shares) != 3 ||
		!(pre.WorstCase[1] > pre.GUMInterval95[1]) || names["pre_gain_error"].Unit != "ratio" || names["offset_code"].Unit != "code" {
		t.Errorf("pre_offset %+v", pre)
	}
	if post := names["post_offset"]; !strings.Contains(post.GUMBasis, "common practice") || post.Shares["quantisation"] <= 0 {
		t.Errorf("post_offset %+v", post)
	}
	if _, ok := p.Saturation["offset"]; !ok || len(p.Saturation) != 2 {
		t.Errorf("saturation %v", p.Saturation)
	}
	if p.PredictedYield == nil || p.YieldSE == nil || *p.PredictedYield < 0.99 || len(p.Predicted) != 2 ||
		!strings.Contains(strings.Join(p.NotPredicted, ","), "linearity after trim") {
		t.Errorf("yield %v ± %v, predicted %v, not %v", p.PredictedYield, p.YieldSE, p.Predicted, p.NotPredicted)
	}
	if len(p.Recommendation) != 2 {
		t.Fatalf("recommendation %+v", p.Recommendation)
	}
	for _, r := range p.Recommendation {
		if !r.Found || r.Bits < 1 || r.LSB == nil || r.Range == nil || r.Pass == nil || *r.Pass < 0.99 || r.NoCorrection != 1<<(r.Bits-1) {
			t.Errorf("recommendation %+v", r)
		}
	}
	if p.Recommendation[0].LSBUnit != "V" || p.Recommendation[1].LSBUnit != "ratio" || p.Recommendation[1].Result != sequencer.ResPostGainError {
		t.Errorf("recommendation units %+v", p.Recommendation)
	}
	_, again, _ := runCLI(t, "plan", b, "--json", "--target-yield", "99 %", "--seed", "9")
	if again != out {
		t.Error("the same seed gave another plan")
	}
}

// --pdf writes the plan with its histograms; bad input exits 2 and says why.
func TestPlanPDFAndBadInput(t *testing.T) {
	b := planBudget(t, "  coefficients:\n    - {name: gain, adjusts: gain, format: Q2.20}\n    - {name: offset, adjusts: offset, format: Q4.20}\n")
	pdf := filepath.Join(t.TempDir(), "plan.pdf")
	code, out, errOut := runCLI(t, "plan", b, "--pdf", pdf)
	if code != 0 || errOut != "" || !strings.Contains(out, "plan with histograms: "+pdf) || !strings.Contains(out, "Firmware coefficients: gain Q2.20 from −2 to 2 − 2^−20, saturates 0 %") {
		t.Fatalf("exit %d, stderr %q\n%s", code, errOut, out)
	}
	data, err := os.ReadFile(pdf)
	if err != nil || !bytes.HasPrefix(data, []byte("%PDF-")) {
		t.Fatalf("no PDF: %v", err)
	}
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"plan"}, "usage"},
		{[]string{"plan", b, "--target-yield", "0.995"}, "--target-yield"},
		{[]string{"plan", b, "--target-yield", "100 %"}, "--target-yield"},
		{[]string{"plan", filepath.Join(t.TempDir(), "none-budget.yaml")}, "none-budget.yaml"},
	} {
		code, out, errOut := runCLI(t, c.args...)
		if code != 2 || !strings.Contains(errOut, c.want) {
			t.Errorf("%v: exit %d, stderr %q\n%s", c.args, code, errOut, out)
		}
	}
	code, _, errOut = runCLI(t, "plan", filepath.Join(t.TempDir(), "x.yaml"), "--json")
	var e errorOut
	decodeStrict(t, strings.TrimSpace(errOut), &e)
	if code != 2 || e.Kind != kindError || e.ExitCode != 2 {
		t.Errorf("--json error: exit %d, %+v", code, e)
	}
}

// trimline plan runs on every demo product's budget file.
func TestPlanEveryDemoBudget(t *testing.T) {
	budgets, _ := filepath.Glob(filepath.Join("..", "..", "sequences", "*budget*.yaml"))
	if len(budgets) == 0 {
		t.Skip("no budget files in sequences/")
	}
	for _, b := range budgets {
		code, out, errOut := runCLI(t, "plan", b, "--json")
		if code != 0 || errOut != "" {
			t.Errorf("%s: exit %d, stderr %q", b, code, errOut)
			continue
		}
		var p planOut
		decodeStrict(t, strings.TrimSpace(out), &p)
		if p.Trials < 100000 || len(p.Quantities) < 4 || p.Product == "" {
			t.Errorf("%s: %+v", b, p)
		}
	}
}
