package budget_test

import (
	"math/rand/v2"
	"testing"

	"trimline/instruments/budget"
)

func TestExampleParses(t *testing.T) {
	b, err := budget.Load("testdata/example-budget.yaml")
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("%+v", b.Transfer)
	for _, s := range b.Sources {
		t.Logf("%-25s %-16s %+v [%g, %g]", s.Name, s.Acts, s.Dist, s.Low, s.High)
	}
	t.Logf("%+v %+v", b.Trim.DACs, b.Correlations)
	u := b.Draw(rand.New(rand.NewPCG(1, 2)))
	o, g := u.PreTrim(b)
	t.Logf("%+v offset %g gain %g", u, o, g)
	for _, p := range b.Propagate() {
		t.Logf("%+v", p)
	}
}
