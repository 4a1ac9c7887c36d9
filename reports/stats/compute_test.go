package stats_test

import (
	"context"
	"errors"
	"math"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
	"time"

	"trimline/limits"
	"trimline/reports/ledger"
	"trimline/reports/stats"
	"trimline/sequencer"
	"trimline/sequencer/spc"
)

var handCtx = context.Background()

// handDay0 is the first test day of the hand-worked population.
var handDay0 = time.Date(2026, 3, 2, 8, 0, 0, 0, time.UTC)

// handRun is one run of the hand-worked population. Values are in the limits'
// units: offset and noise in uV, pre in mV; NaN noise is an invalid result.
type handRun struct {
	id, serial string
	verdict    sequencer.Verdict
	day        int
	lot, site  string
	station    string
	product    string
	eng        bool
	retestOf   string
	accept     string // run id of the REVIEW run this decision accepts
	offset     float64
	zone       string // of the offset outcome; "" means pass or fail by the value
	noise, pre float64
	tol        float64       // offset tolerance ±tol uV; 0 means 50
	clock      time.Duration // added to the run's start: a station clock that is off
	gain       float64       // post_gain_error in ppm, judged ±500 ppm; 0 means none
}

// population is the hand-worked population (test order = start order):
//
//	U1 PASS, judged against ±60 uV (an older limit file)
//	U2 FAIL, then PASS on retest
//	U3 REVIEW, accepted on review (final PASS, first pass)
//	U4 REVIEW, undecided (held); its noise result invalid
//	U5 FAIL (offset 400 uV: overflow; noise 90 uV: over the one-sided limit), lot L2
//	U6 FAULT only
//	U7 PASS then ABORTED, station S2, no lot, the only unit with post_gain_error
//	U8 PASS, engineering
func handPopulation() []handRun {
	nan := math.NaN()
	return []handRun{
		{id: "r01", serial: "U1", verdict: sequencer.Pass, lot: "L1", site: "North", offset: 10, noise: 20, pre: 3, tol: 60},
		{id: "r02", serial: "U2", verdict: sequencer.Fail, lot: "L1", site: "North", offset: 70, noise: 22, pre: -4},
		{id: "r03", serial: "U2", verdict: sequencer.Pass, lot: "L1", site: "North", retestOf: "r02", offset: 12, noise: 22, pre: -4},
		{id: "r04", serial: "U3", verdict: sequencer.Review, day: 1, lot: "L1", site: "South", offset: 20, zone: limits.ZoneConditionalPass, noise: 25, pre: 5},
		{id: "r05", serial: "U4", verdict: sequencer.Review, day: 1, lot: "L1", site: "South", offset: 45, zone: limits.ZoneConditionalPass, noise: nan, pre: 1},
		{id: "r06", serial: "U3", verdict: sequencer.Pass, day: 1, lot: "L1", site: "South", retestOf: "r04", accept: "r04", offset: 20, noise: 25, pre: 5},
		{id: "r07", serial: "U5", verdict: sequencer.Fail, day: 1, lot: "L2", site: "South", offset: 400, noise: 90, pre: 2},
		{id: "r08", serial: "U6", verdict: sequencer.Fault, day: 1, lot: "L2", site: "South"},
		{id: "r09", serial: "U7", verdict: sequencer.Pass, day: 1, station: "S2", site: "South", offset: 14, noise: 21, pre: 0, gain: 12},
		{id: "r10", serial: "U7", verdict: sequencer.Aborted, day: 1, station: "S2", site: "South"},
		{id: "r11", serial: "U8", verdict: sequencer.Pass, day: 1, lot: "L1", site: "South", eng: true, offset: 5, noise: 20, pre: 1},
	}
}

func tolPtr(v float64) *float64 { return &v }

// record makes the record of run i of the population.
func (tr handRun) record(i int) *sequencer.Record {
	start := handDay0.Add(time.Duration(tr.day)*24*time.Hour + time.Duration(i)*10*time.Minute + tr.clock)
	station := tr.station
	if station == "" {
		station = "S1"
	}
	product := tr.product
	if product == "" {
		product = "AMP-1"
	}
	rec := &sequencer.Record{Schema: sequencer.RecordSchema, RunID: tr.id, Serial: tr.serial, Product: product, Revision: "A",
		Station: station, Operator: "op", Software: "test", Started: start, Finished: start.Add(time.Minute),
		Verdict: tr.verdict, Engineering: tr.eng, Lot: tr.lot, Site: tr.site, RetestOf: tr.retestOf, Coverage: 0.9545}
	if tr.verdict == sequencer.Fault || tr.verdict == sequencer.Aborted {
		rec.Fault = "meter: no reply"
		return rec
	}
	tol := tr.tol
	if tol == 0 {
		tol = 50
	}
	unc := sequencer.Uncertainty{Std: 1e-6, K: 2, Expanded: 2e-6, DOF: math.Inf(1), Method: "GUM"}
	rec.Results = []sequencer.Result{
		{Name: "pre_offset", Stage: sequencer.AsFound, Quantity: "offset", Value: tr.pre * 1e-3, Unit: "V", Valid: true, Unc: unc},
		{Name: "post_offset", Stage: sequencer.AsLeft, Quantity: "offset", Value: tr.offset * 1e-6, Unit: "V", Valid: true, Unc: unc},
		{Name: "post_noise", Stage: sequencer.AsLeft, Quantity: "noise", Value: tr.noise * 1e-6, Unit: "V", Valid: !math.IsNaN(tr.noise)},
	}
	zone := tr.zone
	if zone == "" {
		zone = limits.ZonePass
		if math.Abs(tr.offset) > tol {
			zone = limits.ZoneFail
		}
	}
	noise := limits.Outcome{Name: "noise", Expr: "post_noise <= 60", Unit: "uV", Uses: []string{"post_noise"}, Values: map[string]float64{}}
	if !math.IsNaN(tr.noise) {
		noise.Values["post_noise"] = tr.noise
		noise.Pass = tr.noise <= 60
		z := limits.ZonePass
		if !noise.Pass {
			z = limits.ZoneFail
		}
		noise.Decision = &limits.Decision{Result: "post_noise", Upper: tolPtr(60), Rule: limits.RuleSimple, Value: tr.noise, Zone: z}
	}
	rec.Outcomes = []limits.Outcome{
		{Name: "offset", Expr: "abs(post_offset) <= tol", Unit: "uV", Uses: []string{"post_offset"},
			Values: map[string]float64{"post_offset": tr.offset}, Pass: zone == limits.ZonePass,
			Decision: &limits.Decision{Result: "post_offset", Lower: tolPtr(-tol), Upper: tolPtr(tol), Rule: limits.RuleSimple, Value: tr.offset, U: 2, Zone: zone}},
		noise,
		{Name: "pre offset", Expr: "abs(pre_offset) <= 20", Unit: "mV", Uses: []string{"pre_offset"},
			Values: map[string]float64{"pre_offset": tr.pre}, Pass: math.Abs(tr.pre) <= 20,
			Decision: &limits.Decision{Result: "pre_offset", Lower: tolPtr(-20), Upper: tolPtr(20), Rule: limits.RuleSimple, Value: tr.pre, Zone: limits.ZonePass}},
		{Name: "codes", Expr: "pre_offset < 1", Unit: "", Uses: []string{"pre_offset"}, Values: map[string]float64{"pre_offset": tr.pre * 1e-3}, Pass: true},
	}
	if tr.gain != 0 {
		rec.Results = append(rec.Results, sequencer.Result{Name: "post_gain_error", Stage: sequencer.AsLeft, Quantity: "gain_error",
			Value: tr.gain * 1e-6, Unit: "ratio", Valid: true})
		rec.Outcomes = append(rec.Outcomes, limits.Outcome{Name: "gain", Unit: "ppm", Uses: []string{"post_gain_error"},
			Values: map[string]float64{"post_gain_error": tr.gain}, Pass: true,
			Decision: &limits.Decision{Result: "post_gain_error", Lower: tolPtr(-500), Upper: tolPtr(500), Rule: limits.RuleSimple, Value: tr.gain, Zone: limits.ZonePass}})
	}
	return rec
}

// storeHandRuns stores runs in a new ledger and returns it open.
func storeHandRuns(t *testing.T, runs []handRun) *ledger.Ledger {
	t.Helper()
	led, err := ledger.Open(handCtx, filepath.Join(t.TempDir(), "ledger.db"))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { led.Close() })
	certs := map[string]string{}
	for i, tr := range runs {
		rec := tr.record(i)
		opt := ledger.RecordOptions{Prefix: "T"}
		if tr.accept != "" {
			rec.Disposition = &sequencer.Disposition{Of: tr.accept, OfCertificate: certs[tr.accept], Decision: sequencer.DecisionAccept,
				Reviewer: "Ina Reviewer", Reason: "inside the guard band, rechecked", At: rec.Started}
			opt.Review = &ledger.ReviewDetail{Reason: "rechecked"}
		}
		cert, err := led.RecordRunWith(handCtx, rec, opt)
		if err != nil {
			t.Fatalf("store %s: %v", tr.id, err)
		}
		certs[tr.id] = cert
	}
	return led
}

func readReport(t *testing.T, led *ledger.Ledger, o stats.Options) stats.Report {
	t.Helper()
	r, err := stats.Read(handCtx, led, o)
	if err != nil {
		t.Fatal(err)
	}
	return r
}

func handNear(a, b, tol float64) bool { return math.Abs(a-b) <= tol }

func TestComputeRatesOfAHandWorkedPopulation(t *testing.T) {
	led := storeHandRuns(t, handPopulation())
	r := readReport(t, led, stats.Options{})
	want := stats.Counts{Units: 6, Passed: 4, Failed: 1, Held: 1, FirstPass: 3, Retested: 1, Attempts: 7, Decisions: 1,
		Runs: 9, Faults: 1, Aborted: 1, Engineering: 1, NoCompleted: 1}
	if r.Counts != want {
		t.Errorf("counts\n got %+v\nwant %+v", r.Counts, want)
	}
	for _, c := range []struct {
		name      string
		got, want float64
	}{
		{"yield", r.Yield, 4.0 / 6}, {"first-pass yield", r.FirstPassYield, 3.0 / 6},
		{"retest rate", r.RetestRate, 1.0 / 6}, {"fault rate", r.FaultRate, 1.0 / 9},
	} {
		if !handNear(c.got, c.want, 1e-12) {
			t.Errorf("%s = %v, want %v", c.name, c.got, c.want)
		}
	}
	var serials, verdicts, firsts []string
	for _, u := range r.Units {
		serials = append(serials, u.Serial)
		verdicts = append(verdicts, u.Verdict)
		firsts = append(firsts, u.FirstVerdict)
	}
	// Test order is the start of each unit's latest attempt: U3's is r04 (its
	// decision r06 is no attempt), U2's r03.
	if w := []string{"U1", "U2", "U3", "U4", "U5", "U7"}; !reflect.DeepEqual(serials, w) {
		t.Errorf("units %v, want %v", serials, w)
	}
	if w := []string{"PASS", "PASS", "PASS", "REVIEW", "FAIL", "PASS"}; !reflect.DeepEqual(verdicts, w) {
		t.Errorf("final verdicts %v, want %v", verdicts, w)
	}
	if w := []string{"PASS", "FAIL", "PASS", "REVIEW", "FAIL", "PASS"}; !reflect.DeepEqual(firsts, w) {
		t.Errorf("first verdicts %v, want %v", firsts, w)
	}
	u3 := r.Units[2]
	if u3.RunID != "r06" || u3.Attempts != 1 || !u3.Started.Equal(handDay0.Add(24*time.Hour+30*time.Minute)) {
		t.Errorf("U3 row %+v: want the decision's run id r06, 1 attempt, the REVIEW run's start", u3)
	}
	if r.Units[1].Attempts != 2 || r.Units[1].RunID != "r03" {
		t.Errorf("U2 row %+v: want 2 attempts, run r03", r.Units[1])
	}
	if len(r.Population) == 0 || !strings.Contains(strings.Join(r.Population, " "), "latest") {
		t.Errorf("population sentences %q do not state the rules", r.Population)
	}

	// Engineering runs included: U8 counts as a seventh unit, passed first time.
	r = readReport(t, led, stats.Options{Filter: stats.Filter{IncludeEngineering: true}})
	want = stats.Counts{Units: 7, Passed: 5, Failed: 1, Held: 1, FirstPass: 4, Retested: 1, Attempts: 8, Decisions: 1,
		Runs: 10, Faults: 1, Aborted: 1, Engineering: 1, NoCompleted: 1}
	if r.Counts != want {
		t.Errorf("with engineering: counts\n got %+v\nwant %+v", r.Counts, want)
	}
}

// TestRetestBehindTheClock: a retest made at a station whose clock is an hour
// behind starts "before" the run it repeats; it is still the later attempt,
// for the ledger recorded it after (and it names the run it repeats).
func TestRetestBehindTheClock(t *testing.T) {
	r := readReport(t, storeHandRuns(t, []handRun{
		{id: "r01", serial: "U1", verdict: sequencer.Fail, offset: 70, noise: 20, pre: 1},
		{id: "r02", serial: "U1", verdict: sequencer.Pass, retestOf: "r01", clock: -time.Hour, offset: 12, noise: 20, pre: 1},
		{id: "r03", serial: "U2", verdict: sequencer.Pass, offset: 30, noise: 20, pre: 1},
	}), stats.Options{})
	if len(r.Units) != 2 {
		t.Fatalf("%d units, want 2", len(r.Units))
	}
	u := r.Units[0]
	if u.Serial != "U1" || u.RunID != "r02" || u.Verdict != "PASS" || u.FirstVerdict != "FAIL" || u.Attempts != 2 {
		t.Errorf("U1: latest %s %s, first %s, %d attempts; want r02 PASS, first FAIL, 2", u.RunID, u.Verdict, u.FirstVerdict, u.Attempts)
	}
	if r.Counts.Passed != 2 || r.Counts.FirstPass != 1 || r.Counts.Retested != 1 {
		t.Errorf("counts %+v, want 2 passed, 1 first pass, 1 retested", r.Counts)
	}
	off := resultNamed(t, r, "post_offset")
	if !reflect.DeepEqual(off.Values, []float64{12, 30}) {
		t.Errorf("post_offset in test order %v, want [12 30] (the retest's value, in the order recorded)", off.Values)
	}
}

func TestComputeFilters(t *testing.T) {
	led := storeHandRuns(t, handPopulation())
	for _, c := range []struct {
		name    string
		f       stats.Filter
		serials string
		runs    int
	}{
		{"lot, any case", stats.Filter{Lot: "l2"}, "U5", 2},
		{"site", stats.Filter{Site: "NORTH"}, "U1 U2", 3},
		{"station", stats.Filter{Station: "s2"}, "U7", 2},
		{"product", stats.Filter{Product: "amp-1"}, "U1 U2 U3 U4 U5 U7", 9},
		{"other product", stats.Filter{Product: "AMP-2"}, "", 0},
		{"revision", stats.Filter{Revision: "a"}, "U1 U2 U3 U4 U5 U7", 9},
		// Day 0's runs only; until is exclusive.
		{"until", stats.Filter{Until: handDay0.Add(24 * time.Hour)}, "U1 U2", 3},
		// From r05 on: U3's REVIEW run r04 (finished 08:31) is left out, so its
		// decision decides nothing counted; U2's runs too.
		{"since", stats.Filter{Since: handDay0.Add(24*time.Hour + 41*time.Minute)}, "U4 U5 U7", 5},
	} {
		r, err := stats.Read(handCtx, led, stats.Options{Filter: c.f})
		if c.runs == 0 {
			if !errors.Is(err, stats.ErrNoRuns) {
				t.Errorf("%s: error %v, want ErrNoRuns", c.name, err)
			}
			continue
		}
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		var got []string
		for _, u := range r.Units {
			got = append(got, u.Serial)
		}
		if strings.Join(got, " ") != c.serials || r.Counts.Runs != c.runs {
			t.Errorf("%s: units %v, %d runs; want %s, %d runs", c.name, got, r.Counts.Runs, c.serials, c.runs)
		}
	}
}

// TestFirstAttemptOutsideTheFilter: a unit failed in lot A and passed on
// retest in lot B is, in lot B's numbers, retested and not passed first time.
// In the Pareto, a conditional pass beside another limit's failure failed
// nothing; rejected on review, it did.
func TestFirstAttemptOutsideTheFilter(t *testing.T) {
	led := storeHandRuns(t, []handRun{
		{id: "r01", serial: "U1", verdict: sequencer.Fail, lot: "A", offset: 70, noise: 20, pre: 1},
		{id: "r02", serial: "U1", verdict: sequencer.Pass, lot: "B", retestOf: "r01", offset: 12, noise: 20, pre: 1},
		{id: "r03", serial: "U2", verdict: sequencer.Pass, lot: "B", offset: 30, noise: 20, pre: 1},
		// Conditional pass on offset, failed on noise: offset failed nothing.
		{id: "r04", serial: "U3", verdict: sequencer.Fail, lot: "B", offset: 45, zone: limits.ZoneConditionalPass, noise: 90, pre: 1},
	})
	r, err := stats.Read(handCtx, led, stats.Options{Filter: stats.Filter{Lot: "B"}})
	if err != nil {
		t.Fatal(err)
	}
	if r.Counts.Units != 3 || r.Counts.FirstPass != 1 || r.Counts.Retested != 1 || r.Units[0].FirstVerdict != "" {
		t.Errorf("lot B: %d units, %d first pass, %d retested, U1's first verdict %q; want 3, 1 (U2), 1 (U1), \"\"",
			r.Counts.Units, r.Counts.FirstPass, r.Counts.Retested, r.Units[0].FirstVerdict)
	}
	for _, p := range r.Pareto {
		if p.Limit == "offset" && (p.Failed != 0 || p.Held != 0 || p.First != 1) {
			t.Errorf("offset: failed %d held %d first %d; want 0, 0, 1 (U3's conditional pass; U1's first attempt is outside the filter)", p.Failed, p.Held, p.First)
		}
		if p.Limit == "noise" && p.Failed != 1 {
			t.Errorf("noise: failed %d, want 1 (U3)", p.Failed)
		}
	}
}

func TestComputePareto(t *testing.T) {
	r := readReport(t, storeHandRuns(t, handPopulation()), stats.Options{})
	// offset: U5 failed it, U4 is held on it; first attempts of U2 (fail),
	// U3 and U4 (conditional) and U5 did not pass it. noise: U5 failed it;
	// U4's invalid noise is held with the unit.
	want := []stats.LimitFailures{
		{Limit: "offset", Failed: 1, Held: 1, First: 4},
		{Limit: "noise", Failed: 1, Held: 1, First: 2},
	}
	if !reflect.DeepEqual(r.Pareto, want) {
		t.Errorf("Pareto\n got %+v\nwant %+v", r.Pareto, want)
	}
}

func resultNamed(t *testing.T, r stats.Report, name string) stats.ResultStats {
	t.Helper()
	for _, s := range r.Results {
		if s.Name == name {
			return s
		}
	}
	t.Fatalf("no result %s among %d", name, len(r.Results))
	return stats.ResultStats{}
}

func TestComputeCapability(t *testing.T) {
	r := readReport(t, storeHandRuns(t, handPopulation()), stats.Options{})
	var names []string
	for _, s := range r.Results {
		names = append(names, s.Name+"/"+s.Stage)
	}
	// Pre-trim first, then the newest run's (U7's) outcome order.
	if w := "pre_offset/as_found post_offset/as_left post_noise/as_left post_gain_error/as_left"; strings.Join(names, " ") != w {
		t.Fatalf("results %v, want %s", names, w)
	}
	off := resultNamed(t, r, "post_offset")
	values := []float64{10, 12, 20, 45, 400, 14} // U1, U2 (retest), U3, U4, U5, U7
	if !reflect.DeepEqual(off.Values, values) || !reflect.DeepEqual(off.Units, []int{0, 1, 2, 3, 4, 5}) {
		t.Fatalf("post_offset values %v of units %v, want %v", off.Values, off.Units, values)
	}
	if off.Unit != "uV" || off.Limit != "offset" || *off.Lower != -50 || *off.Upper != 50 || off.N != 6 || off.Invalid != 0 {
		t.Errorf("post_offset: unit %q limit %q tolerance %v…%v n %d invalid %d", off.Unit, off.Limit, *off.Lower, *off.Upper, off.N, off.Invalid)
	}
	// By hand: mean 501/6 = 83.5; Σ(x−x̄)² = 121031.5, s = √(121031.5/5) =
	// 155.5837; moving ranges 2, 8, 25, 355, 386, MR̄ = 155.2, MR̄/1.128 =
	// 137.5887 (e-Handbook §6.3.2.2: d2 = 1.128 for ranges of two).
	if !handNear(off.Mean, 83.5, 1e-12) || !handNear(off.SDOverall, 155.58374, 1e-4) || !handNear(off.SDWithin, 137.58865, 1e-4) {
		t.Errorf("post_offset mean %v sd %v within %v, want 83.5, 155.5837, 137.5887", off.Mean, off.SDOverall, off.SDWithin)
	}
	c, err := spc.Capable(values, off.Lower, off.Upper, 0.95)
	if err != nil {
		t.Fatal(err)
	}
	if off.Cp != c.Cp || off.Cpk != c.Cpk || off.Pp != c.Pp || off.Ppk != c.Ppk || off.CpCI != c.CpCI || off.CpkCI != c.CpkCI ||
		off.FractionOutside != c.FractionOutside {
		t.Errorf("post_offset capability %+v differs from spc.Capable's %+v", off, c)
	}
	if off.Outside != 1 { // 400 uV beyond 50 uV; the others within ±50 uV
		t.Errorf("post_offset: %d values outside the tolerance, want 1", off.Outside)
	}
	if r.Confidence != 0.95 {
		t.Errorf("report confidence %v, want the default 0.95", r.Confidence)
	}
	if off.MeanU != 2 || off.U[0] != 2 { // 2e-6 V in uV
		t.Errorf("post_offset mean U %v (first %v), want 2 uV", off.MeanU, off.U[0])
	}
	// Histogram over −50 − 25 … 50 + 25 uV; 400 uV is overflow.
	if off.Hist.Lo != -75 || off.Hist.Hi != 75 || len(off.Hist.Counts) != stats.DefaultBins || off.Hist.Over != 1 || off.Hist.Under != 0 {
		t.Errorf("post_offset histogram %v … %v, %d bins, under %d over %d; want −75 … 75, %d bins, 0, 1",
			off.Hist.Lo, off.Hist.Hi, len(off.Hist.Counts), off.Hist.Under, off.Hist.Over, stats.DefaultBins)
	}

	// Over the data's own range: Tukey's fences (e-Handbook §7.1.6) of 10, 12,
	// 14, 20, 45, 400: Q1 12.5, Q3 38.75, IQ 26.25, fences −26.9 … 78.1, so
	// 10 … 45 uV, a quarter of 35 uV either side; 400 uV over.
	if h := off.DataHist; h.Lo != 1.25 || h.Hi != 53.75 || h.Over != 1 || h.Under != 0 || len(h.Counts) != stats.DefaultBins {
		t.Errorf("post_offset data histogram %v … %v, under %d over %d, %d bins; want 1.25 … 53.75, 0, 1, %d",
			h.Lo, h.Hi, h.Under, h.Over, len(h.Counts), stats.DefaultBins)
	}

	// One-sided: from the lowest value (the smallest within the fences) to the limit,
	// 20 … 60 uV, widened by a quarter of 40 uV each side; 90 uV is overflow.
	noise := resultNamed(t, r, "post_noise")
	if noise.N != 5 || noise.Invalid != 1 || noise.Hist.Lo != 10 || noise.Hist.Hi != 70 || noise.Hist.Over != 1 || !math.IsNaN(noise.Cp) || math.IsNaN(noise.Cpk) {
		t.Errorf("post_noise n %d invalid %d histogram %v … %v over %d Cp %v Cpk %v; want 5, 1, 10 … 70, 1, NaN, a number",
			noise.N, noise.Invalid, noise.Hist.Lo, noise.Hist.Hi, noise.Hist.Over, noise.Cp, noise.Cpk)
	}
	if !math.IsNaN(noise.MeanU) {
		t.Errorf("post_noise mean U %v, want NaN (no uncertainty recorded)", noise.MeanU)
	}
	pre := resultNamed(t, r, "pre_offset")
	if pre.Unit != "mV" || !reflect.DeepEqual(pre.Values, []float64{3, -4, 5, 1, 2, 0}) || pre.MeanU != 0.002 {
		t.Errorf("pre_offset unit %q values %v mean U %v, want mV, [3 -4 5 1 2 0], 0.002", pre.Unit, pre.Values, pre.MeanU)
	}
	gain := resultNamed(t, r, "post_gain_error")
	if gain.N != 1 || !math.IsNaN(gain.Cpk) || !math.IsNaN(gain.SDOverall) || gain.Mean != 12 {
		t.Errorf("post_gain_error n %d Cpk %v sd %v mean %v, want 1, NaN, NaN, 12", gain.N, gain.Cpk, gain.SDOverall, gain.Mean)
	}
	if w := []stats.Pair{{Quantity: "offset", Pre: 0, Post: 1}}; !reflect.DeepEqual(r.Pairs, w) {
		t.Errorf("pairs %+v, want %+v", r.Pairs, w)
	}
	notes := strings.Join(r.Notes, "\n")
	for _, w := range []string{
		"post_offset: 1 run(s) were judged against another tolerance",
		"post_gain_error: 1 valid value(s), fewer than 2",
		"post_noise: 1 unit(s) have no valid value",
		"post_gain_error: 5 unit(s) were tested without",
		"1 engineering run(s) matched the filter and are left out",
	} {
		if !strings.Contains(notes, w) {
			t.Errorf("notes lack %q:\n%s", w, notes)
		}
	}
}

func TestComputeTrends(t *testing.T) {
	led := storeHandRuns(t, handPopulation())
	groups := func(tr stats.Trend) string {
		var s []string
		for _, g := range tr.Groups {
			s = append(s, g.Key+":"+strings.Repeat("x", g.N))
		}
		return strings.Join(s, " ")
	}
	trendOf := func(r stats.Report, name string) (stats.Trend, bool) {
		for _, tr := range r.Trends {
			if r.Results[tr.Result].Name == name {
				return tr, true
			}
		}
		return stats.Trend{}, false
	}
	for _, c := range []struct {
		by, want string
	}{
		{stats.ByDay, "2026-03-02:xx 2026-03-03:xxxx"},
		{stats.ByLot, "L1:xxxx L2:x (no lot):x"},
		{stats.ByStation, "S1:xxxxx S2:x"},
	} {
		r := readReport(t, led, stats.Options{By: c.by})
		tr, ok := trendOf(r, "post_offset")
		if !ok {
			t.Errorf("by %s: no trend of post_offset", c.by)
			continue
		}
		if got := groups(tr); got != c.want || tr.By != c.by {
			t.Errorf("by %s: groups %s (by %s), want %s", c.by, got, tr.By, c.want)
		}
		if len(tr.Means.Points) != len(tr.Groups) || tr.Means.Center != r.Results[tr.Result].Mean || tr.Means.Sigma != r.Results[tr.Result].SDWithin {
			t.Errorf("by %s: means chart %d points, center %v sigma %v; want one per group, the mean and SD within", c.by, len(tr.Means.Points), tr.Means.Center, tr.Means.Sigma)
		}
		if _, ok := trendOf(r, "post_gain_error"); ok {
			t.Errorf("by %s: a trend of post_gain_error, which has one value", c.by)
		}
	}
	r := readReport(t, led, stats.Options{By: stats.ByDay})
	tr, _ := trendOf(r, "post_offset")
	if g := tr.Groups[0]; g.Mean != 11 || !handNear(g.SD, math.Sqrt2, 1e-12) {
		t.Errorf("day 1 group mean %v sd %v, want 11 and √2 (10 and 12 uV)", g.Mean, g.SD)
	}
}

func TestReadNoRuns(t *testing.T) {
	led := storeHandRuns(t, handPopulation()[:0])
	if _, err := stats.Read(handCtx, led, stats.Options{}); !errors.Is(err, stats.ErrNoRuns) {
		t.Errorf("empty ledger: error %v, want ErrNoRuns", err)
	}
	if _, err := stats.Open(handCtx, filepath.Join(t.TempDir(), "none.db"), stats.Options{}); err == nil || errors.Is(err, stats.ErrNoRuns) {
		t.Errorf("missing ledger: error %v, want a missing file", err)
	}
	r := stats.Compute(nil, stats.Options{})
	if !math.IsNaN(r.Yield) || !math.IsNaN(r.FaultRate) {
		t.Errorf("no runs: yield %v fault rate %v, want NaN", r.Yield, r.FaultRate)
	}
}
