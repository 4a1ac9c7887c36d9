package sequencer

import (
	"errors"
	"math"
	"testing"
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
	tl := Tally{Records: []*Record{rec(Pass, 1, 10), rec(Pass, 3, 20), rec(Fail, 5, 99), {Verdict: Fault}}}
	s := tl.Summary()
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
