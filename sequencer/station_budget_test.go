package sequencer_test

import (
	"strings"
	"testing"

	"trimline/sequencer"
)

// A station whose simulated DUT draws its units from a budget file names it
// relative to the station file: loading the station checks that the file is there
// and describes the card, but a station stored with a recorded run loads for
// replay without it (the budget is not stored with the run, and a recorded station
// is never opened).
func TestStationBudgetFile(t *testing.T) {
	src := demoFile(t, "brx200-station.yaml")
	seed := "      seed: \"8\""
	if !strings.Contains(src, seed) {
		t.Fatal("the demo station has no DUT seed line")
	}
	src = strings.Replace(src, seed, seed+"\n      budget: no-such-budget.yaml", 1)
	_, err := sequencer.ParseStation("/nowhere/station.yaml", []byte(src))
	if err == nil || !strings.Contains(err.Error(), `setting "budget"`) || !strings.Contains(err.Error(), "/nowhere/no-such-budget.yaml") {
		t.Errorf("a missing budget file beside the station: %v", err)
	}
	if _, err := sequencer.ParseRecordedStation("/nowhere/station.yaml", []byte(src)); err != nil {
		t.Errorf("a recorded station naming a budget file that is not there: %v", err)
	}
}
