package limits_test

import (
	"encoding/json"
	"errors"
	"math"
	"os"
	"reflect"
	"strconv"
	"strings"
	"sync"
	"testing"

	"trimline/instruments/files"
	"trimline/instruments/units"
	"trimline/limits"
)

// catalog is the engine's result catalog (the same names and dimensions as the
// sequencer's), written out here so this package's tests stand alone.
var catalog = limits.Catalog{
	"pre_offset": units.Volt, "pre_gain_error": units.Ratio, "pre_nonlinearity": units.Ratio,
	"offset_code": units.Count, "gain_code": units.Count,
	"post_offset": units.Volt, "post_gain_error": units.Ratio, "post_nonlinearity": units.Ratio,
	"post_max_error": units.Volt, "post_noise": units.Volt,
}

const goodPath = "../testdata/limits/good.yaml"

func loadGood(t testing.TB) *limits.Set {
	t.Helper()
	set, err := limits.LoadFile(goodPath, catalog)
	if err != nil {
		t.Fatalf("LoadFile(%s): %v", goodPath, detail(err))
	}
	return set
}

func detail(err error) string {
	var b strings.Builder
	for _, e := range files.Errs(err) {
		b.WriteString("\n" + e.Detail())
	}
	if b.Len() == 0 {
		return err.Error()
	}
	return b.String()
}

// goodResults is a unit that passes every limit of good.yaml, in SI units.
func goodResults() map[string]limits.Value {
	v := func(x float64) limits.Value { return limits.Value{V: x, Valid: true} }
	return map[string]limits.Value{
		"pre_offset": v(3.1e-3), "pre_gain_error": v(0.013), "pre_nonlinearity": v(0.001),
		"offset_code": v(512), "gain_code": v(2048),
		"post_offset": v(1.23e-5), "post_gain_error": v(42e-6), "post_nonlinearity": v(5e-5),
		"post_max_error": v(1.2e-4), "post_noise": v(8e-6),
	}
}

func TestLoadGood(t *testing.T) {
	set := loadGood(t)
	data, err := os.ReadFile(goodPath)
	if err != nil {
		t.Fatal(err)
	}
	tests := []struct {
		what, got, want, source string
	}{
		{"Name", set.Name, "BA-200 end-of-line limits", "good.yaml line 4"},
		{"Revision", set.Revision, "C", "good.yaml line 5"},
		{"Product", set.Product, "BA-200", "good.yaml line 6"},
		{"File", set.File, goodPath, "the name given to LoadFile"},
		{"SHA256 length", strconv.Itoa(len(set.SHA256)), "64", "SHA-256 is 32 bytes, 64 hex digits"},
		{"SHA256 lower-case", strings.ToLower(set.SHA256), set.SHA256, "contract: lowercase hex"},
	}
	for _, tc := range tests {
		if tc.got != tc.want {
			t.Errorf("%s = %q, want %q (%s)", tc.what, tc.got, tc.want, tc.source)
		}
	}
	again, err := limits.Load("copy", data, catalog)
	if err != nil || again.SHA256 != set.SHA256 {
		t.Errorf("same bytes gave SHA256 %v (err %v), want %s", again, err, set.SHA256)
	}

	// Expected limits, hand-copied from good.yaml.
	want := []struct {
		name, unit, expr string
		uses             []string
		line             int
	}{
		{"post-trim offset", "uV", "abs(post_offset) <= 60", []string{"post_offset"}, 8},
		{"gain error after trim", "ppm", "within(post_gain_error, -150, 150)", []string{"post_gain_error"}, 13},
		{"nonlinearity after trim", "%", "post_nonlinearity <= 0.01", []string{"post_nonlinearity"}, 18},
		{"maximum error after trim", "mV", "post_max_error <= 0.25", []string{"post_max_error"}, 23},
		{"output noise", "uV", "post_noise < 20", []string{"post_noise"}, 28},
		{"offset trim code margin", "code", "within(offset_code, 16, 1007)", []string{"offset_code"}, 33},
		{"gain trim code margin", "code", "within(gain_code, 16, 4079)", []string{"gain_code"}, 38},
		{"untrimmed part plausible", "%", "abs(pre_gain_error) <= 2 &&\n  pre_nonlinearity <= 0.5",
			[]string{"pre_gain_error", "pre_nonlinearity"}, 43},
	}
	if len(set.Limits) != len(want) {
		t.Fatalf("%d limits, want %d (good.yaml)", len(set.Limits), len(want))
	}
	for i, w := range want {
		l := set.Limits[i]
		if l.Name != w.name || l.Unit != w.unit || l.Expr != w.expr || !reflect.DeepEqual(l.Uses, w.uses) || l.Line != w.line {
			t.Errorf("limit %d = {%q %q %q %v line %d}, want {%q %q %q %v line %d} (good.yaml)",
				i, l.Name, l.Unit, l.Expr, l.Uses, l.Line, w.name, w.unit, w.expr, w.uses, w.line)
		}
		if l.Description == "" {
			t.Errorf("limit %d has no description", i)
		}
	}
	if d := set.Limits[7].Description; !strings.HasPrefix(d, "Before trim the gain error") || strings.Contains(d, "\n") {
		t.Errorf("folded description = %q, want one line starting \"Before trim the gain error\"", d)
	}
}

func TestJudgeGood(t *testing.T) {
	set := loadGood(t)
	outs := set.Judge(goodResults())
	if len(outs) != len(set.Limits) {
		t.Fatalf("%d outcomes for %d limits", len(outs), len(set.Limits))
	}
	for i, o := range outs {
		if !o.Pass || o.Reason != "" {
			t.Errorf("outcome %d (%s): pass %v reason %q, want pass", i, o.Name, o.Pass, o.Reason)
		}
		if o.Name != set.Limits[i].Name {
			t.Errorf("outcome %d is %q, want file order (%q)", i, o.Name, set.Limits[i].Name)
		}
	}
	if !limits.Passed(outs) {
		t.Error("Passed = false for all-pass outcomes")
	}

	// Each result in its limit's unit; hand-worked from goodResults.
	values := []struct {
		limit, result string
		want          float64
		source        string
	}{
		{"post-trim offset", "post_offset", 12.3, "hand-worked: 1.23e-5 V / 1e-6 V per uV"},
		{"gain error after trim", "post_gain_error", 42, "hand-worked: 42e-6 / 1e-6 per ppm"},
		{"nonlinearity after trim", "post_nonlinearity", 0.005, "hand-worked: 5e-5 / 1e-2 per %"},
		{"maximum error after trim", "post_max_error", 0.12, "hand-worked: 1.2e-4 V / 1e-3 V per mV"},
		{"output noise", "post_noise", 8, "hand-worked: 8e-6 V / 1e-6 V per uV"},
		{"offset trim code margin", "offset_code", 512, "hand-worked: codes are not scaled"},
		{"untrimmed part plausible", "pre_gain_error", 1.3, "hand-worked: 0.013 / 1e-2 per %"},
		{"untrimmed part plausible", "pre_nonlinearity", 0.1, "hand-worked: 0.001 / 1e-2 per %"},
	}
	for _, tc := range values {
		o := find(t, outs, tc.limit)
		got, ok := o.Values[tc.result]
		if !ok || got != tc.want {
			t.Errorf("%s: Values[%s] = %v (present %v), want %v (%s)", tc.limit, tc.result, got, ok, tc.want, tc.source)
		}
	}
}

func find(t *testing.T, outs []limits.Outcome, name string) limits.Outcome {
	t.Helper()
	for _, o := range outs {
		if o.Name == name {
			return o
		}
	}
	t.Fatalf("no outcome %q", name)
	return limits.Outcome{}
}

func TestJudgeFail(t *testing.T) {
	set := loadGood(t)
	tests := []struct {
		name   string
		result string
		v      float64
		limit  string
		reason string
		source string
	}{
		{"offset too large", "post_offset", 71.3e-6, "post-trim offset",
			"abs(post_offset) <= 60 is false with post_offset = 71.3 uV", "hand-worked: 71.3 uV > 60 uV"},
		{"negative offset too large", "post_offset", -60.5e-6, "post-trim offset",
			"abs(post_offset) <= 60 is false with post_offset = -60.5 uV", "hand-worked: |-60.5| > 60"},
		{"gain error below window", "post_gain_error", -151e-6, "gain error after trim",
			"within(post_gain_error, -150, 150) is false with post_gain_error = -151 ppm", "hand-worked: -151 < -150"},
		{"noise at the limit fails a strict <", "post_noise", 20e-6, "output noise",
			"post_noise < 20 is false with post_noise = 20 uV", "hand-worked: 20 < 20 is false"},
		{"just past the limit", "post_offset", 60.000001e-6, "post-trim offset",
			"abs(post_offset) <= 60 is false with post_offset = 60.000001 uV", "hand-worked: 60.000001 > 60"},
		{"code in the top margin", "offset_code", 1008, "offset trim code margin",
			"within(offset_code, 16, 1007) is false with offset_code = 1008 code", "hand-worked: 1008 > 1007"},
		{"two-result limit quotes both", "pre_gain_error", 0.025, "untrimmed part plausible",
			"abs(pre_gain_error) <= 2 && pre_nonlinearity <= 0.5 is false with pre_gain_error = 2.5 %, pre_nonlinearity = 0.1 %",
			"hand-worked: 2.5 % > 2 %"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			r := goodResults()
			r[tc.result] = limits.Value{V: tc.v, Valid: true}
			outs := set.Judge(r)
			if limits.Passed(outs) {
				t.Fatal("Passed = true")
			}
			for _, o := range outs {
				if o.Name == tc.limit {
					if o.Pass || o.Reason != tc.reason {
						t.Errorf("pass %v reason %q, want fail with %q (%s)", o.Pass, o.Reason, tc.reason, tc.source)
					}
				} else if !o.Pass {
					t.Errorf("%s failed too: %s", o.Name, o.Reason)
				}
			}
		})
	}
}

func TestPassed(t *testing.T) {
	tests := []struct {
		outs   []limits.Outcome
		want   bool
		source string
	}{
		{nil, false, "contract: nothing judged is not a pass"},
		{[]limits.Outcome{{Pass: true}}, true, "hand-worked"},
		{[]limits.Outcome{{Pass: true}, {Pass: false}}, false, "hand-worked"},
	}
	for i, tc := range tests {
		if got := limits.Passed(tc.outs); got != tc.want {
			t.Errorf("case %d: Passed = %v, want %v (%s)", i, got, tc.want, tc.source)
		}
	}
}

// The trap: expr-lang compares NaN as false, so a negated comparison would pass a
// NaN. No result that is not a finite, valid number may ever pass.
func TestJudgeNeverPassesBadNumbers(t *testing.T) {
	src := header + `limits:
  - name: plain
    description: d
    unit: uV
    uses: [post_offset]
    expr: post_offset <= 60
  - name: bang
    description: d
    unit: uV
    uses: [post_offset]
    expr: '!(post_offset > 60)'
  - name: not
    description: d
    unit: uV
    uses: [post_offset]
    expr: not (post_offset > 60)
  - name: outside
    description: d
    unit: uV
    uses: [post_offset]
    expr: not outside(post_offset, -60, 60)
`
	set, err := limits.Load("trap.yaml", []byte(src), catalog)
	if err != nil {
		t.Fatal(detail(err))
	}
	const prefix = "result post_offset is not a valid number: "
	tests := []struct {
		name   string
		v      *limits.Value // nil: missing from the map
		why    string
		source string
	}{
		{"NaN", &limits.Value{V: math.NaN(), Valid: true}, "it is NaN", "contract"},
		{"+Inf", &limits.Value{V: math.Inf(1), Valid: true}, "it is +Inf", "contract"},
		{"-Inf", &limits.Value{V: math.Inf(-1), Valid: true}, "it is -Inf", "contract"},
		{"invalid with a reason", &limits.Value{V: 1e-6, Valid: false, Why: "meter overload on 2 of 10 readings"},
			"meter overload on 2 of 10 readings", "contract: Why is quoted"},
		{"invalid without a reason", &limits.Value{V: 1e-6}, "flagged invalid", "contract"},
		{"missing", nil, "no such result was produced", "contract"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			r := map[string]limits.Value{}
			if tc.v != nil {
				r["post_offset"] = *tc.v
			}
			outs := set.Judge(r)
			for _, o := range outs {
				if o.Pass {
					t.Errorf("%s (%s) passed", o.Name, o.Expr)
				}
				if want := prefix + tc.why; o.Reason != want {
					t.Errorf("%s: reason %q, want %q (%s)", o.Name, o.Reason, want, tc.source)
				}
				if len(o.Values) != 0 {
					t.Errorf("%s: Values = %v, want none for a bad number", o.Name, o.Values)
				}
				if _, err := json.Marshal(o); err != nil {
					t.Errorf("%s: outcome does not encode: %v", o.Name, err)
				}
			}
			if limits.Passed(outs) {
				t.Error("Passed = true")
			}
		})
	}
	// And the same set passes a good number, so the failures above are the guard's.
	outs := set.Judge(map[string]limits.Value{"post_offset": {V: 10e-6, Valid: true}})
	if !limits.Passed(outs) {
		t.Errorf("10 uV failed: %+v", outs)
	}
}

func TestJudgeOverflowInUnit(t *testing.T) {
	src := header + `limits:
  - name: tiny unit
    description: d
    unit: pV
    uses: [post_offset]
    expr: not (post_offset > 1)
`
	set, err := limits.Load("pv.yaml", []byte(src), catalog)
	if err != nil {
		t.Fatal(detail(err))
	}
	// 1e300 V is finite, but 1e300 / 1e-12 overflows to +Inf (hand-worked).
	o := set.Judge(map[string]limits.Value{"post_offset": {V: 1e300, Valid: true}})[0]
	if o.Pass || !strings.HasPrefix(o.Reason, "result post_offset is not a valid number: ") {
		t.Errorf("pass %v reason %q, want a not-a-valid-number failure", o.Pass, o.Reason)
	}
}

func TestJudgeRuntimeError(t *testing.T) {
	src := header + `limits:
  - name: uses a failing function
    description: d
    unit: uV
    uses: [post_offset]
    expr: test_fails(post_offset)
`
	set, err := limits.Load("rt.yaml", []byte(src), catalog)
	if err != nil {
		t.Fatal(detail(err))
	}
	o := set.Judge(map[string]limits.Value{"post_offset": {V: 1e-6, Valid: true}})[0]
	want := "test_fails(post_offset) could not be evaluated: test_fails: instrument said no"
	if o.Pass || o.Reason != want {
		t.Errorf("pass %v reason %q, want fail with %q (contract)", o.Pass, o.Reason, want)
	}
}

func init() {
	limits.RegisterFunc("test_fails", func(p ...any) (any, error) {
		return nil, errors.New("test_fails: instrument said no")
	}, new(func(float64) bool))
}

func TestRegisterFuncPanics(t *testing.T) {
	ok := func(p ...any) (any, error) { return true, nil }
	tests := []struct {
		name, fn string
		f        func(...any) (any, error)
		source   string
	}{
		{"duplicate of a built-in extra", "within", ok, "contract: duplicate"},
		{"duplicate of a test function", "test_fails", ok, "contract: duplicate"},
		{"nil func", "fresh_name", nil, "contract: nil"},
		{"expr-lang built-in", "abs", ok, "contract: part of the language"},
		{"keyword", "not", ok, "contract: part of the language"},
		{"not an identifier", "bad name", ok, "contract: identifier"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			defer func() {
				if recover() == nil {
					t.Errorf("RegisterFunc(%q) did not panic (%s)", tc.fn, tc.source)
				}
			}()
			limits.RegisterFunc(tc.fn, tc.f)
		})
	}
}

func TestWithinOutside(t *testing.T) {
	src := header + `limits:
  - name: in
    description: d
    unit: code
    uses: [gain_code]
    expr: within(gain_code, 10, 20)
  - name: out
    description: d
    unit: code
    uses: [gain_code]
    expr: outside(gain_code, 10, 20)
`
	set, err := limits.Load("w.yaml", []byte(src), catalog)
	if err != nil {
		t.Fatal(detail(err))
	}
	tests := []struct {
		code    float64
		in, out bool
		source  string
	}{
		{9, false, true, "hand-worked: below lo"},
		{10, true, false, "hand-worked: lo is inside"},
		{15, true, false, "hand-worked"},
		{20, true, false, "hand-worked: hi is inside"},
		{21, false, true, "hand-worked: above hi"},
	}
	for _, tc := range tests {
		outs := set.Judge(map[string]limits.Value{"gain_code": {V: tc.code, Valid: true}})
		if outs[0].Pass != tc.in || outs[1].Pass != tc.out {
			t.Errorf("code %v: within %v outside %v, want %v %v (%s)", tc.code, outs[0].Pass, outs[1].Pass, tc.in, tc.out, tc.source)
		}
	}
}

func TestJudgeConcurrent(t *testing.T) {
	set := loadGood(t)
	r := goodResults()
	r["post_offset"] = limits.Value{V: 71.3e-6, Valid: true}
	want := set.Judge(r)
	var wg sync.WaitGroup
	for g := 0; g < 8; g++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for range 200 {
				if got := set.Judge(r); !reflect.DeepEqual(got, want) {
					t.Errorf("concurrent Judge differs: %+v", got)
					return
				}
			}
		}()
	}
	wg.Wait()
}

func TestOutcomeDoesNotShareSet(t *testing.T) {
	set := loadGood(t)
	o := set.Judge(goodResults())[0]
	o.Uses[0] = "changed"
	if set.Limits[0].Uses[0] != "post_offset" {
		t.Error("changing an Outcome's Uses changed the Set")
	}
}

func TestLoadFileMissing(t *testing.T) {
	_, err := limits.LoadFile("../testdata/limits/no-such-file.yaml", catalog)
	if !errors.Is(err, os.ErrNotExist) {
		t.Errorf("err = %v, want os.ErrNotExist", err)
	}
}

// A value written exactly at a limit, in SI, is exactly at it in the limit's unit.
func TestJudgeAtTheLimit(t *testing.T) {
	set := loadGood(t)
	tests := []struct {
		result, limit string
		v             float64
		source        string
	}{
		{"post_offset", "post-trim offset", 60e-6, "hand-worked: 60 uV <= 60 (60e-6/1e-6 is 60.00000000000001 in float64)"},
		{"post_offset", "post-trim offset", -60e-6, "hand-worked: |-60 uV| <= 60"},
		{"post_gain_error", "gain error after trim", 150e-6, "hand-worked: 150 ppm <= 150"},
		{"post_gain_error", "gain error after trim", -150e-6, "hand-worked: -150 ppm >= -150"},
		{"post_nonlinearity", "nonlinearity after trim", 1e-4, "hand-worked: 0.01 % <= 0.01"},
		{"post_max_error", "maximum error after trim", 0.25e-3, "hand-worked: 0.25 mV <= 0.25"},
	}
	for _, tc := range tests {
		r := goodResults()
		r[tc.result] = limits.Value{V: tc.v, Valid: true}
		o := find(t, set.Judge(r), tc.limit)
		if !o.Pass {
			t.Errorf("%s = %g: %s (%s)", tc.result, tc.v, o.Reason, tc.source)
		}
	}
}
