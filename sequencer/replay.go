package sequencer

import (
	"context"
	"errors"
	"fmt"
	"math"

	"trimline/limits"
)

// ErrNotReplayable is returned for records the station could not judge (FAULT,
// ABORTED), and for schema-1 records without a sweep: there is nothing to
// recompute. A schema-2 record judged before any sweep (a DUT reply that failed
// the unit) replays: its steps say why it ended.
var ErrNotReplayable = errors.New("record has no measurement to replay")

// Replay recomputes a stored record from its raw readings with the files that were
// in force (cfg.Station and cfg.Sequence must be loaded from the stored bytes):
// point statistics, fits, uncertainties, trim codes, results, limit verdicts and
// the unit's verdict, by the same code the engine runs. It touches no instrument.
// The returned record differs from the stored one only where this release computes
// differently; Differences lists where.
func Replay(cfg Config, stored *Record) (*Record, error) {
	if stored.Verdict == Fault || stored.Verdict == Aborted || len(stored.Sweeps) == 0 && stored.Schema < 2 {
		return nil, fmt.Errorf("%s (%s): %w", stored.RunID, stored.Verdict, ErrNotReplayable)
	}
	seq := cfg.Sequence
	rec := &Record{
		Schema: stored.Schema, Metrology: stored.Metrology, RunID: stored.RunID, Serial: stored.Serial, Product: stored.Product, Revision: stored.Revision,
		Station: stored.Station, Operator: stored.Operator, Software: stored.Software,
		Started: stored.Started, Finished: stored.Finished, Files: stored.Files, Instruments: stored.Instruments,
		IdealGain: seq.IdealGain, IdealOffset: seq.IdealOffset, FullScale: seq.FullScale, ResponseUnit: seq.recordResponseUnit(),
		Conditions: stored.Conditions, Coverage: coverage(seq), Engineering: stored.Engineering, RetestOf: stored.RetestOf,
		Simulated: stored.Simulated,
	}
	u := newUnit(cfg, rec, replaying)
	u.stored = stored
	// The steps take the facts of the run (readings, read-backs, what was stored)
	// from the stored record and compute everything else.
	if err := runSteps(context.Background(), u); err != nil {
		return nil, fmt.Errorf("%s: replay: %w", stored.RunID, err)
	}
	finish(u)
	return rec, nil
}

// Differences lists, in words, every computed quantity where two records of the
// same run disagree: verdict, trim codes, re-trim passes, results (value, validity, expanded
// uncertainty) and limit outcomes. Numbers agree when they match to 1e-9 relative
// (or 1e-15 absolute); anything else is reported.
func Differences(recorded, replayed *Record) []string {
	var d []string
	add := func(format string, args ...any) { d = append(d, fmt.Sprintf(format, args...)) }
	if recorded.Verdict != replayed.Verdict {
		add("verdict: recorded %s, recomputed %s", recorded.Verdict, replayed.Verdict)
	}
	if len(recorded.Trims) != len(replayed.Trims) {
		add("trim codes: recorded %d DACs, recomputed %d", len(recorded.Trims), len(replayed.Trims))
	}
	for i := range min(len(recorded.Trims), len(replayed.Trims)) {
		a, b := recorded.Trims[i], replayed.Trims[i]
		dac := limits.ChannelKey(a.DAC, a.Channel)
		if a.Code != b.Code || a.Saturated != b.Saturated {
			add("%s trim code: recorded %d, recomputed %d", dac, a.Code, b.Code)
		}
		if !same(a.Ideal, b.Ideal) {
			add("%s trim ideal code: recorded %.9g, recomputed %.9g", dac, a.Ideal, b.Ideal)
		}
	}
	coefDifferences(recorded.Coefficients, replayed.Coefficients, add)
	zeroDifferences(recorded.Zeros, replayed.Zeros, add)
	if len(recorded.Retrims) != len(replayed.Retrims) {
		add("re-trim passes: recorded %d, recomputed %d", len(recorded.Retrims), len(replayed.Retrims))
	}
	for i := range min(len(recorded.Retrims), len(replayed.Retrims)) {
		a, b := recorded.Retrims[i], replayed.Retrims[i]
		what := fmt.Sprintf("%s pass %d (%s)", a.Step, a.Pass, a.DAC)
		switch {
		case a.Step != b.Step || a.DAC != b.DAC || a.Channel != b.Channel || a.Pass != b.Pass || a.Code != b.Code:
			add("%s: recorded code %d, recomputed %s pass %d (%s) code %d", what, a.Code, b.Step, b.Pass, b.DAC, b.Code)
		case !same(a.Error, b.Error) || !same(a.ErrorU, b.ErrorU):
			add("%s error: recorded %.9g (u %.6g), recomputed %.9g (u %.6g)", what, a.Error, a.ErrorU, b.Error, b.ErrorU)
		case !same(a.Sensitivity, b.Sensitivity) || a.Measured != b.Measured:
			add("%s sensitivity: recorded %.9g (measured %v), recomputed %.9g (measured %v)", what, a.Sensitivity, a.Measured, b.Sensitivity, b.Measured)
		case a.Within != b.Within || a.Next != b.Next:
			add("%s: recorded within=%v next code %d, recomputed within=%v next code %d", what, a.Within, a.Next, b.Within, b.Next)
		}
	}
	// A per-channel result or outcome is named name@channel.
	got := map[string]Result{}
	for _, r := range replayed.Results {
		got[limits.ChannelKey(r.Name, r.Channel)] = r
	}
	for _, a := range recorded.Results {
		name := limits.ChannelKey(a.Name, a.Channel)
		b, ok := got[name]
		switch {
		case !ok:
			add("result %s: not computed by this release", name)
		case a.Valid != b.Valid:
			add("result %s: recorded valid=%v, recomputed valid=%v", name, a.Valid, b.Valid)
		case !same(a.Value, b.Value):
			add("result %s: recorded %.9g, recomputed %.9g", name, a.Value, b.Value)
		case !same(a.Unc.Expanded, b.Unc.Expanded):
			add("result %s: recorded U = %.6g, recomputed U = %.6g", name, a.Unc.Expanded, b.Unc.Expanded)
		}
	}
	outs := map[string]bool{}
	for _, o := range replayed.Outcomes {
		outs[limits.ChannelKey(o.Name, o.Channel)] = o.Pass
	}
	for _, o := range recorded.Outcomes {
		name := limits.ChannelKey(o.Name, o.Channel)
		p, ok := outs[name]
		switch {
		case !ok:
			add("limit %q: not judged by this release", name)
		case p != o.Pass:
			add("limit %q: recorded pass=%v, recomputed pass=%v", name, o.Pass, p)
		}
	}
	return d
}

func same(a, b float64) bool {
	if math.IsNaN(a) || math.IsNaN(b) {
		return math.IsNaN(a) && math.IsNaN(b)
	}
	return a == b || math.Abs(a-b) <= 1e-15 || math.Abs(a-b) <= 1e-9*math.Max(math.Abs(a), math.Abs(b))
}
