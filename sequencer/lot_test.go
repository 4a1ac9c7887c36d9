package sequencer_test

import (
	"context"
	"testing"

	"trimline/sequencer"
)

// A run's own lot (RunOptions.Lot) is recorded instead of the Config's, for
// that run only: a console's operator changes lots on one opened bench. The
// station's site is recorded in every run.
func TestRunWithLot(t *testing.T) {
	st, seq := demoFiles(t, nil)
	cfg := sequencer.Config{Station: st, Sequence: seq, Operator: "test", Software: "test", Lot: "L2026-48A"}
	e, err := sequencer.Open(context.Background(), cfg)
	if err != nil {
		t.Fatal(err)
	}
	defer e.Close()
	for _, c := range []struct {
		serial, runLot, want string
	}{
		{"BRX-00001", "", "L2026-48A"},
		{"BRX-00002", "L2026-49B", "L2026-49B"},
		{"BRX-00003", "", "L2026-48A"},
	} {
		rec := e.RunWith(context.Background(), c.serial, sequencer.RunOptions{Lot: c.runLot})
		if rec.Verdict != sequencer.Pass {
			t.Fatalf("%s: verdict %s, fault %q", c.serial, rec.Verdict, rec.Fault)
		}
		if rec.Lot != c.want {
			t.Errorf("%s run with lot %q: recorded lot %q, want %q", c.serial, c.runLot, rec.Lot, c.want)
		}
		if rec.Site != st.Site || st.Site == "" {
			t.Errorf("%s: recorded site %q, the station's is %q (the demo station names one)", c.serial, rec.Site, st.Site)
		}
	}
}
