package limits_test

import (
	"math"
	"math/rand/v2"
	"testing"

	"trimline/limits"
	"trimline/limits/limitstest"
)

func loadPair(t testing.TB) (old, new *limits.Set) {
	t.Helper()
	old, err := limits.LoadFile("../sequences/brx200-limits.yaml", catalog)
	if err != nil {
		t.Fatal(detail(err))
	}
	new, err = limits.LoadFile("../testdata/limits/brx200-rev7.yaml", catalog)
	if err != nil {
		t.Fatal(detail(err))
	}
	return old, new
}

// TestVerdictsMatchesJudge: Verdicts gives, limit by limit and overall, the
// verdicts Overall gives for Judge's outcomes, on generated units and on edge cases
// (invalid values, unusable uncertainties, values on the limits) under several
// policies.
func TestVerdictsMatchesJudge(t *testing.T) {
	old, new := loadPair(t)
	refuse := setOf(t, offsetLimit("offset", "uV", "tolerance: {lower: -50, upper: 50}", "rule: guarded", "statements: non-binary")+
		"decision: {tur_policy: refuse, conditional_pass: ship, conditional_fail: review}\n")
	sets := []*limits.Set{old, new, loadTol(t), loadGood(t), refuse}
	r := rand.New(rand.NewPCG(7, 7))
	var cases []map[string]limits.Value
	for range 3000 {
		cases = append(cases, limitstest.Unit(r))
	}
	edge := []limits.Value{
		{V: math.NaN(), Valid: true}, {V: math.Inf(1), Valid: true}, {V: 1e-5}, {V: 1e-5, Valid: true, U: -1},
		{V: 1e-5, Valid: true, U: math.NaN()}, {V: 1e-5, Valid: true, U: math.MaxFloat64, K: 2},
		{V: 50e-6, Valid: true, U: 8e-6, K: 2}, {V: 42e-6, Valid: true, U: 8e-6, K: 2}, {V: -58e-6, Valid: true, U: 8e-6, K: 2},
		{V: 800e-6, Valid: true}, {V: 45e-6, Valid: true, U: 30e-6, K: 2}, {V: 0, Valid: true, U: 30e-6, K: 2},
		{V: 1e308, Valid: true}, {V: 1e-5, Valid: true, Std: 1e-6, DOF: 3},
	}
	for _, e := range edge {
		for _, name := range []string{"post_offset", "post_noise", "gain_code", "offset_code", "post_gain_error"} {
			c := limitstest.Unit(r)
			c[name] = e
			cases = append(cases, c)
		}
	}
	for si, s := range sets {
		vs := make([]string, len(s.Limits))
		for ci, c := range cases {
			outs := s.Judge(c)
			want := s.Overall(outs)
			if got := s.Verdicts(c, vs); got != want {
				t.Fatalf("set %d case %d: Verdicts = %s, Overall(Judge) = %s (contract)", si, ci, got, want)
			}
			for j, o := range outs {
				if w := s.Overall([]limits.Outcome{o}); vs[j] != w {
					t.Fatalf("set %d case %d limit %q: Verdicts %s, Judge %s (%s) (contract)", si, ci, o.Name, vs[j], w, o.Reason)
				}
			}
		}
	}
	if got := new.Verdicts(cases[0], nil); got != new.Overall(new.Judge(cases[0])) {
		t.Errorf("Verdicts with nil verdicts = %s", got)
	}
}
