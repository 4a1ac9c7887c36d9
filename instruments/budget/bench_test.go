package budget_test

import (
	"math/rand/v2"
	"testing"

	"trimline/instruments/budget"
)

// BenchmarkDrawPreTrim is one trial of Simulate on the example budget.
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

// BenchmarkSimulateExample is the whole adaptive run on the example budget.
func BenchmarkSimulateExample(b *testing.B) {
	bud, err := budget.Load("testdata/example-budget.yaml")
	if err != nil {
		b.Fatal(err)
	}
	for b.Loop() {
		res, err := bud.Simulate(budget.MCOptions{Seed: 1})
		if err != nil {
			b.Fatal(err)
		}
		b.ReportMetric(float64(res.Trials), "trials")
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
