package stats_test

import (
	"fmt"
	"reflect"
	"strings"
	"testing"
	"time"

	"trimline/reports/ledger"
	"trimline/reports/stats"
	"trimline/sequencer"
)

// twoChannelRuns makes n passing two-channel units without a ledger: per channel
// an as-found and an as-left gain error (ppm, ±500) and a noise (uV, ≤ 60 on
// channel 1 only); noise[i] is unit i's channel-1 noise.
func twoChannelRuns(noise []float64) []ledger.QualityRun {
	t0 := time.Date(2026, 4, 1, 6, 0, 0, 0, time.UTC)
	runs := make([]ledger.QualityRun, len(noise))
	for i, nz := range noise {
		r := ledger.QualityRun{RunID: fmt.Sprintf("s%04d", i), Serial: fmt.Sprintf("C%04d", i), Product: "DUO", Revision: "1", Station: "S1",
			Started: t0.Add(time.Duration(i) * time.Minute), Finished: t0.Add(time.Duration(i)*time.Minute + 30*time.Second),
			Verdict: sequencer.Pass, Certificate: fmt.Sprintf("C-%06d", i)}
		for _, ch := range []string{"1", "2"} {
			pre, post := float64(100+i%7), float64(i%5)
			r.Results = append(r.Results,
				ledger.QualityResult{Name: "pre_gain", Channel: ch, Value: pre * 1e-6, Unit: "ratio", Valid: true, Stage: sequencer.AsFound, Quantity: "gain_error"},
				ledger.QualityResult{Name: "post_gain", Channel: ch, Value: post * 1e-6, Unit: "ratio", Valid: true, Stage: sequencer.AsLeft, Quantity: "gain_error"})
			r.Outcomes = append(r.Outcomes,
				ledger.QualityOutcome{Name: "gain", Channel: ch, Unit: "ppm", Pass: true, Values: map[string]float64{"post_gain": post},
					Rule: "simple", Lower: tolPtr(-500), Upper: tolPtr(500), Zone: "pass"},
				ledger.QualityOutcome{Name: "raw gain", Channel: ch, Unit: "ppm", Pass: true, Values: map[string]float64{"pre_gain": pre},
					Rule: "simple", Lower: tolPtr(-5000), Upper: tolPtr(5000), Zone: "pass"})
		}
		r.Results = append(r.Results, ledger.QualityResult{Name: "noise", Channel: "1", Value: nz * 1e-6, Unit: "V", Valid: true, Stage: sequencer.AsLeft, Quantity: "noise"})
		r.Outcomes = append(r.Outcomes, ledger.QualityOutcome{Name: "noise", Channel: "1", Unit: "uV", Pass: true,
			Values: map[string]float64{"noise": nz}, Rule: "simple", Upper: tolPtr(60), Zone: "pass"})
		runs[i] = r
	}
	return runs
}

func TestComputeChannelsAndPairs(t *testing.T) {
	r := stats.Compute(twoChannelRuns([]float64{20, 21, 22}), stats.Options{})
	var names []string
	for _, s := range r.Results {
		names = append(names, s.Name)
	}
	if w := []string{"pre_gain@1", "pre_gain@2", "post_gain@1", "post_gain@2", "noise@1"}; !reflect.DeepEqual(names, w) {
		t.Fatalf("results %v, want %v", names, w)
	}
	if s := r.Results[3]; s.Result != "post_gain" || s.Channel != "2" || s.Limit != "gain" || !reflect.DeepEqual(s.Values, []float64{0, 1, 2}) {
		t.Errorf("post_gain@2: %+v", s)
	}
	want := []stats.Pair{{Quantity: "gain_error", Channel: "1", Pre: 0, Post: 2}, {Quantity: "gain_error", Channel: "2", Pre: 1, Post: 3}}
	if !reflect.DeepEqual(r.Pairs, want) {
		t.Errorf("pairs %+v, want %+v", r.Pairs, want)
	}
}

// One outlier far below a one-sided limit's data must not set the band: it is
// underflow, and the band runs from the smallest value within Tukey's fences
// to the limit.
func TestOneSidedBandIgnoresAnOutlier(t *testing.T) {
	// However few the values: 12 (where a 1st percentile would be the smallest
	// value, the outlier itself), 60 and 200.
	for _, n := range []int{12, 60, 200} {
		noise := make([]float64, n)
		for i := range noise {
			noise[i] = 20 + float64(i%11) // 20 … 30 uV
		}
		noise[5] = -1000
		r := stats.Compute(twoChannelRuns(noise), stats.Options{})
		s := r.Results[len(r.Results)-1]
		// Tukey's inner fences (e-Handbook §7.1.6) keep −1000 uV out: the robust
		// range is 20 … 30 uV; from 20 uV to the limit 60 uV is 40 uV, a quarter
		// of it either side.
		if s.Name != "noise@1" || s.Hist.Lo != 10 || s.Hist.Hi != 70 || s.Hist.Under != 1 || s.Hist.Over != 0 || len(s.Hist.Counts) != stats.DefaultBins {
			t.Errorf("n %d: %s histogram %v … %v, %d bins, under %d over %d; want 10 … 70, %d bins, 1, 0",
				n, s.Name, s.Hist.Lo, s.Hist.Hi, len(s.Hist.Counts), s.Hist.Under, s.Hist.Over, stats.DefaultBins)
		}
		// The data's own range: 20 … 30 uV, a quarter of 10 uV either side.
		if h := s.DataHist; h.Lo != 17.5 || h.Hi != 32.5 || h.Under != 1 || h.Over != 0 {
			t.Errorf("n %d: data histogram %v … %v, under %d over %d; want 17.5 … 32.5, 1, 0", n, h.Lo, h.Hi, h.Under, h.Over)
		}
	}
	noise := make([]float64, 200)
	for i := range noise {
		noise[i] = 20 + float64(i%11)
	}
	noise[50] = -1000
	r := stats.Compute(twoChannelRuns(noise), stats.Options{Bins: 10, Margin: 0.5})
	s := r.Results[len(r.Results)-1]
	if s.Hist.Lo != 0 || s.Hist.Hi != 80 || len(s.Hist.Counts) != 10 {
		t.Errorf("bins 10, margin 0.5: %v … %v in %d bins, want 0 … 80 in 10", s.Hist.Lo, s.Hist.Hi, len(s.Hist.Counts))
	}
}

// TestZeroSpreadIsNoted: equal values make every index infinite or undefined;
// the report says why instead of printing ∞ as if it were a capability.
func TestZeroSpreadIsNoted(t *testing.T) {
	noise := []float64{25, 25, 25, 25, 25, 25}
	r := stats.Compute(twoChannelRuns(noise), stats.Options{})
	s := r.Results[len(r.Results)-1]
	if s.SDOverall != 0 || s.SDWithin != 0 {
		t.Fatalf("%s: sd %v within %v, want 0", s.Name, s.SDOverall, s.SDWithin)
	}
	for _, n := range r.Notes {
		if strings.HasPrefix(n, s.Name+": a standard deviation is 0") {
			return
		}
	}
	t.Errorf("no note on %s's zero spread among %q", s.Name, r.Notes)
}
