package budget_test

import (
	"math/rand/v2"
	"testing"

	"trimline/instruments/budget"
)

// BenchmarkDrawPreTrim is one Monte Carlo trial on the example budget (what
// sequencer/plan.Simulate does M times).
func BenchmarkDrawPreTrim(b *testing.B) {
	bud, err := budget.Load("testdata/example-budget.yaml")
	if err != nil {
		b.Fatal(err)
	}
	r := rand.New(rand.NewPCG(1, 2))
	for b.Loop() {
		bud.Draw(r).PreTrim(bud)
	}
}

// BenchmarkParseExample is Parse of the example budget (its one correlation and
// the matched pair solved for their normal scores).
func BenchmarkParseExample(b *testing.B) {
	text := []byte(exampleText(b))
	for b.Loop() {
		if _, err := budget.Parse("example-budget.yaml", text); err != nil {
			b.Fatal(err)
		}
	}
}
