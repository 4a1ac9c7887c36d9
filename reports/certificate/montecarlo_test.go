package certificate

import (
	"strings"
	"testing"

	"trimline/sequencer"
)

// A Monte Carlo result (JCGM 101:2008) says under its value that its U comes
// from a coverage interval (k = U/u, no νeff) and whether the GUM interval
// was validated by it (§8); the Coverage paragraph says which interval
// (§7.7 or §7.8), how many trials and how they were chosen (§7.9), and for
// how many results the GUM interval was validated.
func TestMonteCarloWording(t *testing.T) {
	mc := func(valid, adaptive bool, m int, kind string) sequencer.Uncertainty {
		return sequencer.Uncertainty{Std: 1, DOF: 90, K: 2.004, Expanded: 2.004, Method: "MC",
			MC: &sequencer.MCInterval{Low: -2, High: 2.004, Interval: kind, Trials: m, Adaptive: adaptive, Validated: valid}}
	}
	if got, want := uncNote(2.004, 2.004, 90, mc(true, true, 40000, "symmetric")), "k = 2.00 · MC · GUM validated"; got != want {
		t.Errorf("uncNote = %q, want %q", got, want)
	}
	if got, want := uncNote(2.004, 2.004, 90, mc(false, true, 40000, "symmetric")), "k = 2.00 · MC · GUM not valid."; got != want {
		t.Errorf("uncNote = %q, want %q", got, want)
	}
	gum := sequencer.Uncertainty{Std: 1, DOF: 90, K: 2.03, Expanded: 2.03, Method: "GUM"}
	if got, want := uncNote(2.03, 2.03, 90, gum), "k = 2.03 · νeff = 90 · GUM"; got != want {
		t.Errorf("uncNote(GUM) = %q, want %q", got, want)
	}
	rec := &sequencer.Record{Coverage: 0.9545, Results: []sequencer.Result{
		{Name: "a", Unc: mc(true, true, 620000, "symmetric")},
		{Name: "b", Unc: mc(false, true, 830000, "symmetric")},
		{Name: "c", Unc: gum},
	}}
	text := mcCoverage(rec)
	for _, want := range []string{"probabilistically symmetric (§7.7)", "M = 620000 to 830000 trials", "adaptive procedure (§7.9)", "k = U/u", "for 1 of 2 results"} {
		if !strings.Contains(text, want) {
			t.Errorf("coverage text lacks %q:\n%s", want, text)
		}
	}
	rec.Results = []sequencer.Result{{Name: "a", Unc: mc(true, false, 20000, "shortest")}}
	text = mcCoverage(rec)
	for _, want := range []string{"shortest (§7.8)", "M = 20000 trials fixed in the sequence file", "for 1 of 1 results"} {
		if !strings.Contains(text, want) {
			t.Errorf("coverage text lacks %q:\n%s", want, text)
		}
	}
	if mcCoverage(&sequencer.Record{Results: []sequencer.Result{{Name: "c", Unc: gum}}}) != "" {
		t.Error("coverage text without Monte Carlo results")
	}
}
