package limits_test

import (
	"strings"
	"testing"

	"trimline/instruments/units"
	"trimline/limits"
)

// A plain-number result (a lack-of-fit statistic) is judged by a limit with the
// empty unit, unscaled, toleranced or as an expression; a ratio unit on it is
// refused, because χ²/ν of 1.3 is not 130 %.
func TestNumberResult(t *testing.T) {
	cat := limits.Catalog{"pre_lof": units.Number}
	src := header + `limits:
  - name: straight line fits
    description: Lack of fit of the as-found line.
    unit: ""
    uses: [pre_lof]
    tolerance: {upper: 5}
  - name: straight line fits, as an expression
    description: The same, written as an expression.
    unit: ""
    uses: [pre_lof]
    expr: pre_lof <= 5
`
	set, err := limits.Load("lof.yaml", []byte(src), cat)
	if err != nil {
		t.Fatal(detail(err))
	}
	for _, c := range []struct {
		v    float64
		pass bool
	}{{1.3, true}, {5, true}, {5.2, false}} { // hand-worked against upper 5, unscaled
		for _, o := range set.Judge(map[string]limits.Value{"pre_lof": {V: c.v, Valid: true}}) {
			if o.Pass != c.pass {
				t.Errorf("%s with pre_lof = %g: pass %v, want %v (%s)", o.Name, c.v, o.Pass, c.pass, o.Reason)
			}
		}
	}

	bad := strings.Replace(src, `unit: ""`, `unit: "%"`, 1)
	_, err = limits.Load("lof.yaml", []byte(bad), cat)
	if err == nil || !strings.Contains(err.Error(), `but result "pre_lof" (uses item 1) is a plain number (no unit)`) {
		t.Errorf("a %% limit on a plain number: got %v, want it refused", err)
	}
}
