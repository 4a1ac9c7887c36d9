package limits_test

import (
	"os"
	"reflect"
	"strings"
	"testing"

	"trimline/instruments/files"
	"trimline/limits"
)

const variantsPath = "../testdata/limits/variants.yaml"

func loadVariants(t testing.TB) *limits.Set {
	t.Helper()
	set, err := limits.LoadFile(variantsPath, catalog)
	if err != nil {
		t.Fatalf("LoadFile(%s): %v", variantsPath, detail(err))
	}
	return set
}

func variantOf(t testing.TB, set *limits.Set, name string) *limits.Set {
	t.Helper()
	v, err := set.Variant(name)
	if err != nil {
		t.Fatalf("Variant(%q): %v", name, err)
	}
	return v
}

// siBounds maps each toleranced limit of s to its tolerance in SI, nil for an
// unbounded side.
func siBounds(s *limits.Set) map[string][2]*float64 {
	out := map[string][2]*float64{}
	for _, tl := range s.Toleranced() {
		out[tl.Limit] = [2]*float64{tl.Lower, tl.Upper}
	}
	return out
}

func limitNames(s *limits.Set) []string {
	var out []string
	for _, l := range s.Limits {
		out = append(out, l.Name)
	}
	return out
}

func TestVariantsInfo(t *testing.T) {
	set := loadVariants(t)
	want := []limits.VariantInfo{ // hand-copied from variants.yaml lines 48-50 and 69-71
		{Name: "grade-H", Description: "High-accuracy grade, selected parts.", Revisions: []string{"C", "D"}},
		{Name: "grade-S", Description: "Standard grade for revision B boards.", Revisions: []string{"B"}},
	}
	if got := set.Variants(); !reflect.DeepEqual(got, want) {
		t.Errorf("Variants() = %+v, want %+v", got, want)
	}
	h := variantOf(t, set, "grade-H")
	if got := h.Variants(); !reflect.DeepEqual(got, want) {
		t.Errorf("a variant's Variants() = %+v, want the file's %+v", got, want)
	}
	set.Variants()[0].Revisions[0] = "Z" // a copy: the set keeps its own
	if got := set.Variants()[0].Revisions[0]; got != "C" {
		t.Errorf("changing the returned revisions changed the set: %q", got)
	}
	if set.VariantName != "" {
		t.Errorf("base VariantName = %q, want empty", set.VariantName)
	}
	if g, _ := limits.Load("g.yaml", mustRead(t, goodPath), catalog); g.Variants() != nil {
		t.Errorf("a file without variants has Variants() = %v, want nil", g.Variants())
	}
}

func mustRead(t testing.TB, path string) []byte {
	t.Helper()
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return data
}

func TestVariantEffectiveSets(t *testing.T) {
	set := loadVariants(t)
	f := func(v float64) *float64 { return &v }

	// The base set is the limits list alone (variants.yaml lines 25-45).
	if got, want := limitNames(set), []string{"offset after trim", "gain after trim", "output noise", "trim headroom"}; !reflect.DeepEqual(got, want) {
		t.Errorf("base limits %q, want %q", got, want)
	}
	base := siBounds(set)
	wantBase := map[string][2]*float64{
		"offset after trim": {f(-800e-6), f(800e-6)}, "gain after trim": {f(-500e-6), f(500e-6)}, "output noise": {nil, f(60e-6)},
	}
	checkBounds(t, "base", base, wantBase)

	// grade-H: offset ±400 µV, gain ±200 ppm (lines 52-56), noise an expression
	// (57-58), one limit added (60-64), trim headroom removed (65).
	h := variantOf(t, set, "grade-H")
	if h.VariantName != "grade-H" || h.Name != set.Name || h.Revision != set.Revision || h.Product != set.Product ||
		h.File != set.File || h.SHA256 != set.SHA256 {
		t.Errorf("grade-H header %q %q %q %q %q %q, want the file's with VariantName grade-H",
			h.VariantName, h.Name, h.Revision, h.Product, h.File, h.SHA256)
	}
	if got, want := limitNames(h), []string{"offset after trim", "gain after trim", "output noise", "untrimmed nonlinearity plausible"}; !reflect.DeepEqual(got, want) {
		t.Errorf("grade-H limits %q, want %q (base order, overrides in place, removal dropped, addition last)", got, want)
	}
	checkBounds(t, "grade-H", siBounds(h), map[string][2]*float64{
		"offset after trim": {f(-400e-6), f(400e-6)}, "gain after trim": {f(-200e-6), f(200e-6)},
	})
	gain := h.Limits[1]
	if gain.Description != "Gain error after trim (±0.02 %), grade H." || gain.Unit != "ppm" || gain.Line != 31 {
		t.Errorf("overridden gain limit %q %q line %d, want the override's description, the base unit ppm and entry line 31",
			gain.Description, gain.Unit, gain.Line)
	}
	if off := h.Limits[0]; off.Description != set.Limits[0].Description || off.Tolerance.Rule != limits.RuleGuarded || off.Tolerance.Binary {
		t.Errorf("overridden offset keeps %q, rule %s binary %v; want the base description and the file's guarded, non-binary rule",
			off.Description, off.Tolerance.Rule, off.Tolerance.Binary)
	}
	if n := h.Limits[2]; n.Tolerance != nil || n.Expr != "post_noise <= 40" || !reflect.DeepEqual(n.Uses, []string{"post_noise"}) {
		t.Errorf("noise under grade-H: tolerance %v expr %q uses %v, want the override's expression and no tolerance", n.Tolerance, n.Expr, n.Uses)
	}
	if a := h.Limits[3]; a.Line != 60 || a.Unit != "%" || a.Expr != "pre_nonlinearity <= 0.5" {
		t.Errorf("added limit line %d unit %q expr %q, want line 60, %%, pre_nonlinearity <= 0.5", a.Line, a.Unit, a.Expr)
	}
	wantPol := set.Policy()
	wantPol.ConditionalPass, wantPol.MinTUR = "fail", 3 // lines 66-68
	if got := h.Policy(); got != wantPol {
		t.Errorf("grade-H policy %+v, want the file's with conditional_pass fail and min_tur 3: %+v", got, wantPol)
	}

	// grade-S: the offset in mV with its own simple rule (lines 72-76), and binary
	// statements for every other toleranced limit (77-78).
	s := variantOf(t, set, "grade-S")
	if got := limitNames(s); !reflect.DeepEqual(got, limitNames(set)) {
		t.Errorf("grade-S limits %q, want the base's", got)
	}
	checkBounds(t, "grade-S", siBounds(s), wantBase) // −0.8 … 0.8 mV is −800 … 800 µV
	if off := s.Limits[0]; off.Unit != "mV" || *off.Tolerance.Lower != -0.8 || off.Tolerance.Rule != limits.RuleSimple || !off.Tolerance.Binary {
		t.Errorf("grade-S offset unit %q lower %v rule %s binary %v, want mV, −0.8, simple, binary",
			off.Unit, *off.Tolerance.Lower, off.Tolerance.Rule, off.Tolerance.Binary)
	}
	for _, i := range []int{1, 2} {
		if tol := s.Limits[i].Tolerance; tol.Rule != limits.RuleGuarded || !tol.Binary {
			t.Errorf("grade-S %q rule %s binary %v, want guarded (file) and binary (variant's decision)", s.Limits[i].Name, tol.Rule, tol.Binary)
		}
	}
	if set.Limits[1].Tolerance.Binary {
		t.Error("the variant's decision changed the base set's gain limit")
	}
	if p := s.Policy(); !p.Binary || p.Rule != limits.RuleGuarded || p.MinTUR != 4 {
		t.Errorf("grade-S policy %+v, want the file's with binary statements", p)
	}
}

func checkBounds(t *testing.T, what string, got, want map[string][2]*float64) {
	t.Helper()
	if len(got) != len(want) {
		t.Errorf("%s: %d toleranced limits, want %d", what, len(got), len(want))
	}
	for name, w := range want {
		g, ok := got[name]
		if !ok {
			t.Errorf("%s: no toleranced limit %q", what, name)
			continue
		}
		for side := range 2 {
			switch {
			case (g[side] == nil) != (w[side] == nil):
				t.Errorf("%s %q side %d = %v, want %v", what, name, side, g[side], w[side])
			case g[side] != nil && *g[side] != *w[side]:
				t.Errorf("%s %q side %d = %g V, want %g (SI, exact)", what, name, side, *g[side], *w[side])
			}
		}
	}
}

func TestVariantLookup(t *testing.T) {
	set := loadVariants(t)
	h := variantOf(t, set, "grade-H")
	for _, name := range []string{"grade-H", "GRADE-h", " grade-H "} {
		if v, err := set.Variant(name); err != nil || v != h {
			t.Errorf("Variant(%q) = %v, %v; want grade-H (names ignore case and surrounding space)", name, v, err)
		}
	}
	if v, err := set.Variant(""); err != nil || v != set {
		t.Errorf("Variant(\"\") = %v, %v; want the base set itself", v, err)
	}
	if v, err := h.Variant(""); err != nil || v != set {
		t.Errorf("grade-H.Variant(\"\") = %v, %v; want the base set", v, err)
	}
	if v, err := h.Variant("grade-S"); err != nil || v.VariantName != "grade-S" {
		t.Errorf("grade-H.Variant(grade-S) = %v, %v", v, err)
	}
	_, err := set.Variant("grade-X")
	if err == nil || !strings.Contains(err.Error(), `no variant "grade-X" (known: "grade-H", "grade-S")`) {
		t.Errorf("Variant(grade-X) error %v, want it to name the known variants", err)
	}
	good, err := limits.Load("g.yaml", mustRead(t, goodPath), catalog)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := good.Variant("grade-H"); err == nil || !strings.Contains(err.Error(), "defines no variants") {
		t.Errorf("Variant on a file without variants: %v", err)
	}
	if v, err := good.Variant(""); err != nil || v != good {
		t.Errorf("Variant(\"\") on a file without variants = %v, %v", v, err)
	}

	for _, tc := range []struct{ revision, want string }{
		{"C", "grade-H"}, {"D", "grade-H"}, {"d", "grade-H"}, {" C ", "grade-H"},
		{"B", "grade-S"}, {"A", ""}, {"", ""}, {"CD", ""},
	} {
		if got := set.VariantFor(tc.revision); got.VariantName != tc.want {
			t.Errorf("VariantFor(%q) = variant %q, want %q (variants.yaml lines 50, 71)", tc.revision, got.VariantName, tc.want)
		}
		if got := h.VariantFor(tc.revision); got.VariantName != tc.want {
			t.Errorf("grade-H.VariantFor(%q) = variant %q, want %q", tc.revision, got.VariantName, tc.want)
		}
	}
	if got := set.VariantFor("A"); got != set {
		t.Error("VariantFor of an unlisted revision is not the base set itself")
	}
	if got := good.VariantFor("C"); got != good {
		t.Error("VariantFor on a file without variants is not the set itself")
	}
}

// Hand-made units, SI: offset and gain with U at k = 2, everything else in range.
func variantUnit(offset, uOffset, gain, uGain float64) map[string]limits.Value {
	u := func(x, U float64) limits.Value { return limits.Value{V: x, Valid: true, U: U, K: 2, Std: U / 2} }
	v := func(x float64) limits.Value { return limits.Value{V: x, Valid: true} }
	return map[string]limits.Value{
		"post_offset": u(offset, uOffset), "post_gain_error": u(gain, uGain), "post_noise": u(30e-6, 2e-6),
		"offset_code": v(512), "gain_code": v(2048), "pre_nonlinearity": v(0.001),
	}
}

func TestVariantJudge(t *testing.T) {
	set := loadVariants(t)
	h, s := variantOf(t, set, "grade-H"), variantOf(t, set, "grade-S")
	tests := []struct {
		what                 string
		unit                 map[string]limits.Value
		base, gradeH, gradeS string
		why                  string
	}{
		{"offset 600 µV", variantUnit(600e-6, 20e-6, 100e-6, 10e-6), "pass", "fail", "pass",
			"inside ±780 µV (guarded, w = 20 µV), beyond 400 + 20 µV: grade-H tightens the offset"},
		{"offset 790 µV", variantUnit(790e-6, 20e-6, 100e-6, 10e-6), "review", "fail", "pass",
			"base: between the acceptance limit 780 and the tolerance 800 µV, conditional pass → review; grade-S: simple rule, 0.79 ≤ 0.8 mV"},
		{"gain 495 ppm", variantUnit(0, 20e-6, 495e-6, 10e-6), "review", "fail", "fail",
			"base: conditional pass → review; grade-S: binary statements fail a conditional pass; grade-H: beyond 200 + 10 ppm"},
		{"gain 195 ppm", variantUnit(0, 20e-6, 195e-6, 10e-6), "pass", "fail", "pass",
			"grade-H: inside ±200 but beyond the acceptance limit 190 ppm: conditional pass, and its conditional_pass is fail"},
	}
	for _, tc := range tests {
		for _, c := range []struct {
			set  *limits.Set
			want string
		}{{set, tc.base}, {h, tc.gradeH}, {s, tc.gradeS}} {
			outs := c.set.Judge(tc.unit)
			if got := c.set.Overall(outs); got != c.want {
				t.Errorf("%s under %q: %s, want %s (%s)", tc.what, c.set.VariantName, got, c.want, tc.why)
				for _, o := range outs {
					if !o.Pass {
						t.Logf("  %s: %s", o.Name, o.Reason)
					}
				}
			}
			if got := c.set.Verdicts(tc.unit, nil); got != c.want {
				t.Errorf("%s under %q: Verdicts %s, want %s", tc.what, c.set.VariantName, got, c.want)
			}
		}
	}
	// The outcome of the tightened limit carries the variant's tolerance.
	outs := h.Judge(variantUnit(600e-6, 20e-6, 100e-6, 10e-6))
	if d := outs[0].Decision; d == nil || *d.Upper != 400 || d.Zone != limits.ZoneFail || outs[0].Expr != "within(post_offset, -400, 400)" {
		t.Errorf("grade-H offset outcome %+v, want tolerance upper 400 µV, zone fail", outs[0])
	}
	if len(outs) != 4 || outs[3].Name != "untrimmed nonlinearity plausible" || !outs[3].Pass {
		t.Errorf("grade-H outcomes %+v, want 4 with the added limit passing last", outs)
	}
}

func TestVariantDiff(t *testing.T) {
	set := loadVariants(t)
	h := variantOf(t, set, "grade-H")
	type row struct{ limit, kind string }
	var got []row
	for _, c := range limits.Diff(set, h) {
		got = append(got, row{c.Limit, c.Kind})
	}
	want := []row{ // hand-derived from variants.yaml: the grade-H entry against the limits list
		{"", limits.ChangeRule}, // conditional_pass, min_tur
		{"offset after trim", limits.ChangeTightened},
		{"gain after trim", limits.ChangeTightened},
		{"output noise", limits.ChangeShape}, // toleranced → expression
		{"untrimmed nonlinearity plausible", limits.ChangeAdded},
		{"trim headroom", limits.ChangeRemoved},
	}
	if !reflect.DeepEqual(got, want) {
		t.Errorf("Diff(base, grade-H) = %v, want %v", got, want)
	}
	if cs := limits.Diff(h, h); len(cs) != 0 {
		t.Errorf("Diff of a variant with itself = %v, want none", cs)
	}
	// The what-if report (reports/whatif) labels its two sets with Label.
	rep := struct{ Old, New string }{set.Label(), h.Label()}
	if !strings.Contains(rep.New, "variant grade-H") || strings.Contains(rep.Old, "variant grade") {
		t.Errorf("WhatIf labels %q → %q, want the new one to name the variant", rep.Old, rep.New)
	}
}

// variantBase is lines 1-16 of every hand-made file below: two limits (entries at
// lines 6 and 11), then "variants:" on line 16, so the first variant's "- name:"
// is line 17.
const variantBase = header + "limits:\n" +
	"  - name: offset\n    description: d\n    unit: uV\n    uses: [post_offset]\n    tolerance: {lower: -50, upper: 50}\n" +
	"  - name: codes\n    description: c\n    unit: code\n    uses: [offset_code]\n    expr: offset_code <= 4000\n" +
	"variants:\n"

// v1 is lines 17-18: the first variant's name and description.
const v1 = "  - name: v1\n    description: first\n"

// Positions are hand-counted: "      - name: " is 14 characters, so an override's
// name starts at column 15; "        key: " is 13, so an override's value starts at
// column 14 and its key at column 9.
func TestVariantLoadErrors(t *testing.T) {
	tests := []struct {
		name, body, want, msg string
	}{
		{"override of an unknown limit", v1 + "    overrides:\n      - name: ofset\n        tolerance: {upper: 10}\n",
			"f.yaml:20:15: ", `override of unknown limit "ofset" in variant "v1": an override changes a limit of the limits list ("offset", "codes")`},
		{"duplicate variant name", v1 + "  - name: V1\n    description: second\n",
			"f.yaml:19:11: ", `duplicate variant name "V1" (also the name of the variant at line 17)`},
		{"remove of an unknown limit", v1 + "    remove: [offset, cods]\n",
			"f.yaml:19:22: ", `remove of unknown limit "cods" in variant "v1"`},
		{"override uses a result of another unit", v1 + "    overrides:\n      - name: offset\n        uses: [post_gain_error]\n",
			"f.yaml:21:16: ", `unit "uV" is a voltage (V), but result "post_gain_error" (uses item 1) is a ratio (ppm or %)`},
		{"override unit does not fit the result", v1 + "    overrides:\n      - name: offset\n        unit: ppm\n        tolerance: {upper: 5}\n",
			"f.yaml:21:15: ", `unit "ppm" is a ratio (ppm or %), but result "post_offset" (uses item 1) is a voltage (V)`},
		{"unknown decision key", v1 + "    decision:\n      min_tru: 3\n",
			"f.yaml:20:7: ", `unknown field "min_tru"`},
		{"bad decision value", v1 + "    decision:\n      rule: gaurded\n",
			"f.yaml:20:13: ", `unknown rule "gaurded": expected simple or guarded`},
		{"bad decision min_tur", v1 + "    decision:\n      min_tur: 0\n",
			"f.yaml:20:16: ", "min_tur 0 must be above 0"},
		{"decision with no value", v1 + "    decision:\n",
			"f.yaml:19:5: ", `"decision" has no value`},
		{"unknown key in an override", v1 + "    overrides:\n      - name: offset\n        tolerence: {upper: 10}\n",
			"f.yaml:21:9: ", `unknown field "tolerence"`},
		{"unknown key in a variant", v1 + "    revision: [C]\n",
			"f.yaml:19:5: ", `unknown field "revision"`},
		{"revision in two variants", v1 + "    revisions: [C, D]\n  - name: v2\n    description: second\n    revisions: [E, c]\n",
			"f.yaml:22:20: ", `revision "c" is already listed by variant "v1" (line 17)`},
		{"overridden and removed", v1 + "    overrides:\n      - name: offset\n        tolerance: {upper: 10}\n    remove: [offset]\n",
			"f.yaml:22:14: ", `limit "offset" is both overridden (line 20) and removed in variant "v1"`},
		{"overridden twice", v1 + "    overrides:\n      - name: offset\n        tolerance: {upper: 10}\n      - name: OFFSET\n        rule: simple\n",
			"f.yaml:22:15: ", `limit "OFFSET" is overridden twice in variant "v1" (also at line 20)`},
		{"override that changes nothing", v1 + "    overrides:\n      - name: offset\n",
			"f.yaml:20:7: ", `override of "offset" in variant "v1" changes nothing`},
		{"override of the unit alone", v1 + "    overrides:\n      - name: offset\n        unit: mV\n",
			"f.yaml:21:9: ", `changes the unit but not the numbers: give the expr or tolerance again`},
		{"bad tolerance in an override", v1 + "    overrides:\n      - name: offset\n        tolerance: {lower: 5, upper: -5}\n",
			"f.yaml:21:28: ", "tolerance lower 5 must be below upper -5"},
		{"expression in an override", v1 + "    overrides:\n      - name: codes\n        expr: ofset_code <= 4000\n",
			"f.yaml:21:15: ", `expression uses unknown name "ofset_code"`},
		{"rule on an override's expression", v1 + "    overrides:\n      - name: offset\n        expr: post_offset <= 5\n        rule: simple\n",
			"f.yaml:22:9: ", `"rule" applies only to a toleranced limit`},
		{"override uses leave the base expression behind", v1 + "    overrides:\n      - name: codes\n        uses: [gain_code]\n",
			"f.yaml:15:11: ", `expression uses result "offset_code", which is not listed in uses (in variant "v1")`},
		{"variant rule against an overridden guard factor", v1 + "    overrides:\n      - name: offset\n        guard_factor: 2\n    decision:\n      rule: simple\n",
			"f.yaml:21:9: ", "guard_factor applies to rule: guarded only"},
		{"added limit with a base name", v1 + "    add:\n      - name: Offset\n        description: again\n        unit: uV\n        uses: [post_offset]\n        expr: post_offset <= 5\n",
			"f.yaml:20:15: ", `duplicate limit name "Offset" in variant "v1" (also the name of the limit at line 6)`},
		{"added limit with a problem", v1 + "    add:\n      - name: noise\n        description: n\n        unit: uV\n        uses: [post_nosie]\n        expr: post_nosie <= 5\n",
			"f.yaml:23:16: ", `unknown result name "post_nosie"`},
		{"every limit removed", v1 + "    remove: [offset, codes]\n",
			"f.yaml:17:3: ", `variant "v1" has no limits left`},
		{"variant without a description", "  - name: v1\n    revisions: [C]\n",
			"f.yaml:17:3: ", `missing required key "description"`},
		{"variant with an empty name", "  - name: \"\"\n    description: first\n",
			"f.yaml:17:11: ", `"name" is empty`},
		{"empty variant entry", "  -\n",
			"f.yaml:17:3: ", "empty variant entry"},
		{"override without a name", v1 + "    overrides:\n      - tolerance: {upper: 10}\n",
			"f.yaml:20:7: ", `missing required key "name": an override names the base limit it changes`},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			set, err := limits.Load("f.yaml", []byte(variantBase+tc.body), catalog)
			if err == nil {
				t.Fatalf("loaded %+v, want an error", set)
			}
			if set != nil {
				t.Error("a Set came back with the error")
			}
			errs := files.Errs(err)
			if len(errs) != 1 {
				t.Errorf("%d errors, want 1:%s", len(errs), detail(err))
			}
			if got := errs[0].Error(); !strings.HasPrefix(got, tc.want) || !strings.Contains(got, tc.msg) {
				t.Errorf("error\n  %s\nwant prefix %q containing %q (hand-counted)\n%s", got, tc.want, tc.msg, errs[0].Detail())
			}
		})
	}
}

// Problems in several variants come back together, sorted by line, and a problem
// of the base list is reported once, not again for each variant that compiles the
// limit anew.
func TestVariantLoadErrorsAllAtOnce(t *testing.T) {
	src := header + "limits:\n" +
		"  - name: offset\n    description: \"\"\n    unit: uV\n    uses: [post_offset]\n    tolerance: {lower: -50, upper: 50}\n" + // 6-10, empty description on 7
		"variants:\n" + // 11
		"  - name: v1\n    description: first\n    overrides:\n      - name: offset\n        tolerance: {upper: 10}\n" + // 12-16
		"    decision:\n      statements: binary\n" + // 17-18
		"  - name: v2\n    description: second\n    remove: [ofset]\n" // 19-21
	_, err := limits.Load("f.yaml", []byte(src), catalog)
	want := []string{ // hand-counted
		`f.yaml:7:18: "description" is empty`,
		`f.yaml:21:14: remove of unknown limit "ofset" in variant "v2"`,
	}
	errs := files.Errs(err)
	if len(errs) != len(want) {
		t.Fatalf("%d errors, want %d:%s", len(errs), len(want), detail(err))
	}
	for i, w := range want {
		if !strings.HasPrefix(errs[i].Error(), w) {
			t.Errorf("error %d = %q, want prefix %q", i, errs[i].Error(), w)
		}
	}
}

func TestVariantLint(t *testing.T) {
	// variants.yaml: grade-H's ±400 µV offset (line 53, the "{" at column 20) is
	// tighter than a 150 µV uncertainty verifies at 3:1; the base's ±800 µV and
	// grade-S's ±0.8 mV reach 4:1.
	opt := limits.LintOptions{TUR: map[string]limits.Value{"post_offset": {U: 150e-6, K: 2}}}
	got := limits.Lint("v.yaml", mustRead(t, variantsPath), catalog, opt)
	if len(got) != 1 {
		t.Fatalf("%d findings, want 1: %v", len(got), got)
	}
	g := got[0]
	if g.Line != 53 || g.Col != 20 || g.Code != limits.CodeTURLow || !strings.HasPrefix(g.Msg, `variant "grade-H": limit "offset after trim": tolerance −400 … 400 µV`) {
		t.Errorf("finding %s [%s], want v.yaml:53:20 tur-low naming grade-H", g.Error(), g.Code)
	}

	// Hand-made: the base limit's weak description is reported once, for the base;
	// a variant's added limit that contradicts its override of the base limit
	// (named at the override's line 12), and an override that can never pass, are
	// reported for the variant, at the variant's lines.
	src := lintHeader + `
  - name: offset
    description: d
    unit: uV
    uses: [post_offset]
    tolerance: {lower: -800, upper: 800}
variants:
  - name: grade-X
    description: Experimental grade.
    overrides:
      - name: offset
        tolerance: {lower: -400, upper: 400}
    add:
      - name: offset high
        description: The offset stays high for the special customer.
        unit: uV
        uses: [post_offset]
        tolerance: {lower: 500}
  - name: grade-Y
    description: Impossible grade.
    overrides:
      - name: offset
        tolerance: {lower: 6, upper: 7}
        unit: V
`[1:]
	want := []wantFinding{
		{4, 18, "warning", limits.CodeDescription, `limit "offset": description "d"`},
		{15, 7, "error", limits.CodeContradictory, `variant "grade-X": limits "offset" (line 12, −400 … 400 µV) and "offset high" (line 15, ≥ 500 µV) on post_offset contradict`},
		{24, 28, "error", limits.CodeNeverPasses, `variant "grade-Y": limit "offset" can never pass: its lower tolerance 6 V`},
	}
	got = limits.Lint("t.yaml", []byte(src), catalog, limits.LintOptions{Ranges: lintRanges})
	if len(got) != len(want) {
		t.Fatalf("%d findings, want %d:\n%v", len(got), len(want), got)
	}
	for i, w := range want {
		g := got[i]
		if g.Line != w.line || g.Col != w.col || g.Severity != w.severity || g.Code != w.code || !strings.Contains(g.Msg, w.msg) {
			t.Errorf("finding %d = %s [%s]\nwant t.yaml:%d:%d: %s [%s] containing %q (hand-counted)", i, g.Error(), g.Code, w.line, w.col, w.severity, w.code, w.msg)
		}
	}
}

// Problems that a variant causes in a base entry it does not override point at the
// base entry and name the variant; a variant naming a base entry that did not
// decode adds nothing to that entry's own error.
func TestVariantLoadErrorsInBaseEntries(t *testing.T) {
	tests := []struct {
		name, src string
		want      []string // hand-counted
	}{
		{"variant rule against a base guard factor", header + "decision:\n  rule: guarded\nlimits:\n" + // 5-7
			"  - name: offset\n    description: d\n    unit: uV\n    uses: [post_offset]\n    tolerance: {upper: 50}\n    guard_factor: 2\n" + // 8-13
			"variants:\n  - name: v1\n    description: first\n    decision:\n      rule: simple\n", // 14-18
			[]string{`f.yaml:13:5: guard_factor applies to rule: guarded only, and this limit's rule is simple (w = 0) (in variant "v1")`}},
		{"variants after the limits they change", "variants:\n  - name: v1\n    description: first\n    overrides:\n      - name: codes\n        uses: [gain_code]\n" + // 1-6
			header + "limits:\n" + // 7-11
			"  - name: codes\n    description: c\n    unit: code\n    uses: [offset_code]\n    expr: offset_code <= 4000\n", // 12-16
			[]string{`f.yaml:16:11: expression uses result "offset_code", which is not listed in uses (in variant "v1")`}},
		{"base entry that did not decode", header + "limits:\n" +
			"  - name: offset\n    description: d\n    unit: uV\n    uses: [post_offset]\n    tolerance: {upper: 50}\n    colour: red\n" + // 6-11
			"  - name: codes\n    description: c\n    unit: code\n    uses: [offset_code]\n    expr: offset_code <= 4000\n" + // 12-16
			"variants:\n  - name: v1\n    description: first\n    overrides:\n      - name: offset\n        tolerance: {upper: 10}\n" + // 17-22
			"  - name: v2\n    description: second\n    remove: [offset]\n", // 23-25
			[]string{`f.yaml:11:5: unknown field "colour"`}},
		{"empty variants list", variantBase[:len(variantBase)-len("variants:\n")] + "variants: []\n",
			[]string{`f.yaml:16:1: "variants" is empty: give at least one variant (name, description and what differs), or remove it`}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, err := limits.Load("f.yaml", []byte(tc.src), catalog)
			errs := files.Errs(err)
			if len(errs) != len(tc.want) {
				t.Fatalf("%d errors, want %d:%s", len(errs), len(tc.want), detail(err))
			}
			for i, w := range tc.want {
				if got := errs[i].Error(); got != w {
					t.Errorf("error %d\n  %s\nwant\n  %s", i, got, w)
				}
			}
		})
	}
}
