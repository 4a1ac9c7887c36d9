package main

import (
	"bytes"
	"strings"
	"testing"

	"trimline/instruments/units"
	"trimline/sequencer"
)

// A product whose results have other names than the demo's pairs them by what
// they measure, not by name: a voltage before → after labelled by its quantity;
// a ratio measured only as left, and ratios of different quantities as found
// and as left, show nothing; no trim codes.
func TestLiveLineReadsResultsByStage(t *testing.T) {
	rec := &sequencer.Record{Serial: "ZX-1", Verdict: sequencer.Pass, Results: []sequencer.Result{
		{Name: "coarse_code", Unit: "code", Stage: sequencer.Adjustment, Quantity: "code", Value: 97, Valid: true},
		{Name: "zero_in", Unit: "V", Stage: sequencer.AsFound, Quantity: "offset", Value: -1.234e-3, Valid: true},
		{Name: "span_in", Unit: "ratio", Stage: sequencer.AsFound, Quantity: "gain_error", Value: -2.72e-3, Valid: true},
		{Name: "bow_in", Unit: "ratio", Stage: sequencer.AsFound, Value: 7e-6, Valid: true}, // no quantity: never paired
		{Name: "zero_out", Unit: "V", Stage: sequencer.AsLeft, Quantity: "offset", Value: 3.1e-6, Valid: true},
		{Name: "span_out", Unit: "ratio", Stage: sequencer.AsLeft, Quantity: "nonlinearity", Value: 5.5e-6, Valid: true},
		{Name: "bow_out", Unit: "ratio", Stage: sequencer.AsLeft, Value: 99, Valid: true},
	}}
	got := liveLine(1, 1, rec, "TL1-000001")
	for _, want := range []string{"offset  -1.23 mV →    3.1 µV", "TL1-000001"} {
		if !strings.Contains(got, want) {
			t.Errorf("live line %q lacks %q", got, want)
		}
	}
	for _, bad := range []string{"zero", "span", "bow", "gain", "nonlinearity", "ppm", "%", "—", "97"} {
		if strings.Contains(got, bad) {
			t.Errorf("live line %q holds %q", got, bad)
		}
	}
}

// A plain number pairs like any other quantity, and is shown bare.
func TestLiveLinePlainNumber(t *testing.T) {
	rec := &sequencer.Record{Serial: "ZX-2", Verdict: sequencer.Pass, Results: []sequencer.Result{
		{Name: "pre_lof", Unit: "number", Stage: sequencer.AsFound, Quantity: "lack_of_fit", Value: 1.3002, Valid: true},
		{Name: "post_lof", Unit: "number", Stage: sequencer.AsLeft, Quantity: "lack_of_fit", Value: 0.871, Valid: true},
	}}
	if got, want := liveLine(1, 1, rec, ""), "lack of fit  1.30 → 0.871"; !strings.HasSuffix(got, want) {
		t.Errorf("live line %q, want it to end %q", got, want)
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

// A current response pairs in amperes with the SI prefix each value suits
// (units.Format, three digits as found, two as left), and counts the unit
// reported with one decimal and the word once at the end.
func TestLiveLineCurrentAndCounts(t *testing.T) {
	amps := &sequencer.Record{Serial: "LX-1", Verdict: sequencer.Pass, Results: []sequencer.Result{
		{Name: "pre_offset", Unit: "A", Stage: sequencer.AsFound, Quantity: "offset", Value: -34.31e-6, Valid: true},
		{Name: "offset_coefficient", Unit: "A", Stage: sequencer.Adjustment, Quantity: "offset_coefficient", Value: 34e-6, Valid: true},
		{Name: "post_offset", Unit: "A", Stage: sequencer.AsLeft, Quantity: "offset", Value: 0.1e-6, Valid: true},
	}}
	// -34.31 µA to three digits is -34.3 µA; 0.1 µA to two is 100 nA.
	if got, want := liveLine(1, 1, amps, ""), "offset  -34.3 µA →    100 nA"; !strings.HasSuffix(got, want) {
		t.Errorf("live line %q, want it to end %q", got, want)
	}
	counts := &sequencer.Record{Serial: "CX-1", Verdict: sequencer.Pass, Results: []sequencer.Result{
		{Name: "pre_offset", Unit: "count", Stage: sequencer.AsFound, Quantity: "offset", Value: -67.94, Valid: true},
		{Name: "post_offset", Unit: "count", Stage: sequencer.AsLeft, Quantity: "offset", Value: 0.27, Valid: true},
	}}
	if got, want := liveLine(1, 1, counts, ""), "offset  -67.9 →   0.3 counts"; !strings.HasSuffix(got, want) {
		t.Errorf("live line %q, want it to end %q", got, want)
	}
}

// A unit with several channels shows, per quantity, the channel whose as-left
// value is furthest from zero, paired with that channel's own as-found value,
// and says which channel of how many. An invalid as-left value is the worst.
func TestLiveLineWorstChannel(t *testing.T) {
	res := func(name, ch string, stage sequencer.Stage, q, unit string, v float64) sequencer.Result {
		return sequencer.Result{Name: name, Channel: ch, Stage: stage, Quantity: q, Unit: unit, Value: v, Valid: true}
	}
	rec := &sequencer.Record{Serial: "QX-1", Verdict: sequencer.Pass, Results: []sequencer.Result{
		res("pre_offset", "1", sequencer.AsFound, "offset", "count", -67.9),
		res("pre_gain_error", "1", sequencer.AsFound, "gain_error", "ratio", 5e-3),
		res("pre_offset", "2", sequencer.AsFound, "offset", "count", 3.2),
		res("pre_gain_error", "2", sequencer.AsFound, "gain_error", "ratio", -1e-3),
		res("pre_offset", "3", sequencer.AsFound, "offset", "count", 12.5),
		res("pre_gain_error", "3", sequencer.AsFound, "gain_error", "ratio", 2e-3),
		res("post_offset", "1", sequencer.AsLeft, "offset", "count", 0.1),
		res("post_gain_error", "1", sequencer.AsLeft, "gain_error", "ratio", 1e-6),
		res("post_offset", "2", sequencer.AsLeft, "offset", "count", -0.4), // worst offset: |−0.4| is the largest
		res("post_gain_error", "2", sequencer.AsLeft, "gain_error", "ratio", -2e-6),
		res("post_offset", "3", sequencer.AsLeft, "offset", "count", 0.2),
		{Name: "post_gain_error", Channel: "3", Stage: sequencer.AsLeft, Quantity: "gain_error", Unit: "ratio", Note: "fit failed"}, // invalid: worst gain
	}}
	want := "1/1  QX-1         PASS     offset ch 2 (worst of 3)    3.2 →  -0.4 counts   gain error ch 3 (worst of 3) +0.200 % →       —"
	if got := liveLine(1, 1, rec, ""); got != want {
		t.Errorf("live line\n%q, want\n%q", got, want)
	}
}

// A one-channel unit that measures a quantity as found twice (at two
// temperatures, before its drift correction) still pairs one as-found value
// with its as-left one: no "worst of", which is for several channels.
func TestLiveLineQuantityAsFoundTwice(t *testing.T) {
	rec := &sequencer.Record{Serial: "BXT-1", Verdict: sequencer.Pass, Results: []sequencer.Result{
		{Name: "room_drift_offset", Stage: sequencer.AsFound, Quantity: "offset", Unit: "V", Value: 5.89e-3, Valid: true},
		{Name: "hot_drift_offset", Stage: sequencer.AsFound, Quantity: "offset", Unit: "V", Value: 30e-3, Valid: true},
		{Name: "post_offset", Stage: sequencer.AsLeft, Quantity: "offset", Unit: "V", Value: -1.6e-6, Valid: true},
	}}
	got := liveLine(1, 1, rec, "")
	if strings.Contains(got, "worst of") || !strings.Contains(got, "offset   5.89 mV →   -1.6 µV") {
		t.Errorf("live line %q: want the first as-found offset paired with the as-left one, no channel", got)
	}
}

// Per-channel spreads are labelled with their channel; currents take the SI
// prefix their size suits, reported counts read "counts", and the unit
// column widens to the longest unit so the σ column still lines up.
func TestPrintSummaryChannelsCurrentsCounts(t *testing.T) {
	var b bytes.Buffer
	printSummary(&b, sequencer.Summary{Units: 2, Passed: 2, Yield: 1, Spreads: []sequencer.Spread{
		{Result: "pre_offset", Channel: "2", Stage: sequencer.AsFound, Dim: units.Count, Mean: -3.5, SD: 11.25, N: 2},
		{Result: "post_offset", Stage: sequencer.AsLeft, Dim: units.Ampere, PassedOnly: true, Mean: -15.129e-9, SD: 63.8454e-9, N: 2},
		{Result: "supply_current", Stage: sequencer.AsFound, Dim: units.Ampere, Mean: 1.191e-3, SD: 31.9e-6, N: 2},
	}})
	out := b.String()
	for _, want := range []string{
		"pre_offset ch 2          mean    -3.5000 counts  σ   11.2500 counts  (n = 2)",
		"post_offset              mean   -15.1290 nA      σ   63.8454 nA      (n = 2)",
		"supply_current           mean    +1.1910 mA      σ    0.0319 mA      (n = 2)",
	} {
		if !strings.Contains(out, want) {
			t.Errorf("summary lacks %q:\n%s", want, out)
		}
	}
}

// A record with a note of a chamber still hot: the live line warns the
// operator under the unit's line; a record without notes has no warning.
func TestLiveLineWarnsOfAHotChamber(t *testing.T) {
	rec := &sequencer.Record{Serial: "ZX-2", Verdict: sequencer.Pass,
		Notes: []string{"chamber at 84.9 °C: wait before opening the fixture (safe temperature 25 °C, handling band ±5 °C)"}}
	got := liveLine(1, 1, rec, "")
	if want := "\n     ! chamber at 84.9 °C: wait before opening the fixture"; !strings.Contains(got, want) {
		t.Errorf("live line %q lacks %q", got, want)
	}
	rec.Notes = nil
	if got := liveLine(1, 1, rec, ""); strings.Contains(got, "wait") {
		t.Errorf("live line %q warns with no note", got)
	}
}
