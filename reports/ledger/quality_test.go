package ledger_test

import (
	"math"
	"reflect"
	"testing"
	"time"

	"trimline/reports/ledger"
	"trimline/sequencer"
)

func TestQualityRuns(t *testing.T) {
	l, _ := openLedger(t)
	shape := recordShape{sweeps: 1, points: 2, readings: 1}
	// q1: a lot, a site, a result with its own quantity, one per channel, and
	// an invalid one (NaN).
	q1 := makeRecord("q1", "SN1", sequencer.Pass, shape)
	q1.Lot, q1.Site = "L7", "Nordhafen"
	q1.Results[2].Quantity = "nonlinearity"
	q1.Results = append(q1.Results,
		sequencer.Result{Name: "gain_error", Channel: "2", Stage: sequencer.AsLeft, Value: 4e-6, Unit: "ratio", Valid: true},
		sequencer.Result{Name: "pre_offset", Value: math.NaN(), Unit: "V", Note: "no reading"})
	q1.Outcomes[1].Channel = "2"
	// q2: REVIEW, later decided by q3; q4 an engineering FAULT the next day.
	q2 := makeRecord("q2", "SN2", sequencer.Review, shape)
	q2.Started, q2.Finished = q1.Started.Add(time.Hour), q1.Finished.Add(time.Hour)
	q3 := makeRecord("q3", "SN2", sequencer.Pass, shape)
	q3.Started, q3.Finished = q2.Started.Add(time.Hour), q2.Finished.Add(time.Hour)
	q4 := makeRecord("q4", "SN3", sequencer.Fault, shape)
	q4.Engineering = true
	q4.Started, q4.Finished = q1.Started.Add(24*time.Hour), q1.Finished.Add(24*time.Hour)

	mustRecord(t, l, q1, "TQ")
	c2 := mustRecord(t, l, q2, "TQ")
	q3.RetestOf = "q2"
	q3.Disposition = &sequencer.Disposition{Of: "q2", OfCertificate: c2, Decision: sequencer.DecisionAccept, Reviewer: "R", Reason: "ok"}
	if _, err := l.RecordRunWith(ctx, q3, ledger.RecordOptions{Prefix: "TQ", Review: &ledger.ReviewDetail{Reason: "ok"}}); err != nil {
		t.Fatal(err)
	}
	mustRecord(t, l, q4, "TQ")

	runs, err := l.QualityRuns(ctx, time.Time{}, time.Time{})
	if err != nil {
		t.Fatal(err)
	}
	var ids []string
	for _, r := range runs {
		ids = append(ids, r.RunID)
	}
	if !reflect.DeepEqual(ids, []string{"q1", "q2", "q3", "q4"}) {
		t.Fatalf("runs %v, want q1 q2 q3 q4 (oldest first)", ids)
	}
	r := runs[0]
	if r.Serial != "SN1" || r.Product != "AMP-10" || r.Revision != "C" || r.Station != "EOL-2" || r.Lot != "L7" || r.Site != "Nordhafen" ||
		r.Verdict != sequencer.Pass || r.Certificate == "" || r.Engineering || r.Disposition != nil ||
		!r.Started.Equal(q1.Started) || !r.Finished.Equal(q1.Finished) {
		t.Errorf("q1 read as %+v", r)
	}
	type res struct {
		name, ch, quantity string
		stage              sequencer.Stage
		valid              bool
	}
	var got []res
	for _, x := range r.Results {
		got = append(got, res{x.Name, x.Channel, x.Quantity, x.Stage, x.Valid})
	}
	want := []res{
		{"post_offset", "", "offset", sequencer.AsLeft, true},         // the first layout's quantity and stage
		{"post_gain_error", "", "gain_error", sequencer.AsLeft, true}, //
		{"nonlinearity", "", "nonlinearity", 0, true},                 // the record's own quantity
		{"offset_code", "", "code", sequencer.Adjustment, true},
		{"gain_error", "2", "", sequencer.AsLeft, true},
		{"pre_offset", "", "offset", sequencer.AsFound, false},
	}
	if !reflect.DeepEqual(got, want) {
		t.Errorf("results\n got %+v\nwant %+v", got, want)
	}
	if x := r.Results[0]; x.Value != 3.1e-6 || x.ExpandedU != 2.472e-6 || x.Unit != "V" {
		t.Errorf("post_offset %v ± %v %s, want 3.1e-06 ± 2.472e-06 V", x.Value, x.ExpandedU, x.Unit)
	}
	if x := r.Results[3]; !math.IsNaN(x.ExpandedU) {
		t.Errorf("offset_code U %v, want NaN (exact)", x.ExpandedU)
	}
	if x := r.Results[5]; !math.IsNaN(x.Value) {
		t.Errorf("invalid pre_offset value %v, want NaN", x.Value)
	}
	off, gain, lin := r.Outcomes[0], r.Outcomes[1], r.Outcomes[2]
	if off.Name != "offset" || off.Unit != "uV" || !off.Pass || off.Rule != "guarded" || *off.Lower != -50 || *off.Upper != 50 ||
		off.Zone != "pass" || !reflect.DeepEqual(off.Values, map[string]float64{"post_offset": 3.1}) {
		t.Errorf("offset outcome %+v", off)
	}
	if gain.Channel != "2" || gain.Lower != nil || *gain.Upper != 100 || gain.Rule != "simple" {
		t.Errorf("gain outcome %+v: want channel 2, upper 100 only, simple", gain)
	}
	if lin.Rule != "" || lin.Lower != nil || lin.Upper != nil || lin.Values["offset_code"] != 2101 {
		t.Errorf("expression outcome %+v: want no rule, no tolerance, its values", lin)
	}
	if d := runs[2].Disposition; d == nil || d.Of != "q2" || d.Decision != sequencer.DecisionAccept || runs[2].RetestOf != "q2" {
		t.Errorf("decision q3: disposition %+v retest of %q", d, runs[2].RetestOf)
	}
	if runs[1].Verdict != sequencer.Review || runs[1].Disposition != nil {
		t.Errorf("q2: verdict %s disposition %+v", runs[1].Verdict, runs[1].Disposition)
	}
	if f := runs[3]; !f.Engineering || f.Verdict != sequencer.Fault || f.Certificate != "" || len(f.Results) != 4 {
		t.Errorf("q4: engineering %v verdict %s certificate %q, %d results", f.Engineering, f.Verdict, f.Certificate, len(f.Results))
	}

	// Since is inclusive, until exclusive, both on Finished.
	runs, err = l.QualityRuns(ctx, q2.Finished, q4.Finished)
	if err != nil {
		t.Fatal(err)
	}
	if len(runs) != 2 || runs[0].RunID != "q2" || runs[1].RunID != "q3" || len(runs[1].Results) != len(q3.Results) || len(runs[1].Outcomes) != 3 {
		t.Errorf("q2's finish until q4's: %d runs %+v, want q2 and q3 with their rows", len(runs), runs)
	}
	if runs, err := l.QualityRuns(ctx, q4.Finished.Add(time.Second), time.Time{}); err != nil || runs == nil || len(runs) != 0 {
		t.Errorf("after the last run: %v, %v; want an empty slice", runs, err)
	}
}
