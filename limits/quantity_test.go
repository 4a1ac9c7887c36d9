package limits_test

import (
	"strings"
	"testing"

	"trimline/instruments/units"
	"trimline/limits"
)

// Results in amperes and reported counts are judged in mA, uA and count, and a
// unit of another dimension is refused at its line.
func TestCurrentAndCountUnits(t *testing.T) {
	cat := limits.Catalog{"loop_offset": units.Ampere, "loop_noise": units.Ampere, "rd_offset": units.Count}
	const file = `limit_set:
  name: loop limits
  revision: "1"
  product: LT-420
limits:
  - name: loop offset
    description: Loop current at zero input.
    unit: mA
    uses: [loop_offset]
    expr: within(loop_offset, -0.1, 0.1)
  - name: loop noise
    description: Loop noise.
    unit: uA
    uses: [loop_noise]
    expr: loop_noise <= 5
  - name: reported offset
    description: Reported count at zero input.
    unit: count
    uses: [rd_offset]
    expr: within(rd_offset, -10, 10)
`
	set, err := limits.Load("limits.yaml", []byte(file), cat)
	if err != nil {
		t.Fatal(detail(err))
	}
	// Hand-worked: 20e-6 A is 0.02 mA; 1.2e-6 A is 1.2 uA; counts are not scaled.
	outs := set.Judge(map[string]limits.Value{
		"loop_offset": {V: 20e-6, Valid: true}, "loop_noise": {V: 1.2e-6, Valid: true}, "rd_offset": {V: 12, Valid: true},
	})
	for _, c := range []struct {
		limit, result string
		want          float64
		pass          bool
	}{
		{"loop offset", "loop_offset", 0.02, true},
		{"loop noise", "loop_noise", 1.2, true},
		{"reported offset", "rd_offset", 12, false},
	} {
		o := find(t, outs, c.limit)
		if o.Values[c.result] != c.want || o.Pass != c.pass {
			t.Errorf("%s: value %v pass %v, want %v pass %v", c.limit, o.Values[c.result], o.Pass, c.want, c.pass)
		}
	}
	bad := strings.Replace(file, "unit: mA", "unit: mV", 1)
	_, err = limits.Load("limits.yaml", []byte(bad), cat)
	if err == nil || !strings.Contains(err.Error(), "limits.yaml:8:") || !strings.Contains(err.Error(), "is a current (A)") {
		t.Errorf("a volt limit on a current result: %v", err)
	}
}
