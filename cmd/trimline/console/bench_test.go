package console

import (
	"context"
	"fmt"
	"net/url"
	"path/filepath"
	"testing"
	"time"

	"trimline/sequencer"
)

// BenchmarkProgressToPage is the console's side of a point's way to the page:
// the engine's progress hook updates the station's state and hands the point,
// encoded, to an open event stream, which takes it. It reports points per second against the
// 50 a second that a 20 ms settle produces (one point per settle; a real point
// also reads the meter, so that is the most a sweep can make).
func BenchmarkProgressToPage(b *testing.B) {
	s := &Server{hub: newHub()}
	s.st.Unit = &unitView{Steps: []stepView{{Name: "sweep"}}, Points: []plotPt{}}
	c, _ := s.hub.subscribe()
	ev := sequencer.Event{Kind: sequencer.EventPoint, Step: 0, Point: 3, Points: 11, Stimulus: 2.5, Response: 5.0001, Error: 1.2e-4,
		StimulusUnit: "V", ResponseUnit: "V"}
	b.ResetTimer()
	start := time.Now()
	for i := 0; i < b.N; i++ {
		s.progress(ev)
		// The stream's side: the encoded event, as serveEvents writes it.
		if msg, ok := <-c; !ok || len(msg) == 0 {
			b.Fatal("the stream lost an event")
		}
	}
	elapsed := time.Since(start)
	b.StopTimer()
	s.hub.close()
	rate := float64(b.N) / elapsed.Seconds()
	b.ReportMetric(rate, "points/s")
	b.ReportMetric(rate/50, "x-20ms-settle")
}

// BenchmarkScanToUnitStart is the console's share of the time from a scan to
// the first source write: from the POST of a new serial (the session, CSRF and
// Origin checks, the serial pattern, the attempts and earlier runs read from
// the ledger) to the engine's first progress event of the unit. The engine's
// own share, from RunWith to the first source write, is the sequencer's
// BenchmarkScanToFirstSourceWrite; the two add up to the target of
// 100 ms at most on the simulated bench.
func BenchmarkScanToUnitStart(b *testing.B) {
	dir, station, sequence := unitDemo(b)
	srv, err := New(context.Background(), Options{StationPath: station, SequencePath: sequence, Out: filepath.Join(dir, "out"), Engineering: true})
	if err != nil {
		b.Fatal(err)
	}
	defer srv.Close()
	started := make(chan time.Time, 1)
	srv.observe = func(ev sequencer.Event) {
		if ev.Kind == sequencer.EventUnitStart {
			started <- time.Now()
		}
	}
	c := newClient(b, srv.Handler())
	c.signIn("B-1042", "Ada Quillfeather")
	var total time.Duration
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		t0 := time.Now()
		if code, a := c.post("/scan", url.Values{"serial": {fmt.Sprintf("BRX-%05d", 10000+i)}}); !a.OK {
			b.Fatalf("scan: %d %+v", code, a)
		}
		total += (<-started).Sub(t0)
		b.StopTimer()
		c.settled(time.Minute)
		b.StartTimer()
	}
	b.ReportMetric(float64(total.Microseconds())/1e3/float64(b.N), "ms/scan-to-unit-start")
}
