package plan

import (
	"context"
	"path/filepath"
	"testing"

	"trimline/instruments/budget"
)

// BenchmarkRun plans the example budget of the budget package (ten sources,
// two DACs with DNL) with the demo card's limit file: 100 000 units drawn and
// trimmed, and the search for both DACs.
func BenchmarkRun(b *testing.B) {
	bud, err := budget.Load(filepath.Join("..", "..", "instruments", "budget", "testdata", "example-budget.yaml"))
	if err != nil {
		b.Fatal(err)
	}
	tol, err := LoadTolerances(filepath.Join("..", "..", "sequences", "brx200-limits.yaml"))
	if err != nil {
		b.Fatal(err)
	}
	for b.Loop() {
		if _, err := Run(context.Background(), bud, Options{Seed: 1, TargetYield: 0.995, Tolerances: tol}); err != nil {
			b.Fatal(err)
		}
	}
}
