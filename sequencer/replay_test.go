package sequencer_test

import (
	"context"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"regexp"
	"strconv"
	"strings"
	"testing"
	"time"

	"trimline/sequencer"
)

// notRecomputed are the parts of a record that a replay does not compute, with
// why; Differences does not compare them. Paths are as leaves names them, with
// list indices written [].
var notRecomputed = map[string]string{
	".Schema": "copied", ".Metrology": "copied", ".RunID": "copied", ".Serial": "copied",
	".Product": "copied", ".Revision": "copied", ".Station": "copied", ".Operator": "copied",
	".Software": "copied", ".Started": "copied", ".Finished": "copied", ".Files": "copied",
	".Instruments": "copied", ".Conditions": "copied", ".Simulated": "copied",
	".Engineering": "copied", ".RetestOf": "copied", ".Lot": "copied", ".Site": "copied",
	".Disposition":                   "the reviewer's decision, copied; Differences checks that it applies (TestReplayOfReviewDecision)",
	".Soaks":                         "the temperatures read are facts of the run, copied",
	".Sweeps[].Points[].Readings":    "facts of the run, copied",
	".Sweeps[].TempC":                "from the stored sweep",
	".Sweeps[].TempKnown":            "from the stored sweep",
	".Trims[].Written":               "from the stored trim",
	".Trims[].Readback":              "from the stored trim",
	".Trims[].Stored":                "from the stored trim",
	".Coefficients[].Written":        "from the stored write",
	".Coefficients[].Readback":       "the unit's reply, from the stored write",
	".Coefficients[].Found":          "the unit's reply, from the stored write",
	".Zeros[].Shorted":               "facts of the run, copied",
	".Zeros[].AtZero":                "facts of the run, copied",
	".Results[].Stage":               "label from the sequence file (absent in older records)",
	".Results[].Step":                "label from the sequence file (absent in older records)",
	".Results[].Quantity":            "label from the sequence file (absent in older records)",
	".Outcomes[].Description":        "words of the limit file",
	".Outcomes[].Expr":               "words of the limit file",
	".Outcomes[].Unit":               "words of the limit file",
	".Outcomes[].Uses":               "words of the limit file",
	".Reasons":                       "words",
	".Notes":                         "words",
	".Fault":                         "words",
	".Results[].Note":                "words",
	".Zeros[].Note":                  "words",
	".Steps[].Note":                  "words",
	".Outcomes[].Reason":             "words",
	".Outcomes[].Decision.Statement": "words",
}

var index = regexp.MustCompile(`\[[^\]]*\]`)

// leaf is one thing in a record that can be changed: change changes it and
// returns the function that puts it back.
type leaf struct {
	path   string
	change func() (undo func())
}

// leaves lists every number, flag and word in v (and every present pointer and
// non-empty list, which can be dropped), skipping the paths notRecomputed names.
func leaves(v reflect.Value, path string, out *[]leaf) {
	if _, skip := notRecomputed[index.ReplaceAllString(path, "[]")]; skip {
		return
	}
	set := func(to reflect.Value) {
		old := reflect.New(v.Type()).Elem()
		old.Set(v)
		*out = append(*out, leaf{path, func() func() {
			v.Set(to)
			return func() { v.Set(old) }
		}})
	}
	switch v.Kind() {
	case reflect.Pointer:
		if v.IsNil() {
			return
		}
		set(reflect.Zero(v.Type()))
		leaves(v.Elem(), path, out)
	case reflect.Struct:
		if v.Type() == reflect.TypeFor[time.Time]() {
			return
		}
		for i := range v.NumField() {
			leaves(v.Field(i), path+"."+v.Type().Field(i).Name, out)
		}
	case reflect.Slice:
		if v.Len() == 0 {
			return
		}
		set(reflect.Zero(v.Type()))
		for i := range v.Len() {
			leaves(v.Index(i), path+"["+strconv.Itoa(i)+"]", out)
		}
	case reflect.Array:
		for i := range v.Len() {
			leaves(v.Index(i), path+"["+strconv.Itoa(i)+"]", out)
		}
	case reflect.Map: // a limit's values, by result name
		for _, k := range v.MapKeys() {
			old := v.MapIndex(k)
			*out = append(*out, leaf{path + "[" + k.String() + "]", func() func() {
				v.SetMapIndex(k, reflect.ValueOf(changed(old.Float())).Convert(old.Type()))
				return func() { v.SetMapIndex(k, old) }
			}})
		}
	case reflect.Float64:
		set(reflect.ValueOf(changed(v.Float())).Convert(v.Type()))
	case reflect.Int:
		set(reflect.ValueOf(int(v.Int() + 1)).Convert(v.Type()))
	case reflect.Bool:
		set(reflect.ValueOf(!v.Bool()))
	case reflect.String:
		set(reflect.ValueOf(v.String() + "~").Convert(v.Type()))
	}
}

// changed is x moved by 0.1 % (at least 1e-13, beyond same's 1e-15 absolute
// floor); an infinity or NaN becomes 7.
func changed(x float64) float64 {
	if math.IsInf(x, 0) || math.IsNaN(x) {
		return 7
	}
	if y := x * 1.001; math.Abs(y-x) >= 1e-13 {
		return y
	}
	return x + 1e-13
}

// Differences compares every number a replay computes again: on real recorded
// runs (the demo with its zero check; Monte Carlo uncertainties; a closed-loop
// re-trim; firmware coefficients; a saturated trim, whose limits are unjudged),
// the replay reproduces the record, and changing any one thing in the record
// that the replay recomputes — each value of a list, each present pointer and
// list dropped — is reported. A comparison removed from Differences, or a field
// added to the record and not compared, fails here (unless notRecomputed names
// it, with why).
func TestDifferencesSeeEveryRecomputedField(t *testing.T) {
	type run struct {
		name string
		cfg  sequencer.Config
		rec  *sequencer.Record
	}
	var runs []run
	{
		st, seq := demoFiles(t, nil)
		cfg := sequencer.Config{Station: st, Sequence: seq}
		e, err := sequencer.Open(context.Background(), cfg)
		if err != nil {
			t.Fatal(err)
		}
		defer e.Close()
		runs = append(runs, run{"demo", cfg, e.Run(context.Background(), "BRX-00001")})
	}
	{
		// An order-2 fit beside the demo's lines.
		st, _ := demoFiles(t, nil)
		seq, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(retrimText(t, quadraticFit, storeAnchor)), demoReader(t, nil))
		if err != nil {
			t.Fatal(err)
		}
		runs = append(runs, run{"order 2", sequencer.Config{Station: st, Sequence: seq}, openEngine(t, st, seq).Run(context.Background(), "BRX-00002")})
	}
	{
		cfg, rec := mcRun(t, "uncertainty: {method: monte_carlo, trials: 20000}", "BRX-00031")
		runs = append(runs, run{"monte carlo", cfg, rec})
	}
	{
		st, seq, e := retrimBench(t, retrimStep)
		runs = append(runs, run{"re-trim", sequencer.Config{Station: st, Sequence: seq}, e.Run(context.Background(), "BRX-00001")})
	}
	{
		e, cfg := coefBench(t, coefSeq)
		runs = append(runs, run{"coefficients", cfg, e.Run(context.Background(), "BRX-00001")})
	}
	{
		cfg, rec := saturatedRun(t)
		runs = append(runs, run{"saturated", cfg, rec})
	}
	seen := map[string]bool{}
	for _, r := range runs {
		again, err := sequencer.Replay(r.cfg, r.rec)
		if err != nil {
			t.Fatalf("%s: %v", r.name, err)
		}
		if d := sequencer.Differences(r.rec, again); len(d) > 0 {
			t.Fatalf("%s: replay differs before any change: %q", r.name, d)
		}
		// The record itself stands in for its stored copy: each change is
		// undone before the next.
		var ls []leaf
		leaves(reflect.ValueOf(r.rec).Elem(), "", &ls)
		for _, l := range ls {
			undo := l.change()
			d := sequencer.Differences(r.rec, again)
			undo()
			if len(d) == 0 {
				t.Errorf("%s: %s changed in the record: no difference reported", r.name, l.path)
			}
			seen[index.ReplaceAllString(l.path, "[]")] = true
		}
		if d := sequencer.Differences(r.rec, again); len(d) > 0 {
			t.Fatalf("%s: a change was not undone: %q", r.name, d)
		}
	}
	// The runs hold every part of a record the comparison covers.
	for _, p := range []string{
		".Fits[].LackOfFit.Adequate", ".Fits[].CovTotal[][]", ".Fits[].SourceZero", ".Fits[].Coef",
		".Results[].Unc.DOF", ".Results[].Unc.MC.Validated", ".Results[].Budget[].Share",
		".Outcomes[].Decision.POutside", ".Outcomes[].Decision.AcceptUpper", ".Outcomes[].Tolerance.Lower", ".Outcomes[].Values[]",
		".Zeros[].Unc.K", ".Zeros[].SpecU", ".Retrims[].Sensitivity", ".Coefficients[].Resolution",
		".Trims[].IdealU", ".Sweeps[].Points[].USys", ".Steps[].Status",
	} {
		if !seen[p] {
			t.Errorf("no run has %s", p)
		}
	}
	// One message per difference, naming the quantity with both values.
	rec := runs[0].rec
	again, err := sequencer.Replay(runs[0].cfg, rec)
	if err != nil {
		t.Fatal(err)
	}
	var res *sequencer.Result
	for i := range rec.Results {
		if rec.Results[i].Name == sequencer.ResPostOffset {
			res = &rec.Results[i]
		}
	}
	if res == nil {
		t.Fatalf("no %s in the demo record", sequencer.ResPostOffset)
	}
	u, k := res.Unc.Std, res.Unc.K
	res.Unc.Std, res.Unc.K = u*1.04, k*1.01
	d := sequencer.Differences(rec, again)
	res.Unc.Std, res.Unc.K = u, k
	want := []string{"result post_offset u: recorded", "result post_offset k: recorded"}
	if len(d) != len(want) || !strings.HasPrefix(d[0], want[0]) || !strings.HasPrefix(d[1], want[1]) || !strings.Contains(d[0], "recomputed") {
		t.Errorf("u ×1.04 and k ×1.01: %q, want two messages starting %q", d, want)
	}
	// A covariance of 2e-14 V (the demo's intercept and slope), changed by 5 %,
	// is seen although the change is below same's 1e-15 absolute floor.
	f := &rec.Fits[0]
	c := f.Cov
	f.Cov[0][1] *= 1.05
	d = sequencer.Differences(rec, again)
	f.Cov = c
	if len(d) != 1 || !strings.Contains(d[0], "covariance correlation[0][1]: recorded") {
		t.Errorf("cov[0][1] = %g ×1.05: %q, want the correlation reported", c[0][1], d)
	}
}

// quadraticFit is an order-2 fit of the demo's pre-trim sweep.
const quadraticFit = `  - kind: fit
    name: pre-trim quadratic
    sweep: pre-trim
    order: 2
    results: {nonlinearity: quad_nonlinearity}

`

// saturatedRun is the OFX-10 run whose offset trim saturates (see
// saturatedOFX10), with the files it ran with.
func saturatedRun(t *testing.T) (sequencer.Config, *sequencer.Record) {
	t.Helper()
	src := filepath.Join("testdata", "ofx10")
	data, err := os.ReadFile(filepath.Join(src, "ofx10-station.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	const lsb = "      offset_lsb: 20 uV\n"
	path := filepath.Join(t.TempDir(), "ofx10-station.yaml")
	if err := os.WriteFile(path, []byte(strings.Replace(string(data), lsb, lsb+"      offset: 12 mV\n", 1)), 0o644); err != nil {
		t.Fatal(err)
	}
	st, seq := loadFiles(t, path, filepath.Join(src, "ofx10-sequence.yaml"))
	rec := openEngine(t, st, seq).Run(context.Background(), "OFX-0001")
	if rec.Verdict != sequencer.Fail || len(rec.Trims) != 1 || !rec.Trims[0].Saturated {
		t.Fatalf("verdict %s, trims %+v: want FAIL with the offset trim saturated", rec.Verdict, rec.Trims)
	}
	return sequencer.Config{Station: st, Sequence: seq}, rec
}
