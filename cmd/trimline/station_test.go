package main

import (
	"bytes"
	"strings"
	"testing"

	"trimline/instruments/units"
	"trimline/sequencer"
)

// A product whose results have other names than the demo's prints them by
// stage and dimension: a voltage pair before → after, a ratio measured only as
// left, no trim codes.
func TestLiveLineReadsResultsByStage(t *testing.T) {
	rec := &sequencer.Record{Serial: "ZX-1", Verdict: sequencer.Pass, Results: []sequencer.Result{
		{Name: "coarse_code", Unit: "code", Stage: sequencer.Adjustment, Value: 97, Valid: true},
		{Name: "zero_in", Unit: "V", Stage: sequencer.AsFound, Value: -1.234e-3, Valid: true},
		{Name: "zero_out", Unit: "V", Stage: sequencer.AsLeft, Value: 3.1e-6, Valid: true},
		{Name: "span_out", Unit: "ratio", Stage: sequencer.AsLeft, Value: 12e-6, Valid: true},
		{Name: "span_late", Unit: "ratio", Stage: sequencer.AsLeft, Value: 99, Valid: true},
	}}
	got := liveLine(1, 1, rec, "TL1-000001")
	for _, want := range []string{"zero  -1.23 mV →    3.1 µV", "span out +12.0 ppm", "TL1-000001"} {
		if !strings.Contains(got, want) {
			t.Errorf("live line %q lacks %q", got, want)
		}
	}
	for _, bad := range []string{"offset", "gain", "—", "97", "span late"} {
		if strings.Contains(got, bad) {
			t.Errorf("live line %q holds %q", got, bad)
		}
	}
}

// The demo's names read as before: offset and gain error, before → after.
func TestLiveLineDemoNames(t *testing.T) {
	rec := &sequencer.Record{Serial: "BRX-00001", Verdict: sequencer.Pass, Results: []sequencer.Result{
		{Name: sequencer.ResPreOffset, Unit: "V", Value: -448e-6, Valid: true},
		{Name: sequencer.ResPreGainError, Unit: "ratio", Value: 0.00958, Valid: true},
		{Name: sequencer.ResOffsetCode, Unit: "code", Value: 1873, Valid: true},
		{Name: sequencer.ResPostOffset, Unit: "V", Value: -12e-6, Valid: true},
		{Name: sequencer.ResPostGainError, Unit: "ratio", Value: -11.4e-6, Valid: true},
	}} // no stages: a record of schema 1
	want := "1/1  BRX-00001    PASS     offset   -448 µV →    -12 µV   gain error +0.958 % → -11.4 ppm"
	if got := liveLine(1, 1, rec, ""); got != want {
		t.Errorf("live line\n%q, want\n%q", got, want)
	}
}

func TestPrintSummaryUnitsByDimension(t *testing.T) {
	var b bytes.Buffer
	printSummary(&b, sequencer.Summary{Units: 2, Passed: 2, Yield: 1, Spreads: []sequencer.Spread{
		{Result: "zero_in", Stage: sequencer.AsFound, Dim: units.Volt, Mean: 1.5e-3, SD: 4e-3, N: 2},
		{Result: "span_out", Stage: sequencer.AsLeft, Dim: units.Ratio, PassedOnly: true, Mean: -2e-6, SD: 5e-6, N: 2},
		{Result: "span_in", Stage: sequencer.AsFound, Dim: units.Ratio, Mean: 2e-3, SD: 6e-3, N: 2},
		{Result: "never", Stage: sequencer.AsLeft, Dim: units.Volt, N: 0},
	}})
	out := b.String()
	for _, want := range []string{
		"zero_in                  mean    +1.5000 mV    σ    4.0000 mV    (n = 2)",
		"span_out                 mean    -2.0000 ppm   σ    5.0000 ppm   (n = 2)",
		"span_in                  mean    +0.2000 %     σ    0.6000 %     (n = 2)",
	} {
		if !strings.Contains(out, want) {
			t.Errorf("summary lacks %q:\n%s", want, out)
		}
	}
	if strings.Contains(out, "never") {
		t.Errorf("summary shows a result no unit had:\n%s", out)
	}
}
