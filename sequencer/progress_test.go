package sequencer_test

import (
	"context"
	"errors"
	"fmt"
	"strings"
	"testing"
	"time"

	"trimline/instruments"
	"trimline/instruments/sim/serve"
	"trimline/sequencer"
)

// collect returns a progress hook that appends every event to *evs.
func collect(evs *[]sequencer.Event) func(sequencer.Event) {
	return func(ev sequencer.Event) { *evs = append(*evs, ev) }
}

// The demo sequence run on the simulated bench reports, in order: the unit's
// start with every step of the sequence and the expected time, each step's start
// and end around its points, and the final verdict last. Every point is one the
// record keeps (same level, same mean), its error the mean less the ideal
// transfer IdealGain·x + IdealOffset.
func TestProgressEventsOnDemo(t *testing.T) {
	e := setup(t, "sim", nil, "")
	var evs []sequencer.Event
	rec := e.RunWith(context.Background(), "BRX-00001", sequencer.RunOptions{Operator: "Ida Vance", Progress: collect(&evs)})
	if rec.Verdict != sequencer.Pass {
		t.Fatalf("verdict %s, fault %q, reasons %q", rec.Verdict, rec.Fault, rec.Reasons)
	}
	if rec.Operator != "Ida Vance" {
		t.Errorf("operator %q, want the run's", rec.Operator)
	}
	if len(evs) < 2 {
		t.Fatalf("%d events", len(evs))
	}
	first, last := evs[0], evs[len(evs)-1]
	if first.Kind != sequencer.EventUnitStart || last.Kind != sequencer.EventUnitEnd {
		t.Fatalf("first event %s, last %s", first.Kind, last.Kind)
	}
	if last.Verdict != rec.Verdict || last.RunID != rec.RunID || first.RunID != rec.RunID || first.Serial != "BRX-00001" {
		t.Errorf("unit events %+v … %+v for run %s (%s)", first, last, rec.RunID, rec.Verdict)
	}

	// The outline: one entry per step of the record, in its order, with the
	// expected time the sum of the steps' own.
	if len(first.Steps) != len(rec.Steps) {
		t.Fatalf("unit_start lists %d steps, the record %d", len(first.Steps), len(rec.Steps))
	}
	var sum time.Duration
	for i, s := range first.Steps {
		if s.Name != rec.Steps[i].Name || s.Kind != rec.Steps[i].Kind || s.Channel != rec.Steps[i].Channel {
			t.Errorf("step %d: outline %+v, record %+v", i, s, rec.Steps[i])
		}
		sum += s.Expected
	}
	if first.Expected != sum || sum <= 0 {
		t.Errorf("expected %s, steps add up to %s", first.Expected, sum)
	}
	// The pre-trim sweep (hand-read from brx200-sequence.yaml): 11 points, each a
	// 20 ms settle and 8 readings at 1 PLC on a 50 Hz line (20 ms each), so
	// 11 × 180 ms = 1.98 s.
	for _, s := range first.Steps {
		if s.Name == "pre-trim" && (s.Points != 11 || s.Expected != 1980*time.Millisecond) {
			t.Errorf("pre-trim outline %+v, want 11 points, 1.98 s", s)
		}
	}

	// The steps in order, each start … points … end, the end's status the record's.
	sweeps := map[string]sequencer.Sweep{}
	for _, s := range rec.Sweeps {
		sweeps[s.Name] = s
	}
	step, points := -1, 0
	var at time.Time
	for _, ev := range evs[1 : len(evs)-1] {
		if ev.At.Before(at) {
			t.Errorf("event %s at %s before the one before it (%s)", ev.Kind, ev.At, at)
		}
		at = ev.At
		switch ev.Kind {
		case sequencer.EventStepStart:
			if ev.Step != step+1 {
				t.Fatalf("step_start %d after step %d", ev.Step, step)
			}
			step, points = ev.Step, 0
			if ev.Name != rec.Steps[step].Name || ev.StepKind != rec.Steps[step].Kind {
				t.Errorf("step_start %d is %q (%s), the record's step %q (%s)", step, ev.Name, ev.StepKind, rec.Steps[step].Name, rec.Steps[step].Kind)
			}
		case sequencer.EventPoint:
			points++
			if ev.Step != step || ev.Point != points || ev.Points != first.Steps[step].Points {
				t.Errorf("point %d/%d of step %d during step %d (point %d of %d)", ev.Point, ev.Points, ev.Step, step, points, first.Steps[step].Points)
			}
			if ev.StimulusUnit != "V" || ev.ResponseUnit != "V" {
				t.Errorf("units %q, %q: want V, V", ev.StimulusUnit, ev.ResponseUnit)
			}
			if ideal := rec.IdealGain*ev.Stimulus + rec.IdealOffset; ev.Error != ev.Response-ideal {
				t.Errorf("point error %g, want %g − %g", ev.Error, ev.Response, ideal)
			}
			if ev.StepKind == "sweep" {
				p := sweeps[ev.Name].Points[ev.Point-1]
				if p.Stimulus != ev.Stimulus || p.Mean != ev.Response {
					t.Errorf("%s point %d: event (%g, %g), record (%g, %g)", ev.Name, ev.Point, ev.Stimulus, ev.Response, p.Stimulus, p.Mean)
				}
			}
		case sequencer.EventStepEnd:
			if ev.Step != step || ev.Status != rec.Steps[step].Status {
				t.Errorf("step_end %d (%s) during step %d, record says %s", ev.Step, ev.Status, step, rec.Steps[step].Status)
			}
			if want := first.Steps[step].Points; points != want && ev.Status == sequencer.StepDone {
				t.Errorf("step %q reported %d points, its outline %d", ev.Name, points, want)
			}
		default:
			t.Errorf("event %s between the unit's start and end", ev.Kind)
		}
	}
	if step != len(rec.Steps)-1 {
		t.Errorf("events ended at step %d of %d", step, len(rec.Steps))
	}
}

// The hook of RunWith is that run's alone: the Config's hook gets the runs
// without one, and neither a replay of the record nor the on-paper prediction
// Open makes for the TUR emits anything.
func TestProgressOnlyOnTheBench(t *testing.T) {
	st, seq := demoFiles(t, nil)
	var cfgEvents, runEvents []sequencer.Event
	cfg := sequencer.Config{Station: st, Sequence: seq, Operator: "test", Software: "test", Progress: collect(&cfgEvents)}
	e, err := sequencer.Open(context.Background(), cfg)
	if err != nil {
		t.Fatal(err)
	}
	defer e.Close()
	if len(cfgEvents) != 0 {
		t.Fatalf("Open (with its prediction on paper) emitted %d events", len(cfgEvents))
	}
	rec := e.RunWith(context.Background(), "BRX-00002", sequencer.RunOptions{Progress: collect(&runEvents)})
	if len(runEvents) == 0 || len(cfgEvents) != 0 {
		t.Fatalf("RunWith's hook got %d events, the Config's %d", len(runEvents), len(cfgEvents))
	}
	e.Run(context.Background(), "BRX-00003")
	if len(cfgEvents) == 0 {
		t.Fatal("the Config's hook got nothing from a run without a hook of its own")
	}
	n := len(cfgEvents)
	if _, err := sequencer.Replay(cfg, rec); err != nil {
		t.Fatal(err)
	}
	if _, err := sequencer.CheckTUR(st, seq); err != nil {
		t.Fatal(err)
	}
	if len(cfgEvents) != n {
		t.Errorf("replay and prediction emitted %d events", len(cfgEvents)-n)
	}
}

// A meter that stops answering (the served bench's meter drops every command
// after its fourth) faults the unit; the record names the meter, its asset tag
// and address, and what went wrong talking to it, while the fault text reads
// as before. The step it happened in ends "stopped", and the verdict event
// comes last, FAULT.
func TestFaultDetailOnMeterTimeout(t *testing.T) {
	if testing.Short() {
		t.Skip("real-time run")
	}
	srv, e, ctx := wireEngine(t, "")
	srv.SetFault("meter", serve.Fault{NoReply: true, NoReplyAfter: 4})
	var evs []sequencer.Event
	rec := e.RunWith(ctx, "BRX-000130", sequencer.RunOptions{Progress: collect(&evs)})
	if rec.Verdict != sequencer.Fault {
		t.Fatalf("verdict %s, fault %q", rec.Verdict, rec.Fault)
	}
	d := rec.FaultDetail
	if d == nil {
		t.Fatalf("no fault detail for %q", rec.Fault)
	}
	if d.Role != "meter" || d.Asset != "M-1" || d.Address != srv.Addresses()["meter"] || !strings.Contains(d.Said, "timeout") {
		t.Errorf("fault detail %+v, want the meter M-1 at %s timing out", *d, srv.Addresses()["meter"])
	}
	if !strings.Contains(rec.Fault, "read meter") || !strings.HasSuffix(rec.Fault, d.Said) {
		t.Errorf("fault %q: want the read that failed, ending with what the meter said (%q)", rec.Fault, d.Said)
	}
	var stopped []sequencer.Event
	for _, ev := range evs {
		if ev.Kind == sequencer.EventStepEnd && ev.Status == sequencer.StepStopped {
			stopped = append(stopped, ev)
		}
	}
	if len(stopped) != 1 || stopped[0].StepKind != "zero_check" {
		t.Errorf("stopped steps %+v, want the zero check the meter went silent in", stopped)
	}
	if last := evs[len(evs)-1]; last.Kind != sequencer.EventUnitEnd || last.Verdict != sequencer.Fault {
		t.Errorf("last event %+v, want unit_end FAULT", last)
	}
	t.Logf("fault %q; detail %+v", rec.Fault, *d)
}

// Records without an instrument to blame carry no detail; an Open refused for
// an instrument's calibration says which one.
func TestFaultDetailOfOpen(t *testing.T) {
	st, seq := demoFiles(t, nil)
	m := st.Instruments["meter"]
	m.CalDue = time.Date(2020, 1, 31, 0, 0, 0, 0, time.UTC)
	st.Instruments["meter"] = m
	_, err := sequencer.Open(context.Background(), sequencer.Config{Station: st, Sequence: seq, Operator: "test", Software: "test"})
	if err == nil || !strings.Contains(err.Error(), "calibration expired") {
		t.Fatalf("Open: %v, want a calibration expired", err)
	}
	d, ok := sequencer.DetailOf(err)
	if !ok || d.Role != "meter" || d.Asset != m.Asset || d.Address != m.Address || d.Said != "calibration due 2020-01-31" {
		t.Errorf("detail %+v (%v) of %q", d, ok, err)
	}
	if _, ok := sequencer.DetailOf(errors.New("plain")); ok {
		t.Error("a plain error names an instrument")
	}
}

// An entry in the meter's error queue is the meter's fault, what it said the
// entry; an injected panic blames no instrument.
func TestFaultDetailOfErrorQueueAndPanic(t *testing.T) {
	defer inject.set(plan{})
	e := setup(t, "faulty", nil, "")
	inject.set(plan{entryAtCheck: 3})
	rec := e.Run(context.Background(), "BRX-00004")
	if rec.Verdict != sequencer.Fault || rec.FaultDetail == nil || rec.FaultDetail.Role != "meter" ||
		rec.FaultDetail.Said != `instrument error -230, "Data corrupt or stale"` {
		t.Fatalf("verdict %s, fault %q, detail %+v", rec.Verdict, rec.Fault, rec.FaultDetail)
	}
	inject.set(plan{panicAtRead: 2})
	rec = e.Run(context.Background(), "BRX-00005")
	if rec.Verdict != sequencer.Fault || rec.FaultDetail != nil {
		t.Fatalf("panic: verdict %s, fault %q, detail %+v", rec.Verdict, rec.Fault, rec.FaultDetail)
	}
}

// A station fault ends a batch: the units after it are skipped, not run into
// the same fault, and the batch's error is ErrUnitFault.
func TestBatchStopsAfterAFault(t *testing.T) {
	defer inject.set(plan{})
	e := setup(t, "faulty", nil, "")
	inject.set(plan{errAtRead: 30}) // in the second unit (the first takes 2 + 11 + 11 reads)
	serials := []string{"BRX-00011", "BRX-00012", "BRX-00013", "BRX-00014"}
	var ran []string
	tl, err := e.RunBatch(context.Background(), serials, func(i int, rec *sequencer.Record) error {
		ran = append(ran, fmt.Sprintf("%s %s", rec.Serial, rec.Verdict))
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	want := []string{"BRX-00011 PASS", "BRX-00012 FAULT"}
	if strings.Join(ran, ", ") != strings.Join(want, ", ") {
		t.Errorf("ran %q, want %q", ran, want)
	}
	if strings.Join(tl.Skipped, " ") != "BRX-00013 BRX-00014" {
		t.Errorf("skipped %q", tl.Skipped)
	}
	if !errors.Is(tl.Err(), sequencer.ErrUnitFault) {
		t.Errorf("batch error %v, want ErrUnitFault", tl.Err())
	}
}

// failingOff is a source whose output cannot be switched off once fail is set.
type failingOff struct {
	instruments.Source
	fail *bool
}

func (f failingOff) SetOutput(ctx context.Context, on bool) error {
	if *f.fail && !on {
		return errors.New("output relay stuck")
	}
	return f.Source.SetOutput(ctx, on)
}

// A unit whose steps all went well but whose source cannot be switched off at
// the end is a station fault of that source, the only one of the station; the
// verdict event says FAULT, after the safe-off.
func TestFaultDetailWhenSafeOffFails(t *testing.T) {
	e := setup(t, "sim", nil, "")
	fail := false
	sequencer.WrapSources(e, func(role string, s instruments.Source) instruments.Source { return failingOff{s, &fail} })
	var last sequencer.Event
	steps := 0
	rec := e.RunWith(context.Background(), "BRX-00006", sequencer.RunOptions{Progress: func(ev sequencer.Event) {
		if ev.Kind == sequencer.EventUnitStart {
			steps = len(ev.Steps)
		}
		if ev.Kind == sequencer.EventStepEnd && ev.Step == steps-1 {
			fail = true // the last step is done: only the safe-off is left
		}
		last = ev
	}})
	fail = false
	if rec.Verdict != sequencer.Fault || !strings.Contains(rec.Fault, "source output off failed: output relay stuck") {
		t.Fatalf("verdict %s, fault %q", rec.Verdict, rec.Fault)
	}
	if d := rec.FaultDetail; d == nil || d.Role != "source" || d.Said != "output relay stuck" {
		t.Errorf("fault detail %+v", d)
	}
	if last.Kind != sequencer.EventUnitEnd || last.Verdict != sequencer.Fault {
		t.Errorf("last event %+v, want unit_end FAULT", last)
	}
}

// checkOrder checks what every run's events obey, on any product: the unit's
// start first with the record's steps, each step's start, points and end in
// order with the record's status, a done step with as many points as its
// outline says (a re-trim at most that many: it may stop early), the units the
// record's, and the verdict last.
func checkOrder(t *testing.T, evs []sequencer.Event, rec *sequencer.Record) {
	t.Helper()
	if len(evs) < 2 || evs[0].Kind != sequencer.EventUnitStart || evs[len(evs)-1].Kind != sequencer.EventUnitEnd {
		t.Fatalf("%d events, want unit_start … unit_end", len(evs))
	}
	outline := evs[0].Steps
	if last := evs[len(evs)-1]; last.Verdict != rec.Verdict {
		t.Errorf("unit_end %s, record %s", last.Verdict, rec.Verdict)
	}
	stim, resp := orV(rec.StimulusUnit), orV(rec.ResponseUnit)
	step, points, ended := -1, 0, true
	for _, ev := range evs[1 : len(evs)-1] {
		switch ev.Kind {
		case sequencer.EventStepStart:
			if !ended || ev.Step != step+1 {
				t.Fatalf("step_start %d after step %d (ended %v)", ev.Step, step, ended)
			}
			step, points, ended = ev.Step, 0, false
			if o := outline[step]; ev.Name != o.Name || ev.Channel != o.Channel || ev.StepKind != o.Kind {
				t.Errorf("step_start %q %q (%s), outline %+v", ev.Name, ev.Channel, ev.StepKind, o)
			}
		case sequencer.EventPoint:
			points++
			if ended || ev.Step != step || ev.Point != points || ev.StimulusUnit != stim || ev.ResponseUnit != resp {
				t.Errorf("point %+v during step %d (point %d; units %s, %s)", ev, step, points, stim, resp)
			}
		case sequencer.EventStepEnd:
			if ended || ev.Step != step {
				t.Fatalf("step_end %d during step %d (ended %v)", ev.Step, step, ended)
			}
			ended = true
			if ev.Status == sequencer.StepStopped {
				continue
			}
			if step >= len(rec.Steps) || ev.Status != rec.Steps[step].Status || ev.Name != rec.Steps[step].Name || ev.Channel != rec.Steps[step].Channel {
				t.Errorf("step_end %d %q %q %s; the record's steps %+v", step, ev.Name, ev.Channel, ev.Status, rec.Steps)
				continue
			}
			want := outline[step].Points
			switch {
			case ev.Status != sequencer.StepDone:
				want = 0
			case ev.StepKind == "retrim" && points <= want && points > 0:
				want = points
			}
			if points != want {
				t.Errorf("step %q %q (%s, %s) reported %d points, want %d", ev.Name, ev.Channel, ev.StepKind, ev.Status, points, want)
			}
		default:
			t.Errorf("event %s between the unit's start and end", ev.Kind)
		}
	}
	if !ended || rec.Verdict != sequencer.Fault && rec.Verdict != sequencer.Aborted && step != len(rec.Steps)-1 {
		t.Errorf("events ended at step %d (ended %v), the record has %d steps", step, ended, len(rec.Steps))
	}
}

// orV is a record's unit, "" read as volts.
func orV(unit string) string {
	if unit == "" {
		return "V"
	}
	return unit
}

// Every demo product (several channels, a current loop, a unit that reports
// counts, a re-trim, a soak in a chamber) reports its run in order.
func TestProgressEveryDemoProduct(t *testing.T) {
	for _, c := range []struct{ product, serial string }{
		{"acq4", "ACQ-0001"}, {"brx200", "BRX-00001"}, {"brx200t", "BXT-00001"}, {"ltx420", "LTX-00001"}, {"pza8", "PZA-00001"},
	} {
		t.Run(c.product, func(t *testing.T) {
			st, seq := loadFiles(t, "../sequences/"+c.product+"-station.yaml", "../sequences/"+c.product+"-sequence.yaml")
			e := openEngine(t, st, seq)
			var evs []sequencer.Event
			rec := e.RunWith(context.Background(), c.serial, sequencer.RunOptions{Progress: collect(&evs)})
			if rec.Verdict == sequencer.Fault || rec.Verdict == sequencer.Aborted {
				t.Fatalf("verdict %s: %s", rec.Verdict, rec.Fault)
			}
			checkOrder(t, evs, rec)
			n := 0
			for _, ev := range evs {
				if ev.Kind == sequencer.EventPoint {
					n++
				}
			}
			t.Logf("%s: %d events, %d points, %d steps, expected %s, verdict %s", c.product, len(evs), n, len(evs[0].Steps), evs[0].Expected, rec.Verdict)
		})
	}
}

// The stop button: a run cancelled at its first reading point ends ABORTED;
// the step it was in ends "stopped", no later step reports, and the verdict
// event says ABORTED.
func TestProgressOfAStoppedRun(t *testing.T) {
	e := setup(t, "sim", nil, "")
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	var evs []sequencer.Event
	rec := e.RunWith(ctx, "BRX-00007", sequencer.RunOptions{Progress: func(ev sequencer.Event) {
		evs = append(evs, ev)
		if ev.Kind == sequencer.EventPoint {
			cancel()
		}
	}})
	if rec.Verdict != sequencer.Aborted {
		t.Fatalf("verdict %s, fault %q", rec.Verdict, rec.Fault)
	}
	checkOrder(t, evs, rec)
	end := evs[len(evs)-2]
	if end.Kind != sequencer.EventStepEnd || end.Status != sequencer.StepStopped {
		t.Errorf("the event before the verdict is %+v, want the stopped step's end", end)
	}
}

// A unit in the fixture that is not the one scanned faults the run at the
// DUT port, which says what it holds.
func TestFaultDetailOfTheWrongUnit(t *testing.T) {
	defer inject.set(plan{})
	e := setup(t, "faulty", nil, "")
	inject.set(plan{serial: "BRX-99999"})
	rec := e.Run(context.Background(), "BRX-00008")
	if rec.Verdict != sequencer.Fault || !strings.Contains(rec.Fault, "wrong unit in the fixture") {
		t.Fatalf("verdict %s, fault %q", rec.Verdict, rec.Fault)
	}
	if d := rec.FaultDetail; d == nil || d.Role != "dut" || d.Said != `the unit in it reports serial "BRX-99999"` {
		t.Errorf("fault detail %+v", d)
	}
}
