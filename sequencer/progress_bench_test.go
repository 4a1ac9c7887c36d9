package sequencer_test

import (
	"context"
	"encoding/json"
	"io"
	"sync"
	"testing"
	"time"

	"trimline/instruments"
	"trimline/instruments/sim/serve"
	"trimline/instruments/sim/simtest"
	"trimline/sequencer"
)

// firstWrite is a source that notes when the engine first programs it (a level
// or its output) and then calls then.
type firstWrite struct {
	instruments.Source
	once sync.Once
	at   time.Time
	then func()
}

func (f *firstWrite) wrote() {
	f.once.Do(func() {
		f.at = time.Now()
		if f.then != nil {
			f.then()
		}
	})
}

func (f *firstWrite) SetLevel(ctx context.Context, v float64) error {
	f.wrote()
	return f.Source.SetLevel(ctx, v)
}

func (f *firstWrite) SetOutput(ctx context.Context, on bool) error {
	f.wrote()
	return f.Source.SetOutput(ctx, on)
}

// BenchmarkScanToFirstSourceWrite is the time from a scanned serial handed to
// RunWith (the engine already open, as a console keeps it over a shift) to the
// engine's first write to the source: what a unit waits for before its
// stimulus. The run is stopped at that write (ABORTED, source off), so an
// iteration is the time to the first write and the safe-off. "sim" is the
// simulated bench in the process (its own clock); "tcp" the same bench served
// over loopback TCP through the generic drivers in real time (trimline console
// --bench tcp), with the demo sequence as it is. ms/first-write is the mean.
func BenchmarkScanToFirstSourceWrite(b *testing.B) {
	run := func(b *testing.B, e *sequencer.Engine) {
		var total time.Duration
		n := 0
		for b.Loop() {
			ctx, cancel := context.WithCancel(context.Background())
			var w *firstWrite
			sequencer.WrapSources(e, func(role string, s instruments.Source) instruments.Source {
				if f, ok := s.(*firstWrite); ok {
					s = f.Source
				}
				w = &firstWrite{Source: s, then: cancel}
				return w
			})
			start := time.Now()
			rec := e.RunWith(ctx, "BRX-00001", sequencer.RunOptions{Progress: func(sequencer.Event) {}})
			cancel()
			if w.at.IsZero() {
				b.Fatalf("no source write; verdict %s, fault %q", rec.Verdict, rec.Fault)
			}
			total += w.at.Sub(start)
			n++
		}
		b.ReportMetric(float64(total.Nanoseconds())/float64(n)/1e6, "ms/first-write")
	}
	b.Run("sim", func(b *testing.B) { run(b, setup(b, "sim", nil, "")) })
	b.Run("tcp", func(b *testing.B) {
		srv := simtest.Serve(b, serve.Options{Transport: "tcp"})
		st, seq := wireFiles(b, srv, "", "as it is", "as it is")
		e := openEngine(b, st, seq)
		run(b, e)
	})
}

// BenchmarkProgressEvents is how fast a screen can be fed. The Progress hook
// hands each event to another goroutine that encodes it as JSON, as a
// console's event stream does. "sim": the demo sequence (settle 20 ms at every
// point) on the simulated bench, whose clock does not wait, so the rate is what
// the engine and the hook can deliver at most. "tcp": the bench served over
// loopback TCP in real time, settle 20 ms and 2 readings at 0.01 PLC a point,
// near the fastest a 20 ms settle allows. events/s and points/s are what the
// encoding goroutine received per second of wall time; x-of-50/s is points/s
// over the 50 points a second a 20 ms settle produces at most (over the whole
// run, fits and trim included); max-lag-ms (tcp only, where events carry the
// wall clock) is the longest an event waited between the engine and the
// encoder, and ms/sweep-point the mean time between two points of one sweep as
// the encoder received them (a 20 ms settle allows no less than 20).
func BenchmarkProgressEvents(b *testing.B) {
	run := func(b *testing.B, e *sequencer.Engine, serial string, wall bool) {
		ch := make(chan sequencer.Event, 256)
		type tally struct {
			events, points int
			lag            time.Duration
			gaps           time.Duration // between points of one step, as received
			nGaps          int
		}
		done := make(chan tally)
		go func() {
			var t tally
			var prev sequencer.Event
			var prevAt time.Time
			for ev := range ch {
				now := time.Now()
				if wall {
					t.lag = max(t.lag, now.Sub(ev.At))
				}
				if ev.Kind == sequencer.EventPoint {
					if prev.Kind == sequencer.EventPoint && prev.Step == ev.Step && prev.RunID == ev.RunID {
						t.gaps += now.Sub(prevAt)
						t.nGaps++
					}
					prevAt = now
				}
				prev = ev
				if err := json.NewEncoder(io.Discard).Encode(ev); err != nil {
					panic(err)
				}
				t.events++
				if ev.Kind == sequencer.EventPoint {
					t.points++
				}
			}
			done <- t
		}()
		hook := func(ev sequencer.Event) { ch <- ev }
		start := time.Now()
		for b.Loop() {
			if rec := e.RunWith(context.Background(), serial, sequencer.RunOptions{Progress: hook}); rec.Verdict != sequencer.Pass {
				b.Fatalf("verdict %s, fault %q", rec.Verdict, rec.Fault)
			}
		}
		close(ch)
		got := <-done
		secs := time.Since(start).Seconds()
		b.ReportMetric(float64(got.events)/secs, "events/s")
		b.ReportMetric(float64(got.points)/secs, "points/s")
		b.ReportMetric(float64(got.points)/secs/50, "x-of-50/s")
		if wall {
			b.ReportMetric(float64(got.lag.Microseconds())/1e3, "max-lag-ms")
			b.ReportMetric(float64(got.gaps.Microseconds())/1e3/float64(max(got.nGaps, 1)), "ms/sweep-point")
		}
	}
	b.Run("sim", func(b *testing.B) { run(b, setup(b, "sim", nil, ""), "BRX-00001", false) })
	b.Run("tcp", func(b *testing.B) {
		srv := simtest.Serve(b, serve.Options{Transport: "tcp"})
		st, seq := wireFiles(b, srv, "", "readings: 8", "readings: 2", "nplc: 1 ", "nplc: 0.01 ")
		run(b, openEngine(b, st, seq), "BRX-000001", true)
	})
}
