package plan_test

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strings"
	"testing"
	"time"

	_ "trimline/instruments/sim" // the simulated bench, scheme sim://
	"trimline/reports/ledger"
	"trimline/reports/plan"
	"trimline/reports/signing"
	"trimline/sequencer"
	"trimline/sequences"
)

var ctx = context.Background()

// demoLedger runs n BRX-200 units on the simulated bench (the demo's files,
// calibrations due a year from now) and records them in a new ledger. It
// returns the ledger's path and the records.
func demoLedger(t *testing.T, n int) (string, []*sequencer.Record) {
	t.Helper()
	dir := t.TempDir()
	calDue := regexp.MustCompile(`(?m)^(\s*cal_due:\s*)\d{4}-\d{2}-\d{2}`)
	entries, err := fs.ReadDir(sequences.Demo, ".")
	if err != nil {
		t.Fatal(err)
	}
	for _, e := range entries {
		data, _ := fs.ReadFile(sequences.Demo, e.Name())
		data = calDue.ReplaceAll(data, []byte("${1}"+time.Now().AddDate(1, 0, 0).Format("2006-01-02")))
		if err := os.WriteFile(filepath.Join(dir, e.Name()), data, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	if _, _, err := signing.Init(filepath.Join(dir, "keys"), "TL1"); err != nil {
		t.Fatal(err)
	}
	st, err := sequencer.LoadStation(filepath.Join(dir, "brx200-station.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	seq, err := sequencer.LoadSequence(filepath.Join(dir, "brx200-sequence.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	eng, err := sequencer.Open(ctx, sequencer.Config{Station: st, Sequence: seq, Operator: "test", Software: "test"})
	if err != nil {
		t.Fatal(err)
	}
	defer eng.Close()
	path := filepath.Join(dir, "ledger.db")
	led, err := ledger.Open(ctx, path)
	if err != nil {
		t.Fatal(err)
	}
	defer led.Close()
	var recs []*sequencer.Record
	for i := range n {
		rec := eng.Run(ctx, fmt.Sprintf("BRX-%05d", i+1))
		if _, err := led.RecordRun(ctx, rec, "TL1"); err != nil {
			t.Fatal(err)
		}
		recs = append(recs, rec)
	}
	return path, recs
}

// retestAndReview adds to the ledger at path a retest of the first unit
// (recs[0]) and, for the second, a REVIEW run and its decision (accept), and
// returns the records each unit's latest attempt now is, in the order the
// units were last tested.
func retestAndReview(t *testing.T, path string, recs []*sequencer.Record) []*sequencer.Record {
	t.Helper()
	led, err := ledger.Open(ctx, path)
	if err != nil {
		t.Fatal(err)
	}
	defer led.Close()
	later := func(r *sequencer.Record, id string, d time.Duration) *sequencer.Record {
		c := *r
		c.RunID = id
		c.Started, c.Finished = r.Started.Add(d), r.Finished.Add(d)
		c.Results = slices.Clone(r.Results)
		return &c
	}
	retest := later(recs[0], "retest-1", time.Hour)
	retest.RetestOf = recs[0].RunID
	for i := range retest.Results {
		if retest.Results[i].Name == "pre_offset" {
			retest.Results[i].Value = 1.25e-3 // unlike any simulated unit's
		}
	}
	if _, err := led.RecordRun(ctx, retest, "TL1"); err != nil {
		t.Fatal(err)
	}
	review := later(recs[1], "review-2", 2*time.Hour)
	review.RetestOf = recs[1].RunID
	review.Verdict, review.Reasons = sequencer.Review, []string{"held for a look"}
	cert, err := led.RecordRun(ctx, review, "TL1")
	if err != nil {
		t.Fatal(err)
	}
	decision := later(review, "decision-2", time.Hour)
	decision.RetestOf = review.RunID
	decision.Verdict, decision.Reasons = sequencer.Pass, nil
	decision.Results = nil // the decision's own copy must not be read
	decision.Disposition = &sequencer.Disposition{Of: review.RunID, OfCertificate: cert, Decision: sequencer.DecisionAccept,
		Reviewer: "R. Vey", Reason: "fine", At: decision.Finished, Tested: review.Finished}
	if _, err := led.RecordRunWith(ctx, decision, ledger.RecordOptions{Prefix: "TL1", Review: &ledger.ReviewDetail{Reason: "fine"}}); err != nil {
		t.Fatal(err)
	}
	return append(slices.Clone(recs[2:]), retest, review)
}

func resultValue(rec *sequencer.Record, name string) (float64, bool) {
	for _, r := range rec.Results {
		if r.Name == name && r.Valid {
			return r.Value, true
		}
	}
	return 0, false
}

func TestMeasuredDemoLedger(t *testing.T) {
	path, recs := demoLedger(t, 40)
	recs = retestAndReview(t, path, recs)
	if recs[38].RunID != "retest-1" || recs[39].Verdict != sequencer.Review {
		t.Fatal("latest attempts out of order")
	}
	led, err := ledger.Open(ctx, path)
	if err != nil {
		t.Fatal(err)
	}
	defer led.Close()
	m, err := plan.Measured(ctx, led, "") // the ledger holds one product: BRX-200
	if err != nil {
		t.Fatal(err)
	}
	passed := 0
	for _, r := range recs {
		if r.Verdict == sequencer.Pass || r.Verdict == sequencer.Review { // the REVIEW run was accepted
			passed++
		}
	}
	if m.Product != "BRX-200" || m.Units != 40 || m.Passed != passed {
		t.Errorf("product %q, %d units, %d passed; want BRX-200, 40, %d", m.Product, m.Units, m.Passed, passed)
	}
	// Every measured value is the record's, in test order.
	for _, name := range plan.MeasuredResults {
		var want []float64
		for _, r := range recs {
			if v, ok := resultValue(r, name); ok {
				want = append(want, v)
			}
		}
		if !slices.Equal(m.Values[name], want) {
			t.Errorf("%s: %d values %v…, want %d", name, len(m.Values[name]), m.Values[name][:min(3, len(m.Values[name]))], len(want))
		}
	}
	if m.Unit["pre_offset"] != "V" || m.Unit["pre_gain_error"] != "ratio" || m.Unit["offset_code"] != "code" {
		t.Errorf("units %v", m.Unit)
	}
	for _, dac := range []string{"offset", "gain"} {
		var want []float64
		sat := 0
		for _, r := range recs {
			for _, c := range r.Trims {
				if c.DAC == dac && c.Written {
					want = append(want, float64(c.Code))
					if c.Saturated {
						sat++
					}
				}
			}
		}
		if got := m.Values[dac+"_code"]; !slices.Equal(got, want) || len(want) < 30 || m.Written[dac] != len(want) || m.Saturated[dac] != sat {
			t.Errorf("%s codes: %d (%d written, %d saturated), want %d (%d saturated)", dac, len(got), m.Written[dac], m.Saturated[dac], len(want), sat)
		}
	}
	if _, err := plan.Measured(ctx, led, "NO-SUCH-1"); err == nil || !strings.Contains(err.Error(), "no unit of NO-SUCH-1") {
		t.Errorf("unknown product: %v", err)
	}

	// A prediction that is the measurement itself agrees everywhere; one whose
	// pre-trim gain error is half as wide is found out, with its shares named.
	var p plan.Prediction
	p.Product, p.Yield, p.YieldSE = "brx-200", float64(passed)/40, 0.001
	for _, name := range []string{"pre_offset", "pre_gain_error", "offset_code", "gain_code", "post_offset", "post_gain_error"} {
		p.Quantities = append(p.Quantities, plan.Predicted{Name: name, Unit: m.Unit[name], Values: m.Values[name]})
	}
	c := plan.Compare(p, m, plan.Options{})
	for _, q := range c.Quantities {
		if q.Verdict != plan.Agrees || q.KSD != 0 || !(q.KSP == 1) {
			t.Errorf("%s against itself: %s (D %g, p %g): %s", q.Name, q.Verdict, q.KSD, q.KSP, q.Finding)
		}
	}
	if y := c.Proportions[0]; y.Verdict != plan.Agrees || y.Count != passed || y.N != 40 {
		t.Errorf("yield: %+v", y)
	}

	half := slices.Clone(m.Values["pre_gain_error"])
	mean := 0.0
	for _, v := range half {
		mean += v / float64(len(half))
	}
	for i := range half {
		half[i] = mean + (half[i]-mean)/2
	}
	p.Quantities[1] = plan.Predicted{Name: "pre_gain_error", Unit: "1", Values: half,
		Shares: map[string]float64{"reference": 0.7, "feedback resistors": 0.3}}
	p.Saturation = map[string]float64{"offset": 0}
	c = plan.Compare(p, m, plan.Options{})
	g := c.Quantities[1]
	if g.Verdict != plan.Differs || !near(g.SDRatio, 2, 1e-9) ||
		!strings.HasPrefix(g.Finding, "Measured SD is 2× the predicted (F test p < 0.001): the budget underestimates what drives the pre-trim gain error (largest shares: reference 70 %, feedback resistors 30 %)") {
		t.Errorf("half as wide: %s, ratio %g: %s", g.Verdict, g.SDRatio, g.Finding)
	}
	if len(c.Proportions) != 2 || c.Proportions[1].Name != "offset DAC saturated" || c.Proportions[1].N != m.Written["offset"] {
		t.Errorf("saturation: %+v", c.Proportions)
	}
	var buf bytes.Buffer
	c.WriteText(&buf)
	text := buf.String()
	t.Logf("\n%s", text)
	for _, want := range []string{
		"Plan against measured: BRX-200",
		"40 unit(s) measured",
		"pre_gain_error — the pre-trim gain error [ppm]",
		"DIFFERS: Measured SD is 2×",
		"pre_offset — the pre-trim offset [",
		"Yield and saturation",
		"post_offset: the stations stated a median expanded uncertainty of ",
	} {
		if !strings.Contains(text, want) {
			t.Errorf("text lacks %q", want)
		}
	}

	if !regexp.MustCompile(`(?m)^  n +40 +40$`).MatchString(text) {
		t.Error("text lacks the row of n, 40 on each side")
	}
	// YieldOver counts the limits that use the named results.
	pass, units := m.PassedOn([]string{"post_offset"})
	if units != 40 || pass < passed {
		t.Errorf("passed on post_offset's limits: %d of %d (every limit: %d of 40)", pass, units, passed)
	}

	// Against opens the file; a missing file is an error, not a new ledger.
	c2, err := plan.Against(ctx, path, p, plan.Options{})
	if err != nil || c2.Ledger != path || len(c2.Quantities) != 6 {
		t.Errorf("Against: %v, %+v", err, c2)
	}
	missing := filepath.Join(t.TempDir(), "none.db")
	if _, err := plan.Against(ctx, missing, p, plan.Options{}); !errors.Is(err, fs.ErrNotExist) {
		t.Errorf("missing ledger: %v", err)
	}
	if _, err := os.Stat(missing); err == nil {
		t.Error("Against made a ledger file")
	}
}
