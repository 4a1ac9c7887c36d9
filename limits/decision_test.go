package limits_test

import (
	"encoding/json"
	"math"
	"strconv"
	"strings"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"

	"trimline/limits"
)

const tolPath = "../testdata/limits/toleranced.yaml"

func loadTol(t testing.TB) *limits.Set {
	t.Helper()
	set, err := limits.LoadFile(tolPath, catalog)
	if err != nil {
		t.Fatalf("LoadFile(%s): %v", tolPath, detail(err))
	}
	return set
}

// tolResults is a unit for toleranced.yaml: post_offset x µV and post_noise n µV,
// each with U = 8 µV at k = 2 (ν infinite), gain code g with U = 4 codes at k = 2.
func tolResults(x, n, g float64) map[string]limits.Value {
	inf := math.Inf(1)
	return map[string]limits.Value{
		"post_offset": {V: micro(x), Valid: true, U: 8e-6, K: 2, DOF: inf},
		"post_noise":  {V: micro(n), Valid: true, U: 8e-6, K: 2, DOF: inf},
		"gain_code":   {V: g, Valid: true, U: 4, K: 2, DOF: inf},
		"offset_code": {V: 512, Valid: true},
	}
}

// micro returns x µV in volts as the decimal x·10⁻⁶ (x * 1e-6 is inexact: 50 * 1e-6
// is 4.9999999999999996e-05, just inside a limit of 50 µV).
func micro(x float64) float64 {
	v, err := strconv.ParseFloat(strconv.FormatFloat(x, 'g', -1, 64)+"e-6", 64)
	if err != nil {
		panic(err)
	}
	return v
}

func within(got, want, rel float64) bool {
	return math.Abs(got-want) <= rel*math.Abs(want)
}

// ILAC-G8:09/2019 §4.2.3 zones on hand-worked cases. With U = 8 µV and w = 1·U:
// TL = ±50 µV, AL = ±42 µV, TL ± w = ±58 µV; one-sided upper TL = 60 µV, AL = 52 µV,
// TL + w = 68 µV; the gain code's lower TL = 100 with w = 2·4 = 8 codes, AL = 108,
// TL − w = 92. Limits of each zone belong to the inner zone.
func TestZones(t *testing.T) {
	set := loadTol(t)
	tests := []struct {
		limit  string
		x      float64 // post_offset, post_noise or gain_code in the limit's unit
		zone   string
		pass   bool
		source string
	}{
		// two-sided, non-binary (conditional_pass: review → Pass false)
		{"offset two-sided", 0, limits.ZonePass, true, "hand-worked: |0| ≤ AL 42"},
		{"offset two-sided", 42, limits.ZonePass, true, "hand-worked: at AL = TL − w = 50 − 8"},
		{"offset two-sided", -42, limits.ZonePass, true, "hand-worked: at AL = −50 + 8"},
		{"offset two-sided", 42.5, limits.ZoneConditionalPass, false, "hand-worked: AL 42 < 42.5 ≤ TL 50"},
		{"offset two-sided", 50, limits.ZoneConditionalPass, false, "hand-worked: at TL, inside the tolerance"},
		{"offset two-sided", -45, limits.ZoneConditionalPass, false, "hand-worked: −50 ≤ −45 < −42"},
		{"offset two-sided", 50.5, limits.ZoneConditionalFail, false, "hand-worked: TL 50 < 50.5 ≤ TL + w 58"},
		{"offset two-sided", 58, limits.ZoneConditionalFail, false, "hand-worked: at TL + w"},
		{"offset two-sided", -58, limits.ZoneConditionalFail, false, "hand-worked: at TL − w"},
		{"offset two-sided", 58.5, limits.ZoneFail, false, "hand-worked: beyond TL + w 58"},
		{"offset two-sided", -60, limits.ZoneFail, false, "hand-worked: beyond TL − w −58"},
		// two-sided, binary with guard band (ILAC-G8 §4.2.2): only inside AL passes
		{"offset two-sided binary", 42, limits.ZonePass, true, "hand-worked: at AL"},
		{"offset two-sided binary", 45, limits.ZoneConditionalPass, false, "hand-worked: outside AL: binary fail"},
		{"offset two-sided binary", 55, limits.ZoneConditionalFail, false, "hand-worked: binary fail"},
		{"offset two-sided binary", 60, limits.ZoneFail, false, "hand-worked: binary fail"},
		// simple acceptance, w = 0 (ILAC-G8 §4.2.1): AL = TL, no conditional zones
		{"offset simple", 50, limits.ZonePass, true, "hand-worked: at TL = AL"},
		{"offset simple", -50, limits.ZonePass, true, "hand-worked: at TL = AL"},
		{"offset simple", 50.5, limits.ZoneFail, false, "hand-worked: beyond TL + 0"},
		// one-sided upper, non-binary
		{"noise upper only", -1000, limits.ZonePass, true, "hand-worked: no lower limit"},
		{"noise upper only", 52, limits.ZonePass, true, "hand-worked: at AL = 60 − 8"},
		{"noise upper only", 56, limits.ZoneConditionalPass, false, "hand-worked: 52 < 56 ≤ 60"},
		{"noise upper only", 60, limits.ZoneConditionalPass, false, "hand-worked: at TL"},
		{"noise upper only", 68, limits.ZoneConditionalFail, false, "hand-worked: at TL + w"},
		{"noise upper only", 68.5, limits.ZoneFail, false, "hand-worked: beyond TL + w"},
		// one-sided upper, binary
		{"noise upper only binary", 52, limits.ZonePass, true, "hand-worked: at AL"},
		{"noise upper only binary", 56, limits.ZoneConditionalPass, false, "hand-worked: binary fail"},
		// one-sided lower, non-binary, w = 2·U = 8 codes
		{"gain code lower only", 4000, limits.ZonePass, true, "hand-worked: no upper limit"},
		{"gain code lower only", 108, limits.ZonePass, true, "hand-worked: at AL = 100 + 8"},
		{"gain code lower only", 104, limits.ZoneConditionalPass, false, "hand-worked: 100 ≤ 104 < 108"},
		{"gain code lower only", 100, limits.ZoneConditionalPass, false, "hand-worked: at TL"},
		{"gain code lower only", 92, limits.ZoneConditionalFail, false, "hand-worked: at TL − w"},
		{"gain code lower only", 91, limits.ZoneFail, false, "hand-worked: beyond TL − w"},
	}
	for _, tc := range tests {
		x, n, g := 0.0, 0.0, 2048.0
		switch {
		case strings.HasPrefix(tc.limit, "offset"):
			x = tc.x
		case strings.HasPrefix(tc.limit, "noise"):
			n = tc.x
		default:
			g = tc.x
		}
		o := find(t, set.Judge(tolResults(x, n, g)), tc.limit)
		d := o.Decision
		if d == nil {
			t.Errorf("%s at %v: no Decision (reason %q)", tc.limit, tc.x, o.Reason)
			continue
		}
		if d.Zone != tc.zone || o.Pass != tc.pass {
			t.Errorf("%s at %v: zone %q pass %v, want %q %v (%s)\n  %s", tc.limit, tc.x, d.Zone, o.Pass, tc.zone, tc.pass, tc.source, d.Statement)
		}
		if o.Pass != (o.Reason == "") {
			t.Errorf("%s at %v: pass %v with reason %q", tc.limit, tc.x, o.Pass, o.Reason)
		}
		if d.Value != tc.x {
			t.Errorf("%s: Decision.Value = %v, want %v (the value in the limit's unit)", tc.limit, d.Value, tc.x)
		}
	}
}

// The acceptance limits and guard band as recorded, hand-worked from
// toleranced.yaml and U = 8 µV (4 codes).
func TestDecisionNumbers(t *testing.T) {
	set := loadTol(t)
	outs := set.Judge(tolResults(0, 0, 2048))
	f := func(p *float64) any {
		if p == nil {
			return nil
		}
		return *p
	}
	tests := []struct {
		limit          string
		rule           string
		guard          float64
		accLo, accHi   any
		lower, upper   any
		binary         bool
		source         string
		statementParts []string
	}{
		{"offset two-sided", limits.RuleGuarded, 8, -42.0, 42.0, -50.0, 50.0, false, "hand-worked: w = 1·8, AL = ±(50 − 8)",
			[]string{"Guarded acceptance, w = 1·U = 8.0 µV (ILAC-G8:09/2019 §4.2.3)", "U = 8.0 µV", "acceptance interval −42.0 … 42.0 µV: pass"}},
		{"offset two-sided binary", limits.RuleGuarded, 8, -42.0, 42.0, -50.0, 50.0, true, "hand-worked",
			[]string{"(ILAC-G8:09/2019 §4.2.2)"}},
		{"offset simple", limits.RuleSimple, 0, -50.0, 50.0, -50.0, 50.0, false, "hand-worked: w = 0, AL = TL",
			[]string{"Simple acceptance, w = 0 (ILAC-G8:09/2019 §4.2.1)", "within the tolerance interval −50 … 50 µV: pass"}},
		{"noise upper only", limits.RuleGuarded, 8, nil, 52.0, nil, 60.0, false, "hand-worked: AL = 60 − 8",
			[]string{"at or below the upper acceptance limit 52.0 µV: pass", "TUR not defined for a one-sided tolerance."}},
		{"gain code lower only", limits.RuleGuarded, 8, 108.0, nil, 100.0, nil, false, "hand-worked: w = 2·4, AL = 100 + 8",
			[]string{"w = 2·U = 8.0 code", "measured 2048 code with U = 4.0 code (k = 2.00, νeff = ∞)"}},
	}
	for _, tc := range tests {
		o := find(t, outs, tc.limit)
		d := o.Decision
		if d == nil {
			t.Fatalf("%s: no decision: %s", tc.limit, o.Reason)
		}
		if d.Rule != tc.rule || d.Guard != tc.guard || f(d.AcceptLower) != tc.accLo || f(d.AcceptUpper) != tc.accHi ||
			f(d.Lower) != tc.lower || f(d.Upper) != tc.upper || d.Binary != tc.binary {
			t.Errorf("%s: rule %s w %v AL %v…%v TL %v…%v binary %v, want %s %v %v…%v %v…%v %v (%s)", tc.limit,
				d.Rule, d.Guard, f(d.AcceptLower), f(d.AcceptUpper), f(d.Lower), f(d.Upper), d.Binary,
				tc.rule, tc.guard, tc.accLo, tc.accHi, tc.lower, tc.upper, tc.binary, tc.source)
		}
		for _, p := range tc.statementParts {
			if !strings.Contains(d.Statement, p) {
				t.Errorf("%s: statement\n  %s\nwant it to contain %q", tc.limit, d.Statement, p)
			}
		}
		if d.Result != o.Uses[0] || d.U == 0 || d.K != 2 {
			t.Errorf("%s: Result %q U %v K %v", tc.limit, d.Result, d.U, d.K)
		}
	}
	// The expression limit beside them has no decision.
	if o := find(t, outs, "headroom"); o.Decision != nil || !o.Pass {
		t.Errorf("headroom: %+v, want a plain expression pass", o)
	}
	// The toleranced limits are recorded with an equivalent expression.
	for name, want := range map[string]string{ // source: the tolerances in toleranced.yaml
		"offset two-sided": "within(post_offset, -50, 50)", "noise upper only": "post_noise <= 60",
		"gain code lower only": "gain_code >= 100",
	} {
		if o := find(t, outs, name); o.Expr != want {
			t.Errorf("%s: Expr %q, want %q", name, o.Expr, want)
		}
	}
}

// The statement of the brief's worked case, word for word.
func TestStatement(t *testing.T) {
	set := loadTol(t)
	r := tolResults(0, 0, 2048)
	r["post_offset"] = limits.Value{V: -3.2e-6, Valid: true, U: 8.2e-6, K: 2, DOF: math.Inf(1)}
	d := find(t, set.Judge(r), "offset two-sided").Decision
	// TUR 100 / (2 · 4.1 · 1.959964) = 6.22; U95 = 4.1 · 1.959964 = 8.04 µV (hand-worked).
	want := "Guarded acceptance, w = 1·U = 8.2 µV (ILAC-G8:09/2019 §4.2.3): measured −3.2 µV with U = 8.2 µV (k = 2.00, νeff = ∞) " +
		"lies within the acceptance interval −41.8 … 41.8 µV: pass. Probability the true value is outside the tolerance: < 0.0001 %. " +
		"TUR 6.22:1 (ANSI/NCSL Z540.3-2006 §5.3, U95 = 8.04 µV)."
	if d.Statement != want {
		t.Errorf("statement\n  %s\nwant\n  %s", d.Statement, want)
	}
	r["post_offset"] = limits.Value{V: 45e-6, Valid: true, U: 8e-6, K: 2}
	o := find(t, set.Judge(r), "offset two-sided")
	// JCGM 100:2008 §7.2.6: U = 8 µV has two significant digits as 8.0 µV; the
	// value and the acceptance limits are written to its decimal place.
	wantReason := "post_offset = 45.0 µV lies within the tolerance interval −50 … 50 µV but outside the acceptance interval " +
		"−42.0 … 42.0 µV: conditional pass, so review (conditional_pass: review)"
	if o.Reason != wantReason {
		t.Errorf("reason\n  %s\nwant\n  %s", o.Reason, wantReason)
	}
}

// Φ(z) from the error function, for the expected values below.
func phi(z float64) float64 { return 0.5 * math.Erfc(-z/math.Sqrt2) }

func TestFalseAcceptProbability(t *testing.T) {
	set := loadTol(t)
	judge := func(limit string, r map[string]limits.Value) *limits.Decision {
		t.Helper()
		o := find(t, set.Judge(r), limit)
		if o.Decision == nil {
			t.Fatalf("%s: no decision: %s", limit, o.Reason)
		}
		return o.Decision
	}

	// Normal, k = 2, w = U: at the acceptance limit AL = TL − 2u the true value is
	// above TL with probability 1 − Φ(2) = 0.02275 (normal table; JCGM 106:2012 §9).
	want := 1 - phi(2)
	if !within(want, 0.02275, 1e-3) {
		t.Fatalf("1 − Φ(2) = %v, not 0.02275: the test's own arithmetic is off", want)
	}
	d := judge("noise upper only", tolResults(0, 52, 2048))
	if d.Zone != limits.ZonePass || !within(d.POutside, want, 1e-9) {
		t.Errorf("one-sided at AL: zone %s POutside %v, want pass %v (1 − Φ(2))", d.Zone, d.POutside, want)
	}
	if !strings.Contains(d.Statement, "outside the tolerance: 2.3 %") {
		t.Errorf("statement %q, want 2.3 %% (two significant digits)", d.Statement)
	}
	// Two-sided: the far tail adds Φ((−50 − 42)/4) = Φ(−23), nothing in float64 terms.
	d = judge("offset two-sided", tolResults(42, 0, 2048))
	if want2 := want + phi(-23); !within(d.POutside, want2, 1e-9) {
		t.Errorf("two-sided at AL: POutside %v, want %v (1 − Φ(2) + Φ(−23))", d.POutside, want2)
	}

	// w = 0 at the tolerance limit: half the distribution is outside, 0.5
	// (symmetry of the normal distribution), plus Φ(−25) from the other side.
	d = judge("offset simple", tolResults(50, 0, 2048))
	if want := 0.5 + phi(-25); d.Zone != limits.ZonePass || !within(d.POutside, want, 1e-12) {
		t.Errorf("simple at TL: zone %s POutside %v, want pass 0.5", d.Zone, d.POutside)
	}

	// Finite dof: ν = 10, k from Student's t for 95.45 % (JCGM 100:2008 G.3), so
	// U = k·u with k = t₁₀(0.97725). At AL = TL − U the probability above TL is the
	// t survival at k, cross-checked with gonum's StudentsT computed here; by
	// construction it is (1 − 0.9545)/2 = 0.02275 again.
	const nu = 10
	tdist := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: nu}
	k := tdist.Quantile((1 + 0.9545) / 2)
	const u = 4.0 // µV
	U := k * u
	x := 60 - U
	r := tolResults(0, 0, 2048)
	r["post_noise"] = limits.Value{V: x * 1e-6, Valid: true, U: U * 1e-6, DOF: nu} // K left to the set's coverage
	d = judge("noise upper only", r)
	wantT := distuv.StudentsT{Mu: x, Sigma: u, Nu: nu}.Survival(60)
	if !within(d.K, k, 1e-9) || !within(d.Std, u, 1e-9) || d.DOF != nu {
		t.Errorf("ν = 10: k %v u %v dof %v, want k = %v (gonum StudentsT quantile), u = 4, dof 10", d.K, d.Std, d.DOF, k)
	}
	if d.Zone != limits.ZonePass || !within(d.POutside, wantT, 1e-6) || !within(d.POutside, (1-0.9545)/2, 1e-6) {
		t.Errorf("ν = 10 at AL: zone %s POutside %v, want pass %v (gonum StudentsT survival) = 0.02275", d.Zone, d.POutside, wantT)
	}
	// And a value off the limits, two-sided, against gonum's CDF on both sides.
	r["post_offset"] = limits.Value{V: 30e-6, Valid: true, Std: 9e-6, DOF: nu}
	d = judge("offset two-sided", r)
	tt := distuv.StudentsT{Mu: 30, Sigma: 9, Nu: nu}
	if want := tt.CDF(-50) + (1 - tt.CDF(50)); !within(d.POutside, want, 1e-6) {
		t.Errorf("ν = 10, x = 30, u = 9: POutside %v, want %v (gonum StudentsT CDF)", d.POutside, want)
	}

	// No uncertainty: simple acceptance, POutside 0 inside and 1 outside.
	for _, tc := range []struct {
		x    float64
		p    float64
		zone string
	}{{49, 0, limits.ZonePass}, {51, 1, limits.ZoneFail}} { // source: contract (brief)
		r := tolResults(0, 0, 2048)
		r["post_offset"] = limits.Value{V: micro(tc.x), Valid: true}
		o := find(t, set.Judge(r), "offset two-sided")
		d := o.Decision
		if d == nil || d.POutside != tc.p || d.Zone != tc.zone || d.Rule != limits.RuleSimple || d.Guard != 0 || d.TUR != 0 {
			t.Fatalf("x = %v without U: %+v, want simple acceptance, zone %s, POutside %v, TUR 0", tc.x, d, tc.zone, tc.p)
		}
		if !strings.HasPrefix(d.Statement, "Uncertainty not evaluated: simple acceptance") {
			t.Errorf("statement %q, want it to say the uncertainty was not evaluated", d.Statement)
		}
	}
}

// ANSI/NCSL Z540.3-2006 §5.3: TUR = (upper − lower) / (2 · U95).
func TestTUR(t *testing.T) {
	src := header + `decision:
  coverage: 95 %
  rule: simple
limits:
  - name: reference output
    description: 10 V reference, ±5 mV.
    unit: V
    uses: [post_max_error]
    tolerance: {lower: 9.995, upper: 10.005}
  - name: offset
    description: d
    unit: uV
    uses: [post_offset]
    tolerance: {upper: 50}
`
	set, err := limits.Load("tur.yaml", []byte(src), catalog)
	if err != nil {
		t.Fatal(detail(err))
	}
	// Worked example: U = 0.0012 V at 95 % → TUR = 0.010 / (2 · 0.0012) = 4.17:1.
	r := map[string]limits.Value{
		"post_max_error": {V: 10.0004, Valid: true, U: 0.0012, DOF: math.Inf(1)},
		"post_offset":    {V: 1e-6, Valid: true, U: 1e-6},
	}
	outs := set.Judge(r)
	d := outs[0].Decision
	if want := 0.010 / (2 * 0.0012); !within(d.TUR, want, 1e-9) || d.TURLow {
		t.Errorf("TUR %v low %v, want %v = 4.17:1, not low (ANSI/NCSL Z540.3-2006 §5.3 worked example)", d.TUR, d.TURLow, want)
	}
	if !strings.Contains(d.Statement, "TUR 4.17:1") {
		t.Errorf("statement %q, want TUR 4.17:1", d.Statement)
	}
	// One-sided: TUR not defined.
	if d := outs[1].Decision; d.TUR != 0 || d.TURLow || !strings.Contains(d.Statement, "TUR not defined for a one-sided tolerance") {
		t.Errorf("one-sided: TUR %v low %v statement %q, want 0 and said so (contract)", d.TUR, d.TURLow, d.Statement)
	}
	pred := set.PredictTUR(map[string]limits.Value{"post_max_error": {U: 0.0012}, "post_offset": {U: 1e-6}})
	if len(pred) != 2 || !within(pred[0].TUR, 4.1666666667, 1e-9) || pred[0].Low || pred[0].Min != 4 ||
		pred[0].Limit != "reference output" || pred[0].Result != "post_max_error" || !pred[1].OneSided || pred[1].TUR != 0 || pred[1].Low {
		t.Errorf("PredictTUR = %+v, want 4.17 not low, then one-sided (ANSI/NCSL Z540.3-2006 §5.3)", pred)
	}
	// A two-sided limit without an uncertainty cannot be shown to reach min_tur.
	if p := set.PredictTUR(nil); !p[0].Low || p[0].TUR != 0 || p[1].Low {
		t.Errorf("PredictTUR(nil) = %+v, want the two-sided one Low (contract)", p)
	}
}

// Re-expansion to 95 %: U given at 95.45 % with k = 2 is u = U/2, and U95 = 1.96·u
// (normal, JCGM 100:2008 Table G.1: 1.960 for 95 %, 2.000 for 95.45 %).
func TestTURReexpansion(t *testing.T) {
	set := loadTol(t) // coverage 95.45 %
	k95 := distuv.UnitNormal.Quantile(0.975)
	if !within(k95, 1.96, 1e-4) {
		t.Fatalf("k95 = %v", k95)
	}
	r := tolResults(0, 0, 2048)
	r["post_offset"] = limits.Value{V: 0, Valid: true, U: 10e-6, K: 2, DOF: math.Inf(1)}
	d := find(t, set.Judge(r), "offset two-sided").Decision
	if want := 100 / (2 * k95 * 5); !within(d.TUR, want, 1e-12) {
		t.Errorf("TUR %v, want %v = 100 / (2 · 1.96 · 5) (re-expanded from k = 2)", d.TUR, want)
	}
	// With ν = 10 the re-expansion uses t₁₀(0.975) = 2.228 (JCGM 100:2008 Table G.2: 2.23).
	r["post_offset"] = limits.Value{V: 0, Valid: true, U: 10e-6, K: 2, DOF: 10}
	d = find(t, set.Judge(r), "offset two-sided").Decision
	t10 := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: 10}.Quantile(0.975)
	if want := 100 / (2 * t10 * 5); !within(t10, 2.228, 1e-3) || !within(d.TUR, want, 1e-9) {
		t.Errorf("TUR %v, want %v = 100 / (2 · 2.228 · 5) (t₁₀ re-expansion)", d.TUR, want)
	}
	// Standard uncertainty only: U = k·u at 95.45 % (k = 2.000 normal), u = 4 µV.
	r["post_offset"] = limits.Value{V: 0, Valid: true, Std: 4e-6}
	d = find(t, set.Judge(r), "offset two-sided").Decision
	if !within(d.U, 8, 1e-4) || !within(d.K, 2, 1e-4) || d.Std != 4 || !math.IsInf(float64(d.DOF), 1) {
		t.Errorf("from u = 4 µV: U %v k %v u %v dof %v, want U ≈ 8, k ≈ 2.000 (JCGM 100 Table G.1), dof +Inf (infinite)", d.U, d.K, d.Std, d.DOF)
	}
	// TURLow: ±50 µV with U95 = 15 µV is 3.33:1, below 4:1 (hand-worked).
	r["post_offset"] = limits.Value{V: 0, Valid: true, U: 15e-6 * 2 / k95, K: 2}
	d = find(t, set.Judge(r), "offset two-sided").Decision
	if !within(d.TUR, 100.0/30, 1e-9) || !d.TURLow || !strings.Contains(d.Statement, "below the minimum 4:1") {
		t.Errorf("TUR %v low %v statement %q, want 3.33 low", d.TUR, d.TURLow, d.Statement)
	}
}

// policyFile is toleranced-limit file with the given decision policy lines.
func policyFile(policy string) string {
	return header + "decision:\n  rule: guarded\n" + policy + "limits:\n" +
		entry("name: offset", "description: d", "unit: uV", "uses: [post_offset]", "tolerance: {lower: -50, upper: 50}") +
		entry("name: codes", "description: d", "unit: code", "uses: [gain_code]", "expr: gain_code > 0")
}

func TestPolicyOverall(t *testing.T) {
	tests := []struct {
		policy string
		x      float64 // post_offset, µV, U = 8 µV: AL ±42, TL ±50, TL + w ±58
		pass   bool
		want   string
		source string
	}{
		{"  statements: non-binary\n  conditional_pass: ship\n", 45, true, limits.VerdictPass, "brief: ship → pass"},
		{"  statements: non-binary\n  conditional_pass: review\n", 45, false, limits.VerdictReview, "brief: review → review"},
		{"  statements: non-binary\n", 45, false, limits.VerdictReview, "brief: conditional_pass defaults to review"},
		{"  statements: non-binary\n  conditional_pass: fail\n", 45, false, limits.VerdictFail, "brief: fail → fail"},
		{"  statements: non-binary\n", 55, false, limits.VerdictFail, "brief: conditional fail → fail (default)"},
		{"  statements: non-binary\n  conditional_fail: review\n", 55, false, limits.VerdictReview, "brief: conditional_fail: review"},
		{"  statements: non-binary\n  conditional_fail: review\n", 60, false, limits.VerdictFail, "hand-worked: beyond TL + w is fail"},
		{"  statements: non-binary\n  conditional_pass: ship\n", 10, true, limits.VerdictPass, "hand-worked: zone pass"},
		{"  statements: binary\n  conditional_pass: ship\n", 45, false, limits.VerdictFail, "ILAC-G8 §4.2.2: binary fails outside AL"},
		{"  statements: binary\n  conditional_fail: review\n", 55, false, limits.VerdictFail, "ILAC-G8 §4.2.2: binary"},
		// TUR with U = 8 µV is 100 / (2 · 4 · 1.96) = 6.38; min_tur 7 makes it low.
		{"  min_tur: 7\n  tur_policy: refuse\n", 10, false, limits.VerdictReview, "brief: refuse holds back a low-TUR pass"},
		{"  min_tur: 7\n  tur_policy: warn\n", 10, true, limits.VerdictPass, "brief: warn only records it"},
		{"  min_tur: \"7:1\"\n  tur_policy: refuse\n", 45, false, limits.VerdictFail, "hand-worked: binary fail stays fail"},
	}
	for _, tc := range tests {
		set, err := limits.Load("p.yaml", []byte(policyFile(tc.policy)), catalog)
		if err != nil {
			t.Fatal(detail(err))
		}
		r := tolResults(tc.x, 0, 2048)
		outs := set.Judge(r)
		if o := outs[0]; o.Pass != tc.pass || set.Overall(outs) != tc.want || limits.Passed(outs) != tc.pass {
			t.Errorf("%q at %v µV: pass %v overall %q, want %v %q (%s)\n  %s\n  %s", tc.policy, tc.x, o.Pass, set.Overall(outs),
				tc.pass, tc.want, tc.source, o.Reason, o.Decision.Statement)
		}
	}
	// The expression limit failing makes the unit fail whatever the policy.
	set, _ := limits.Load("p.yaml", []byte(policyFile("  statements: non-binary\n")), catalog)
	outs := set.Judge(tolResults(45, 0, -1))
	if got := set.Overall(outs); got != limits.VerdictFail {
		t.Errorf("review + expression fail = %q, want fail", got)
	}
	if got := set.Overall(nil); got != limits.VerdictFail {
		t.Errorf("Overall(nil) = %q, want fail (nothing judged has not passed)", got)
	}
}

func TestPolicyDefaults(t *testing.T) {
	set := loadGood(t) // no decision section
	want := limits.Policy{Coverage: 0.9545, Rule: "simple", GuardFactor: 1, Binary: true, ConditionalPass: "review",
		ConditionalFail: "fail", MinTUR: 4, TURPolicy: "warn"}
	if got := set.Policy(); got != want {
		t.Errorf("Policy() = %+v, want the defaults %+v (brief)", got, want)
	}
	if got := (&limits.Set{}).Policy(); got != want {
		t.Errorf("Policy() of a Set not made by Load = %+v, want the defaults", got)
	}
	if got := set.Overall(set.Judge(goodResults())); got != limits.VerdictPass {
		t.Errorf("expression-only set: Overall %q, want pass", got)
	}
}

// The demo limit file as released: toleranced limits in SI, decision defaults.
func TestDemoLimitFile(t *testing.T) {
	set, err := limits.LoadFile("../sequences/brx200-limits.yaml", catalog)
	if err != nil {
		t.Fatal(detail(err))
	}
	want := limits.Policy{Coverage: 0.9545, Rule: "guarded", GuardFactor: 1, Binary: false, ConditionalPass: "review",
		ConditionalFail: "fail", MinTUR: 4, TURPolicy: "warn"}
	if got := set.Policy(); got != want {
		t.Errorf("Policy() = %+v, want %+v (brx200-limits.yaml decision section)", got, want)
	}
	type b struct {
		result     string
		lo, hi     float64 // SI; NaN = unbounded
		loOK, hiOK bool
	}
	n := math.NaN()
	wantTol := map[string]b{ // source: the demo file's tolerances (product spec), in SI by hand
		"untrimmed offset in range": {"pre_offset", -0.02, 0.02, true, true},
		"untrimmed gain in range":   {"pre_gain_error", -0.018, 0.018, true, true},
		"offset after trim":         {"post_offset", -800e-6, 800e-6, true, true},
		"gain after trim":           {"post_gain_error", -500e-6, 500e-6, true, true},
		"linearity after trim":      {"post_nonlinearity", n, 1e-4, false, true},
		"total error after trim":    {"post_max_error", n, 1000e-6, false, true},
		"output noise":              {"post_noise", n, 60e-6, false, true},
	}
	tols := set.Toleranced()
	if len(tols) != len(wantTol) {
		t.Fatalf("%d toleranced limits, want %d: %+v", len(tols), len(wantTol), tols)
	}
	for _, tl := range tols {
		w, ok := wantTol[tl.Limit]
		if !ok || tl.Result != w.result || (tl.Lower != nil) != w.loOK || (tl.Upper != nil) != w.hiOK ||
			(w.loOK && *tl.Lower != w.lo) || (w.hiOK && *tl.Upper != w.hi) {
			t.Errorf("%s: %+v, want %+v", tl.Limit, tl, w)
		}
	}
	for _, l := range set.Limits {
		if l.Name == "trim headroom" && (l.Tolerance != nil || !strings.Contains(l.Expr, "within(offset_code")) {
			t.Errorf("trim headroom should stay an expression limit: %+v", l)
		}
	}
}

// A toleranced limit never passes a value that is not a finite number, nor one
// whose uncertainty is not; and every outcome encodes as JSON (no NaN or Inf).
func TestTolerancedNeverPassesBadNumbers(t *testing.T) {
	set := loadTol(t)
	inf := math.Inf(1)
	tests := []struct {
		name   string
		v      limits.Value
		reason string
	}{
		{"NaN", limits.Value{V: math.NaN(), Valid: true, U: 8e-6, K: 2}, "result post_offset is not a valid number: it is NaN"},
		{"+Inf", limits.Value{V: inf, Valid: true, U: 8e-6, K: 2}, "result post_offset is not a valid number: it is +Inf"},
		{"invalid", limits.Value{V: 0, Why: "meter overload"}, "result post_offset is not a valid number: meter overload"},
		{"U NaN", limits.Value{V: 0, Valid: true, U: math.NaN()}, "result post_offset has no usable uncertainty: uncertainty U = NaN is not a finite number ≥ 0"},
		{"U negative", limits.Value{V: 0, Valid: true, U: -1e-6}, "result post_offset has no usable uncertainty: uncertainty U = -1e-06 is not a finite number ≥ 0"},
		{"u Inf", limits.Value{V: 0, Valid: true, Std: inf}, "result post_offset has no usable uncertainty: uncertainty u = +Inf is not a finite number ≥ 0"},
		{"dof NaN", limits.Value{V: 0, Valid: true, U: 1e-6, DOF: math.NaN()}, "result post_offset has no usable uncertainty: degrees of freedom NaN is not a number ≥ 0"},
	}
	for _, tc := range tests {
		r := tolResults(0, 0, 2048)
		r["post_offset"] = tc.v
		outs := set.Judge(r)
		for _, o := range outs[:3] { // the three post_offset limits
			if o.Pass || o.Decision != nil || o.Reason != tc.reason {
				t.Errorf("%s, %s: pass %v decision %v reason %q, want fail without a decision: %q (contract)", tc.name, o.Name, o.Pass, o.Decision, o.Reason, tc.reason)
			}
			// The tolerance as written stays on the outcome, for reports to show.
			var l *limits.Limit
			for _, x := range set.Limits {
				if x.Name == o.Name {
					l = x
				}
			}
			if tol := o.Tolerance; tol == nil || !samePtr(tol.Lower, l.Tolerance.Lower) || !samePtr(tol.Upper, l.Tolerance.Upper) || tol.Rule != l.Tolerance.Rule {
				t.Errorf("%s, %s: tolerance %+v, want the limit's %+v", tc.name, o.Name, tol, l.Tolerance)
			}
		}
		if set.Overall(outs) != limits.VerdictFail {
			t.Errorf("%s: Overall %q, want fail", tc.name, set.Overall(outs))
		}
	}
	// Infinite dof (+Inf in memory, as everywhere) is recorded as 0 so the record
	// encodes.
	outs := set.Judge(tolResults(0, 0, 2048))
	for _, o := range outs {
		b, err := json.Marshal(o)
		if err != nil {
			t.Errorf("%s: %v", o.Name, err)
		}
		if o.Decision != nil && (!math.IsInf(float64(o.Decision.DOF), 1) || !strings.Contains(string(b), `"dof":0,`)) {
			t.Errorf("%s: DOF %v, want 0 for infinite in %s", o.Name, o.Decision.DOF, b)
		}
	}
}

// With U so large that 2w exceeds the tolerance, nothing can pass: inside the
// tolerance is conditional pass (ILAC-G8 §4.2.3 with an empty acceptance interval).
func TestEmptyAcceptanceInterval(t *testing.T) {
	set := loadTol(t)
	r := tolResults(0, 0, 2048)
	r["post_offset"] = limits.Value{V: 0, Valid: true, U: 60e-6, K: 2}
	o := find(t, set.Judge(r), "offset two-sided")
	if o.Pass || o.Decision.Zone != limits.ZoneConditionalPass || !strings.Contains(o.Decision.Statement, "acceptance interval is empty") {
		t.Errorf("pass %v zone %s statement %q, want conditional pass with an empty acceptance interval (hand-worked: AL 10 … −10)",
			o.Pass, o.Decision.Zone, o.Decision.Statement)
	}
}

func TestOutcomeDecisionDoesNotShareSet(t *testing.T) {
	set := loadTol(t)
	o := find(t, set.Judge(tolResults(0, 0, 2048)), "offset two-sided")
	*o.Decision.Lower = 1234
	if *set.Limits[0].Tolerance.Lower != -50 {
		t.Error("changing an Outcome's Decision changed the Set")
	}
}

// Uncertainties too large for float64 arithmetic fail without a decision rather
// than record an infinity.
func TestHugeUncertainty(t *testing.T) {
	set := loadTol(t)
	r := tolResults(0, 0, 2048)
	r["gain_code"] = limits.Value{V: 2048, Valid: true, U: math.MaxFloat64, K: 2} // w = 2·U overflows
	r["post_offset"] = limits.Value{V: 0, Valid: true, U: 1e300, Std: 1e-300}     // k = U/u overflows
	for _, name := range []string{"gain code lower only", "offset two-sided"} {
		o := find(t, set.Judge(r), name)
		if o.Pass || o.Decision != nil || !strings.Contains(o.Reason, "has no usable uncertainty") {
			t.Errorf("%s: pass %v decision %+v reason %q, want a failure without a decision (contract)", name, o.Pass, o.Decision, o.Reason)
		}
	}
}

// The statement's numbers against the table's: w = 1·U is written as U is
// (JCGM 100:2008 §7.2.6: "0.20", its significant zero kept); a νeff above
// 1e7, which the judge takes as infinite for k, is written "νeff ≥ 1000" as
// the certificate's table writes it (units.FormatDOF), and an infinite one
// "νeff = ∞"; a Monte Carlo U names its coverage interval (JCGM 101:2008
// §7.7, §7.8) in place of the GUM's νeff, which did not give its k.
func TestStatementCoverageAndGuard(t *testing.T) {
	set := loadTol(t)
	judge := func(v limits.Value) *limits.Decision {
		t.Helper()
		r := tolResults(0, 0, 2048)
		r["post_offset"] = v
		o := find(t, set.Judge(r), "offset two-sided")
		if o.Decision == nil {
			t.Fatalf("no decision: %s", o.Reason)
		}
		return o.Decision
	}
	d := judge(limits.Value{V: 3e-6, Valid: true, U: 20e-6, K: 2, DOF: 1.5e8})
	if d.UText() != "20" || d.GuardText() != d.UText() || !strings.Contains(d.Statement, "w = 1·U = 20 µV") {
		t.Errorf("U = 20 µV: UText %q GuardText %q statement %q, want w written as U", d.UText(), d.GuardText(), d.Statement)
	}
	if !strings.Contains(d.Statement, "(k = 2.00, νeff ≥ 1000)") {
		t.Errorf("νeff = 1.5e8: statement %q lacks \"(k = 2.00, νeff ≥ 1000)\" (the table's words)", d.Statement)
	}
	d = judge(limits.Value{V: 3e-6, Valid: true, U: 2e-6, K: 2, DOF: math.Inf(1)})
	if d.UText() != "2.0" || d.GuardText() != "2.0" || !strings.Contains(d.Statement, "w = 1·U = 2.0 µV") || !strings.Contains(d.Statement, "(k = 2.00, νeff = ∞)") {
		t.Errorf("U = 2.0 µV, ν = ∞: UText %q GuardText %q statement %q, want w = 1·U = 2.0 µV and νeff = ∞", d.UText(), d.GuardText(), d.Statement)
	}
	d = judge(limits.Value{V: 3e-6, Valid: true, U: 10.3e-6, K: 2.06, DOF: 267, Interval: "symmetric"})
	if !strings.Contains(d.Statement, "(k = 2.06, probabilistically symmetric Monte Carlo coverage interval, JCGM 101:2008 §7.7)") || strings.Contains(d.Statement, "νeff") {
		t.Errorf("Monte Carlo U: statement %q, want the interval named and no νeff", d.Statement)
	}
	// PFA: a U was evaluated, so a tail that rounds to 1 is "> 99.9999 %",
	// the one format of the near-certain end; "100 %" only without a U.
	d = judge(limits.Value{V: 500e-6, Valid: true, U: 2e-6, K: 2})
	if d.PFAText() != "> 99.9999 %" {
		t.Errorf("far outside with U: PFA %q, want \"> 99.9999 %%\"", d.PFAText())
	}
	d = judge(limits.Value{V: 500e-6, Valid: true})
	if d.PFAText() != "100 %" {
		t.Errorf("outside without U: PFA %q, want \"100 %%\"", d.PFAText())
	}
}
