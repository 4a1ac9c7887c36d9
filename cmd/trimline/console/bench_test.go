package console

import (
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
