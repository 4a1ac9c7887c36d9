package limits_test

import (
	"math"
	"os"
	"testing"

	"trimline/limits"
	"trimline/sequencer/files"
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
		// A loaded set judges anything without panicking.
		set.Judge(goodResults())
		set.Judge(nil)
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
