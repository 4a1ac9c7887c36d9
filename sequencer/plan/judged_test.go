package plan_test

import (
	"context"
	"slices"
	"strings"
	"testing"

	"trimline/instruments/budget"
	"trimline/sequencer/plan"
)

// TestOffsetInCountsIsNotJudged: the ACQ-4's limit file judges post_offset in
// counts while its budget's output is in volts; the plan cannot convert, so
// its yield is that of the gain error alone, and it says so (not "all
// predicted results").
func TestOffsetInCountsIsNotJudged(t *testing.T) {
	b, err := budget.Load("../../sequences/acq4-budget.yaml")
	if err != nil {
		t.Fatal(err)
	}
	tol, err := plan.LoadTolerances(b.LimitsFile)
	if err != nil {
		t.Fatal(err)
	}
	r, err := plan.Run(context.Background(), b, plan.Options{Seed: 1, Tolerances: tol, MinTrials: 20_000, SearchTrials: 20_000})
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(r.Judged, []string{"post_gain_error"}) {
		t.Errorf("judged %v, want only post_gain_error", r.Judged)
	}
	if !slices.ContainsFunc(r.Notes, func(n string) bool { return strings.Contains(n, "the offset is not judged") }) {
		t.Errorf("no note says the offset is not judged: %q", r.Notes)
	}
	b2, err := budget.Load("../../sequences/brx200-budget.yaml")
	if err != nil {
		t.Fatal(err)
	}
	tol2, err := plan.LoadTolerances(b2.LimitsFile)
	if err != nil {
		t.Fatal(err)
	}
	r2, err := plan.Run(context.Background(), b2, plan.Options{Seed: 1, Tolerances: tol2, MinTrials: 20_000, SearchTrials: 20_000})
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(r2.Judged, plan.Predicted) {
		t.Errorf("BRX-200 judged %v, want %v", r2.Judged, plan.Predicted)
	}
}
