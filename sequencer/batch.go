package sequencer

import (
	"context"
	"errors"
	"math"
	"slices"

	"trimline/instruments/units"
)

// A batch is one production session: the units of a list of serial numbers run one
// after another on one opened station. The errors below say how a batch ended
// when not every unit passed, worst first.
var (
	// ErrBatchStopped: the batch was stopped (its context cancelled) before
	// every unit ran; the rest were never run, and the batch is not a pass.
	ErrBatchStopped = errors.New("batch stopped before every unit ran")
	// ErrUnitFault: a unit ended in a station fault or was aborted. After a
	// station fault the batch stops: the rest are listed in Skipped.
	ErrUnitFault = errors.New("a unit ended in a station fault or was aborted")
	// ErrUnitsFailed: a unit failed its limits or was held for review (a unit
	// held for review does not ship either).
	ErrUnitsFailed = errors.New("a unit failed or was held for review")
)

// Tally is what a batch did.
type Tally struct {
	Records []*Record // every unit run, in order
	// Skipped are the serials not run because the batch was stopped, or
	// because a unit before them ended in a station fault.
	Skipped []string
	// Results are the results the batch's sequence declares, in declaration
	// order; Summary spreads those of them it can.
	Results []ResultDef
}

// RunBatch runs the units of serials in order. First it checks every serial
// against the sequence's serial rule (Sequence.CheckSerials): if any is refused,
// no unit runs, no instrument is touched and the error wraps ErrBadSerial. Between
// units it checks ctx: once it is cancelled the rest are not run but listed in the
// tally's Skipped. A unit that ends in a station fault (FAULT) ends the batch
// too: the station needs a person before the next unit, so the rest are listed in
// Skipped and the tally's Err is ErrUnitFault. After each unit it calls done with
// the unit's index and record (to store, publish and show it); an error from done
// ends the batch with that error, and that unit is not counted.
func (e *Engine) RunBatch(ctx context.Context, serials []string, done func(i int, rec *Record) error) (*Tally, error) {
	t := &Tally{Results: e.cfg.Sequence.Results()}
	if err := e.cfg.Sequence.CheckSerials(serials); err != nil {
		return t, err
	}
	for i, sn := range serials {
		if ctx.Err() != nil {
			t.Skipped = serials[i:]
			break
		}
		rec := e.Run(ctx, sn)
		if err := done(i, rec); err != nil {
			return t, err
		}
		t.Records = append(t.Records, rec)
		if rec.Verdict == Fault {
			t.Skipped = serials[i+1:]
			break
		}
	}
	return t, nil
}

// Err says how the batch ended: nil when every unit ran and passed, else
// ErrBatchStopped, ErrUnitFault or ErrUnitsFailed, the worst that happened (a
// stop beats a station fault, which beats a failed unit). A batch a station
// fault ended, its last unit FAULT and the rest skipped, is ErrUnitFault.
func (t *Tally) Err() error {
	if len(t.Skipped) > 0 {
		if n := len(t.Records); n > 0 && t.Records[n-1].Verdict == Fault {
			return ErrUnitFault
		}
		return ErrBatchStopped
	}
	var err error
	for _, r := range t.Records {
		switch r.Verdict {
		case Fault, Aborted:
			return ErrUnitFault
		case Fail, Review:
			err = ErrUnitsFailed
		}
	}
	return err
}

// Summary is a batch's yield and the spread of its results.
type Summary struct {
	Units                  int
	Passed, Failed, Review int
	Faulted                int     // station faults and aborted runs
	Yield                  float64 // passed / judged (passed, failed, held for review); NaN when none was judged
	Spreads                []Spread
}

// Spread is the mean and sample standard deviation of one result, on one
// channel, over the units it is taken over; N is how many had a valid value.
// Mean and SD are in SI units of Dim (volts, amperes, counts the unit
// reported, a plain fraction for a ratio, a plain number for a Number).
type Spread struct {
	Result string
	// Channel is the unit's channel of a per-channel result ("" for a result of
	// the whole unit): each channel is spread on its own, over that channel's
	// values only.
	Channel    string
	Stage      Stage     // AsFound or AsLeft
	Dim        units.Dim // units.Volt, units.Ampere, units.Count, units.Ratio or units.Number
	PassedOnly bool      // over the units that passed (what ships), else every measured unit (the process)
	Mean, SD   float64
	N          int
}

// spreadable reports whether a summary spreads the declared result d: voltages,
// currents, counts the unit reported (a measured quantity: ResultDef.Unit
// "count"), ratios and plain numbers measured as found (over every measured
// unit: the process) or as left (over the units that passed: what ships). Trim
// codes are not spread.
func spreadable(d ResultDef) bool {
	measured := d.Dim == units.Volt || d.Dim == units.Ampere || d.Dim == units.Ratio || d.Dim == units.Number ||
		d.Unit() == "count"
	return measured && (d.Stage == AsFound || d.Stage == AsLeft)
}

// Summary counts the verdicts, the yield and the spread of every voltage,
// current, reported count, ratio and plain-number result the tally's Results
// declare as found or as left, one Spread per result and channel. The spreads
// follow the order in which the results are first declared; the channels of a
// per-channel result follow one another, in declaration order.
func (t *Tally) Summary() Summary {
	s := Summary{Units: len(t.Records)}
	for _, r := range t.Records {
		switch r.Verdict {
		case Pass:
			s.Passed++
		case Fail:
			s.Failed++
		case Review:
			s.Review++
		default:
			s.Faulted++
		}
	}
	s.Yield = math.NaN()
	if judged := s.Passed + s.Failed + s.Review; judged > 0 {
		s.Yield = float64(s.Passed) / float64(judged)
	}
	for _, d := range byResult(t.Results) {
		if !spreadable(d) {
			continue
		}
		passedOnly := d.Stage == AsLeft
		var xs []float64
		for _, r := range t.Records {
			if passedOnly && r.Verdict != Pass {
				continue
			}
			if v, ok := r.ResultOn(d.Name, d.Channel); ok {
				xs = append(xs, v)
			}
		}
		m, sd, n := MeanSD(xs)
		s.Spreads = append(s.Spreads, Spread{Result: d.Name, Channel: d.Channel, Stage: d.Stage, Dim: d.Dim, PassedOnly: passedOnly, Mean: m, SD: sd, N: n})
	}
	return s
}

// Result returns the value of the named result and whether it is valid; NaN and
// false when the record has no such result or it could not be computed.
func (r *Record) Result(name string) (float64, bool) {
	for _, res := range r.Results {
		if res.Name == name {
			return res.Value, res.Valid
		}
	}
	return math.NaN(), false
}

// ResultOn returns the value of the named result on channel ch ("" for a
// result of the whole unit) and whether it is valid; NaN and false when the
// record has no such result or it could not be computed.
func (r *Record) ResultOn(name, ch string) (float64, bool) {
	for _, res := range r.Results {
		if res.Name == name && res.Channel == ch {
			return res.Value, res.Valid
		}
	}
	return math.NaN(), false
}

// byResult is defs with every declaration of one name brought together at
// the place of its first, keeping their order otherwise: a per-channel step
// declares its results channel after channel, and a summary reads better
// result after result.
func byResult(defs []ResultDef) []ResultDef {
	first := map[string]int{}
	for i, d := range defs {
		if _, ok := first[d.Name]; !ok {
			first[d.Name] = i
		}
	}
	out := slices.Clone(defs)
	slices.SortStableFunc(out, func(a, b ResultDef) int { return first[a.Name] - first[b.Name] })
	return out
}

// MeanSD returns the mean and the sample standard deviation (n − 1) of xs, and
// len(xs); zeros for no values, SD 0 for one.
func MeanSD(xs []float64) (mean, sd float64, n int) {
	n = len(xs)
	if n == 0 {
		return 0, 0, 0
	}
	for _, x := range xs {
		mean += x
	}
	mean /= float64(n)
	if n > 1 {
		for _, x := range xs {
			sd += (x - mean) * (x - mean)
		}
		sd = math.Sqrt(sd / float64(n-1))
	}
	return mean, sd, n
}
