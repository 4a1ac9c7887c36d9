package sequencer_test

import (
	"context"
	"fmt"
	"testing"
	"time"

	"trimline/instruments"
	"trimline/instruments/sim/serve"
	"trimline/instruments/sim/simtest"
	"trimline/sequencer"
)

// BenchmarkUnitEndToEnd runs one unit through the whole sequence (2 sweeps × 11
// points × 8 readings, fits, trim, read-back, store, 8 limits) on the zero-latency
// simulated bench. ns/point is the time per unit over its 22 points.
func BenchmarkUnitEndToEnd(b *testing.B) {
	e := setup(b, "sim", nil, "")
	ctx := context.Background()
	b.ReportAllocs()
	i := 0
	start := time.Now()
	for b.Loop() {
		e.Run(ctx, fmt.Sprintf("B-%07d", i))
		i++
	}
	b.ReportMetric(float64(time.Since(start).Nanoseconds())/float64(22*i), "ns/point")
}

// BenchmarkUnitOverTheWire runs one unit on the quiet bench served over loopback
// TCP through the generic drivers (2 sweeps × 11 points × 2 readings at 0.01 PLC,
// 1 ms settle), so that the exchanges, not the settling, dominate a point.
// ns/point is the time per unit over its 22 points.
func BenchmarkUnitOverTheWire(b *testing.B) {
	srv := simtest.Serve(b, serve.Options{Transport: "tcp"})
	st, seq := wireFiles(b, srv, "", "readings: 8", "readings: 2", "nplc: 1 ", "nplc: 0.01 ", "settle: 20 ms", "settle: 1 ms")
	ctx := context.Background()
	e, err := sequencer.Open(ctx, sequencer.Config{Station: st, Sequence: seq, Operator: "test", Software: "test"})
	if err != nil {
		b.Fatal(err)
	}
	defer e.Close()
	i := 0
	start := time.Now()
	for b.Loop() {
		if rec := e.Run(ctx, "BRX-000001"); rec.Verdict == sequencer.Fault {
			b.Fatalf("fault: %s", rec.Fault)
		}
		i++
	}
	b.ReportMetric(float64(time.Since(start).Nanoseconds())/float64(22*i), "ns/point")
}

// BenchmarkErrorQueuesPerPoint is what the engine adds to every sweep point on the
// served bench: one read of the source's and one of the meter's (empty) error
// queue over loopback TCP; the second metric is the re-arm of an output watchdog
// that the engine adds to every step when the station file arms one.
func BenchmarkErrorQueuesPerPoint(b *testing.B) {
	srv := simtest.Serve(b, serve.Options{Transport: "tcp"})
	st, seq := wireFiles(b, srv, watchdogEntry)
	ctx := context.Background()
	e, err := sequencer.Open(ctx, sequencer.Config{Station: st, Sequence: seq, Operator: "test", Software: "test"})
	if err != nil {
		b.Fatal(err)
	}
	defer e.Close()
	src := e.Instrument("source").(instruments.ErrorQueue)
	met := e.Instrument("meter").(instruments.ErrorQueue)
	wd := e.Instrument("source").(instruments.OutputWatchdog)
	b.Run("error_queues", func(b *testing.B) {
		for b.Loop() {
			if err := src.CheckErrors(ctx); err != nil {
				b.Fatal(err)
			}
			if err := met.CheckErrors(ctx); err != nil {
				b.Fatal(err)
			}
		}
	})
	b.Run("watchdog_rearm", func(b *testing.B) {
		for b.Loop() {
			if err := wd.ArmWatchdog(ctx); err != nil {
				b.Fatal(err)
			}
		}
		wd.DisarmWatchdog(ctx)
	})
}
