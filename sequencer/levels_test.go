package sequencer_test

import (
	"context"
	"strings"
	"testing"

	"trimline/sequencer"
)

// The first and last levels of a sweep are exactly its from and to, no level lies
// outside them, and a symmetric sweep passes through 0 exactly. The old formula
// from + (to − from)·i/(n − 1) gave 0.05000000000000002 for the last of a −50…50 mV
// sweep in 7 points (hand-worked in float64).
func TestSweepEndPointsAreExact(t *testing.T) {
	for _, c := range []struct {
		from, to float64
		points   int
	}{
		{-50e-3, 50e-3, 7}, {-50 * 1e-3, 50 * 1e-3, 4}, {-12 * 1e-3, 12 * 1e-3, 7}, {-15 * 1e-3, 15 * 1e-3, 10},
		{-25 * 1e-3, 25 * 1e-3, 25}, {10 * 1e-3, -10 * 1e-3, 11}, {0, 33 * 1e-3, 9}, {-1e-3, 49 * 1e-3, 13},
	} {
		p := sequencer.SweepPlan{From: c.from, To: c.to, Points: c.points}
		lv := p.Levels()
		if len(lv) != c.points || lv[0] != c.from || lv[len(lv)-1] != c.to {
			t.Errorf("%g…%g in %d: levels %v: ends are not exactly from and to", c.from, c.to, c.points, lv)
			continue
		}
		lo, hi := min(c.from, c.to), max(c.from, c.to)
		for i, v := range lv {
			if v < lo || v > hi {
				t.Errorf("%g…%g in %d: level %d = %.17g lies outside the sweep", c.from, c.to, c.points, i, v)
			}
		}
		if c.from == -c.to && c.points%2 == 1 && lv[c.points/2] != 0 {
			t.Errorf("%g…%g in %d: middle level %.17g, want 0", c.from, c.to, c.points, lv[c.points/2])
		}
	}
}

// A sweep that ends exactly at the station's cap passes CheckCaps and runs: check
// and the engine compute the same levels with the same test. Before, check passed
// and every unit FAULTed on a last level 4e-18 V above the cap.
func TestSweepAtTheCapRuns(t *testing.T) {
	seqText := strings.NewReplacer("from: -10 mV", "from: -12 mV", "to: 10 mV", "to: 12 mV", "points: 11", "points: 7").
		Replace(demoFile(t, "brx200-sequence.yaml"))
	seq, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(seqText), demoReader(t, nil))
	if err != nil {
		t.Fatal(err)
	}
	pre, _ := seq.Sweep(sequencer.SweepPreTrim)
	post, _ := seq.Sweep(sequencer.SweepVerify)
	if pre.Points != 7 || post.Points != 7 {
		t.Fatalf("sequence not edited: %+v", pre)
	}
	st, err := sequencer.ParseStation("brx200-station.yaml", []byte(strings.Replace(demoFile(t, "brx200-station.yaml"),
		"max_source_voltage: 50 mV", "max_source_voltage: 12 mV", 1)))
	if err != nil {
		t.Fatal(err)
	}
	if err := sequencer.CheckCaps(st, seq); err != nil {
		t.Fatalf("a sweep ending at the cap is refused: %v", err)
	}
	onIdealBench(st)
	e := openEngine(t, st, seq)
	rec := e.Run(context.Background(), "BRX-00012")
	if rec.Verdict == sequencer.Fault || rec.Verdict == sequencer.Aborted {
		t.Fatalf("verdict %s: %s", rec.Verdict, rec.Fault)
	}
	last := rec.Sweeps[0].Points[len(rec.Sweeps[0].Points)-1].Stimulus
	if last != pre.To {
		t.Errorf("last level programmed %.17g, want exactly %.17g", last, pre.To)
	}
}
