package sequencer

import (
	"errors"
	"math"
	"reflect"
	"testing"

	"trimline/instruments/units"
)

// A batch ends with the worst that happened: stopped, then a station fault, then a
// failed or held unit.
func TestTallyErr(t *testing.T) {
	recs := func(vs ...Verdict) []*Record {
		var out []*Record
		for _, v := range vs {
			out = append(out, &Record{Verdict: v})
		}
		return out
	}
	for _, c := range []struct {
		t    Tally
		want error
	}{
		{Tally{Records: recs(Pass, Pass)}, nil},
		{Tally{Records: recs(Pass, Review)}, ErrUnitsFailed},
		{Tally{Records: recs(Fail, Fault, Pass)}, ErrUnitFault},
		{Tally{Records: recs(Aborted)}, ErrUnitFault},
		{Tally{Records: recs(Fail), Skipped: []string{"SN2"}}, ErrBatchStopped},
	} {
		if err := c.t.Err(); !errors.Is(err, c.want) || (c.want == nil) != (err == nil) {
			t.Errorf("%+v: %v, want %v", c.t, err, c.want)
		}
	}
}

// Yield is over judged units; post-trim spreads only over units that passed.
func TestTallySummary(t *testing.T) {
	rec := func(v Verdict, preOffset, postOffset float64) *Record {
		return &Record{Verdict: v, Results: []Result{{Name: ResPreOffset, Value: preOffset, Valid: true}, {Name: ResPostOffset, Value: postOffset, Valid: true}}}
	}
	defs := []ResultDef{{Name: ResPreOffset, Dim: units.Volt, Stage: AsFound}, {Name: ResPostOffset, Dim: units.Volt, Stage: AsLeft}}
	tl := Tally{Records: []*Record{rec(Pass, 1, 10), rec(Pass, 3, 20), rec(Fail, 5, 99), {Verdict: Fault}}, Results: defs}
	s := tl.Summary()
	if len(s.Spreads) != 2 {
		t.Fatalf("%d spreads, want 2: %+v", len(s.Spreads), s.Spreads)
	}
	if s.Units != 4 || s.Passed != 2 || s.Failed != 1 || s.Faulted != 1 || math.Abs(s.Yield-2.0/3) > 1e-15 {
		t.Errorf("summary %+v", s)
	}
	for _, sp := range s.Spreads {
		switch sp.Result {
		case ResPreOffset: // 1, 3, 5: mean 3, sample SD 2 (hand-worked)
			if sp.N != 3 || sp.Mean != 3 || sp.SD != 2 {
				t.Errorf("pre-trim offset %+v", sp)
			}
		case ResPostOffset: // 10, 20 over the passed units: mean 15, SD √50 (hand-worked)
			if sp.N != 2 || sp.Mean != 15 || math.Abs(sp.SD-math.Sqrt(50)) > 1e-12 {
				t.Errorf("post-trim offset %+v", sp)
			}
		}
	}
	if s := (&Tally{}).Summary(); !math.IsNaN(s.Yield) {
		t.Errorf("empty batch yield %v, want NaN", s.Yield)
	}
}

// The spreads follow the sequence's declared results, whatever their names: every
// voltage and ratio as found or as left, in declaration order; no trim codes.
func TestSummarySpreadsDeclaredResults(t *testing.T) {
	defs := []ResultDef{
		{Name: "zero_in", Dim: units.Volt, Stage: AsFound},
		{Name: "coarse_code", Dim: units.Count, Stage: Adjustment},
		{Name: "span_out", Dim: units.Ratio, Stage: AsLeft},
		{Name: "zero_out", Dim: units.Volt, Stage: AsLeft},
		{Name: "codes_used", Dim: units.Count, Stage: AsLeft},
	}
	rec := func(v Verdict, zeroIn, spanOut, zeroOut float64) *Record {
		return &Record{Verdict: v, Results: []Result{
			{Name: "zero_in", Value: zeroIn, Valid: true}, {Name: "coarse_code", Value: 7, Valid: true},
			{Name: "span_out", Value: spanOut, Valid: true}, {Name: "zero_out", Value: zeroOut, Valid: true},
			{Name: "codes_used", Value: 3, Valid: true}}}
	}
	tl := Tally{Records: []*Record{rec(Pass, 2, 1e-6, 4), rec(Fail, 4, 9, 9), rec(Pass, 6, 3e-6, 8)}, Results: defs}
	got := tl.Summary().Spreads
	want := []Spread{
		{Result: "zero_in", Stage: AsFound, Dim: units.Volt, Mean: 4, SD: 2, N: 3},
		{Result: "span_out", Stage: AsLeft, Dim: units.Ratio, PassedOnly: true, Mean: 2e-6, SD: math.Sqrt(2) * 1e-6, N: 2},
		{Result: "zero_out", Stage: AsLeft, Dim: units.Volt, PassedOnly: true, Mean: 6, SD: math.Sqrt(8), N: 2},
	}
	if len(got) != len(want) {
		t.Fatalf("spreads %+v, want %+v", got, want)
	}
	for i := range want {
		g := got[i]
		if math.Abs(g.SD-want[i].SD) < 1e-12*math.Max(1, want[i].SD) {
			g.SD = want[i].SD
		}
		if math.Abs(g.Mean-want[i].Mean) < 1e-18 {
			g.Mean = want[i].Mean
		}
		if !reflect.DeepEqual(g, want[i]) {
			t.Errorf("spread %d: %+v, want %+v", i, got[i], want[i])
		}
	}
}

// A per-channel result is spread channel by channel, each over its own
// channel's values, and the channels of one result follow one another although
// the step declares them channel after channel. Currents and counts the unit
// reported are spread; an offset coefficient in counts that is an adjustment,
// and a trim code, are not.
func TestSummarySpreadsEachChannel(t *testing.T) {
	var defs []ResultDef
	for _, ch := range []string{"1", "2"} {
		defs = append(defs,
			ResultDef{Name: "pre_offset", Channel: ch, Dim: units.Count, Stage: AsFound, Quantity: "offset"},
			ResultDef{Name: "pre_gain_error", Channel: ch, Dim: units.Ratio, Stage: AsFound, Quantity: "gain_error"},
			ResultDef{Name: "offset_coefficient", Channel: ch, Dim: units.Count, Stage: Adjustment, Quantity: "offset_coefficient"})
	}
	defs = append(defs,
		ResultDef{Name: "supply_current", Dim: units.Ampere, Stage: AsFound, Quantity: "mean"},
		ResultDef{Name: "offset_code", Dim: units.Count, Stage: Adjustment, Quantity: "code"})
	rec := func(off1, off2, g1, g2, supply float64) *Record {
		return &Record{Verdict: Pass, Results: []Result{
			{Name: "pre_offset", Channel: "1", Value: off1, Valid: true}, {Name: "pre_gain_error", Channel: "1", Value: g1, Valid: true},
			{Name: "offset_coefficient", Channel: "1", Value: -off1, Valid: true},
			{Name: "pre_offset", Channel: "2", Value: off2, Valid: true}, {Name: "pre_gain_error", Channel: "2", Value: g2, Valid: true},
			{Name: "offset_coefficient", Channel: "2", Value: -off2, Valid: true},
			{Name: "supply_current", Value: supply, Valid: true}, {Name: "offset_code", Value: 7, Valid: true}}}
	}
	tl := Tally{Records: []*Record{rec(1, 10, 1e-3, -2e-3, 1e-3), rec(3, 30, 3e-3, -4e-3, 3e-3)}, Results: defs}
	// Hand-worked: two values a and b have mean (a+b)/2 and sample SD |a−b|/√2.
	want := []Spread{
		{Result: "pre_offset", Channel: "1", Stage: AsFound, Dim: units.Count, Mean: 2, SD: math.Sqrt2, N: 2},
		{Result: "pre_offset", Channel: "2", Stage: AsFound, Dim: units.Count, Mean: 20, SD: 20 / math.Sqrt2, N: 2},
		{Result: "pre_gain_error", Channel: "1", Stage: AsFound, Dim: units.Ratio, Mean: 2e-3, SD: 2e-3 / math.Sqrt2, N: 2},
		{Result: "pre_gain_error", Channel: "2", Stage: AsFound, Dim: units.Ratio, Mean: -3e-3, SD: 2e-3 / math.Sqrt2, N: 2},
		{Result: "supply_current", Stage: AsFound, Dim: units.Ampere, Mean: 2e-3, SD: 2e-3 / math.Sqrt2, N: 2},
	}
	got := tl.Summary().Spreads
	if len(got) != len(want) {
		t.Fatalf("spreads %+v, want %+v", got, want)
	}
	for i, w := range want {
		g := got[i]
		if math.Abs(g.Mean-w.Mean) > 1e-12*math.Abs(w.Mean) || math.Abs(g.SD-w.SD) > 1e-12*w.SD {
			t.Errorf("spread %d: %+v, want %+v", i, g, w)
		}
		g.Mean, g.SD = w.Mean, w.SD
		if !reflect.DeepEqual(g, w) {
			t.Errorf("spread %d: %+v, want %+v", i, got[i], w)
		}
	}
}
