package limits_test

import (
	"encoding/json"
	"math"
	"os"
	"testing"

	"trimline/instruments/files"
	"trimline/limits"
)

// FuzzLoad: Load never panics, and it returns exactly one of a Set and a
// files.List of positioned errors.
func FuzzLoad(f *testing.F) {
	good, err := os.ReadFile(goodPath)
	if err != nil {
		f.Fatal(err)
	}
	f.Add(good)
	f.Add([]byte(header + "limits:\n" + entry("name: offset", "description: d", "unit: uV",
		"uses: [post_offset]", "expr: |", "  abs(post_offset) <= 60 &&", "    post_noise < 5")))
	f.Add([]byte(header + "limits:\n" + entry("name: offset", "description: d", "unit: uX",
		"uses: post_offset", `expr: "within(post_offset, 60, -60)"`)))
	f.Add([]byte("limit_set: {name: a}\nlimits: [{name: x, expr: '!(x > 1)'}]\n"))
	tol, err := os.ReadFile(tolPath)
	if err != nil {
		f.Fatal(err)
	}
	f.Add(tol)
	f.Add([]byte(decisionFile("rule: guarded", "statements: non-binary", "min_tur: 4:1", "coverage: 95 %")))
	f.Add([]byte(header + "limits:\n" + tolEntry("tolerance: {lower: 50, upper: -50}", "rule: simple", "guard_factor: 2")))
	variants, err := os.ReadFile(variantsPath)
	if err != nil {
		f.Fatal(err)
	}
	f.Add(variants)
	f.Add([]byte(variantBase + v1 + "    overrides:\n      - name: codes\n        uses: [gain_code]\n    remove: [offset, codes]\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		set, err := limits.Load("fuzz.yaml", data, catalog)
		if (set == nil) == (err == nil) {
			t.Fatalf("set %v, err %v: want exactly one", set, err)
		}
		if err != nil {
			if _, ok := err.(files.List); !ok {
				t.Fatalf("error is %T, want files.List", err)
			}
			if len(files.Errs(err)) == 0 {
				t.Fatal("empty error list")
			}
			return
		}
		// A loaded set judges anything without panicking, and its outcomes encode.
		for _, r := range []map[string]limits.Value{goodResults(), tolResults(45, 61, 99), nil} {
			outs := set.Judge(r)
			set.Overall(outs)
			if _, err := json.Marshal(outs); err != nil {
				t.Fatalf("outcomes do not encode: %v", err)
			}
		}
		set.PredictTUR(tolResults(0, 0, 0))
		set.Toleranced()
		// Every variant the file names is there, and judges too.
		for _, vi := range set.Variants() {
			v, err := set.Variant(vi.Name)
			if err != nil || v.VariantName != vi.Name {
				t.Fatalf("Variant(%q) = %v, %v", vi.Name, v, err)
			}
			v.Overall(v.Judge(goodResults()))
		}
	})
}

// FuzzJudgeScaling: any finite value either shows up in the limit's unit within
// two float64 roundings of V/scale, or fails as not a valid number; never a NaN.
func FuzzJudgeScaling(f *testing.F) {
	src := header + "limits:\n" +
		entry("name: micro", "description: d", "unit: uV", "uses: [post_offset]", "expr: abs(post_offset) >= 0") +
		entry("name: pico", "description: d", "unit: pV", "uses: [post_offset]", "expr: abs(post_offset) >= 0") +
		entry("name: kilo", "description: d", "unit: kV", "uses: [post_offset]", "expr: abs(post_offset) >= 0")
	set, err := limits.Load("scale.yaml", []byte(src), catalog)
	if err != nil {
		f.Fatal(detail(err))
	}
	scales := []float64{1e-6, 1e-12, 1e3}
	for _, v := range []float64{0, 1.23e-5, -60e-6, 5e-324, 1.7976931348623157e308, 1e300, -2.5e-310} {
		f.Add(v)
	}
	f.Fuzz(func(t *testing.T, v float64) {
		outs := set.Judge(map[string]limits.Value{"post_offset": {V: v, Valid: true}})
		for i, o := range outs {
			want := v / scales[i]
			if math.IsNaN(v) || math.IsInf(want, 0) {
				if o.Pass {
					t.Fatalf("%s: %g passed", o.Name, v)
				}
				continue
			}
			got, ok := o.Values["post_offset"]
			if !ok || !o.Pass {
				t.Fatalf("%s: %g failed: %s", o.Name, v, o.Reason)
			}
			if d := math.Abs(got - want); d > 4e-16*math.Abs(want) && d > 1e-300 {
				t.Fatalf("%s: %g in unit = %g, want %g", o.Name, v, got, want)
			}
		}
	})
}

// FuzzJudgeDecision: any value and uncertainty judge without panicking; a pass has
// a finite value in zone pass; the probability is in [0, 1]; the outcome encodes.
func FuzzJudgeDecision(f *testing.F) {
	set, err := limits.LoadFile(tolPath, catalog)
	if err != nil {
		f.Fatal(detail(err))
	}
	f.Add(45e-6, 8e-6, 2.0, 0.0, 0.0)
	f.Add(60e-6, 0.0, 0.0, 4e-6, 10.0)
	f.Add(1e-300, 1e-300, 1e-300, 1e-300, 1e-300)
	f.Add(0.0, 1e300, 0.5, 0.0, 0.3)
	f.Add(0.0, math.MaxFloat64, 2.0, 0.0, 0.0)
	f.Add(0.0, 1e300, 0.0, 1e-300, 0.0)
	f.Fuzz(func(t *testing.T, v, U, k, std, dof float64) {
		val := limits.Value{V: v, Valid: true, U: U, K: k, Std: std, DOF: dof}
		r := map[string]limits.Value{"post_offset": val, "post_noise": val, "gain_code": val, "offset_code": val}
		outs := set.Judge(r)
		for _, o := range outs {
			if _, err := json.Marshal(o); err != nil {
				t.Fatalf("%s: %v (%+v)", o.Name, err, o.Decision)
			}
			d := o.Decision
			if d == nil {
				continue
			}
			if o.Pass && d.Zone != limits.ZonePass && d.Zone != limits.ZoneConditionalPass {
				t.Fatalf("%s: pass in zone %s", o.Name, d.Zone)
			}
			if !(d.POutside >= 0 && d.POutside <= 1) || d.TUR < 0 {
				t.Fatalf("%s: POutside %v TUR %v", o.Name, d.POutside, d.TUR)
			}
		}
		set.Overall(outs)
	})
}
