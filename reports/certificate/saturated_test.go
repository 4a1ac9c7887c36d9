package certificate_test

import (
	"strings"
	"testing"

	"trimline/limits"
	"trimline/sequencer"
)

// A run whose offset trim saturated: the offset DAC computed but not written,
// the run ended at the trim step, and a toleranced limit of the as-left stage
// left unmeasured (no decision) beside an expression limit.
func saturatedRecord() *sequencer.Record {
	r := stagedRecord()
	r.Verdict = sequencer.Fail
	r.Trims = []sequencer.TrimCode{
		{DAC: "gain", Before: 0, Ideal: 12.4, Code: 12, Readback: 12, Written: true, Stored: true},
		{DAC: "offset", Before: 0, Ideal: -603.26, Code: -512, Saturated: true},
	}
	r.Steps = []sequencer.StepRun{
		{Name: "incoming", Kind: "sweep", Stage: sequencer.AsFound, Status: sequencer.StepDone},
		{Name: "trim", Kind: "trim", Stage: sequencer.Adjustment, Status: sequencer.StepDone, Note: "ended the run: trim saturated"},
		{Name: "final", Kind: "sweep", Stage: sequencer.AsLeft, Status: sequencer.StepNotReached, Note: `the run ended at step "trim": trim saturated`},
	}
	lo, hi := -1000.0, 1000.0
	r.Outcomes = append(r.Outcomes,
		limits.Outcome{Name: "unmeasured offset", Description: "Offset after trim.", Expr: "within(post_offset, -1000, 1000)", Unit: "uV",
			Uses: []string{"post_offset"}, Values: map[string]float64{}, Reason: "result post_offset is not a valid number: not measured: trim saturated",
			Tolerance: &limits.Unjudged{Lower: &lo, Upper: &hi, Rule: limits.RuleGuarded, GuardFactor: 1}},
		limits.Outcome{Name: "unmeasured headroom", Expr: "within(offset_code, -462, 461)", Unit: "code",
			Uses: []string{"offset_code"}, Values: map[string]float64{}, Reason: "result offset_code is not a valid number: offset trim saturated"},
	)
	return r
}

func TestSaturatedRunCertificate(t *testing.T) {
	text := pdfText(t, render(t, saturatedRecord(), opt))
	requireText(t, text,
		"End-of-line trim of gain,", // the offset DAC was not written
		"ended the run: trim saturated",
		`the run ended at step "trim": trim saturated`,
		"−1000 … 1000 µV", "not measured: no decision",
		"6 limits: written as expressions", "Applies to limits post_offset, post_gain and unmeasured offset.",
	)
	ft := flat(text)
	for _, bad := range []string{"trim of gain and offset", "within(post_offset", "unmeasured offset: written as", "unmeasured offset and"} {
		if strings.Contains(ft, bad) {
			t.Errorf("text holds %q", bad)
		}
	}
}
