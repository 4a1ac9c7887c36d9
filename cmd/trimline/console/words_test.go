package console

import (
	"testing"

	"trimline/sequencer"
)

// What an operator reads at 2 m must not break between a number and its unit.
// A value is written number, space, unit (SI Brochure, 9th edition, §5.4.3,
// from memory); keeping the two on one line with a no-break space is common
// practice in typesetting.
func TestKeepTogether(t *testing.T) {
	const nb = "\u00a0"
	for _, c := range []struct{ in, want string }{
		{"total error after trim is 12.5 mV, limit ≤ 1 mV", "total error after trim is 12.5" + nb + "mV, limit ≤" + nb + "1" + nb + "mV"},
		{"offset after trim is −12.4 mV, limit ±0.8 mV", "offset after trim is −12.4" + nb + "mV, limit ±0.8" + nb + "mV"},
		{"limit −0.2 … +0.8 mV", "limit −0.2" + nb + "…" + nb + "+0.8" + nb + "mV"},
		{"noise 57.1 µV, limit ≤ 60 µV", "noise 57.1" + nb + "µV, limit ≤" + nb + "60" + nb + "µV"},
		{"1 V 2 V", "1" + nb + "V 2" + nb + "V"},
		{"gain 12 ppm and 3 %", "gain 12" + nb + "ppm and 3" + nb + "%"},
		{"point 4 of 11: -4 mV in", "point 4 of 11: −4" + nb + "mV in"},
		// Not units: the word after the number starts another word.
		{"retest it (attempt 2 of 3)", "retest it (attempt 2 of 3)"},
		{"9 steps", "9 steps"},
		{"BRX-00009 at 2026-12-02", "BRX-00009 at 2026-12-02"},
	} {
		if got := keepTogether(c.in); got != c.want {
			t.Errorf("keepTogether(%q) = %q, want %q", c.in, got, c.want)
		}
	}
}

func TestPointTextSignsAndUnits(t *testing.T) {
	ev := sequencer.Event{Point: 4, Points: 11, Stimulus: -0.004, Error: -0.00812, StimulusUnit: "V", ResponseUnit: "V"}
	want := "point 4 of 11: −4\u00a0mV in, error −8.12\u00a0mV"
	if got := pointText(ev); got != want {
		t.Errorf("pointText = %q, want %q", got, want)
	}
}

// The plot holds one reading step: a zero check's two points never sit among
// the following sweep's points, and each point carries its index of the step's
// count so the page can place it without rescaling sideways.
func TestPlotOneStepAtATime(t *testing.T) {
	u := &unitView{Step: -1}
	point := func(step, i, n int, x float64) {
		u.progress(sequencer.Event{Kind: sequencer.EventPoint, Step: step, Point: i, Points: n, Stimulus: x, Error: 1e-4,
			StimulusUnit: "V", ResponseUnit: "V"})
	}
	point(2, 1, 2, 0)
	point(2, 2, 2, 0)
	if len(u.Points) != 2 {
		t.Fatalf("zero check: %d points, want 2", len(u.Points))
	}
	u.progress(sequencer.Event{Kind: sequencer.EventStepStart, Step: 3})
	if len(u.Points) != 2 {
		t.Errorf("a step that has read nothing yet cleared the last step's plot: %d points", len(u.Points))
	}
	point(3, 1, 11, -0.01)
	point(3, 2, 11, -0.008)
	if len(u.Points) != 2 || u.Points[0].Step != 3 || u.Points[0].I != 1 || u.Points[1].N != 11 || u.Points[0].XUnit != "V" {
		t.Errorf("sweep after a zero check: points %+v, want only the sweep's 1 and 2 of 11", u.Points)
	}
}
