package budget_test

import (
	"math"
	"path/filepath"
	"testing"

	"trimline/instruments/budget"
)

// JCGM 101:2008 §9.2, the additive model Y = X₁ + X₂ + X₃ + X₄ with every input
// of expectation 0, written as budget files (testdata/jcgm101-9.2.*-budget.yaml:
// four output-offset sources, gain 1, so the pre-trim offset is the sum), through
// Propagate (the GUM), with p = 95 % and n_dig = 2 as there. The same files
// through the Monte Carlo are sequencer/plan's tests (jcgm101_test.go there).
//
// The published values could not be read in the stored reference text (the
// search found the document's title and contents, not its tables); they are
// written "from memory" and checked to the digits printed.

// load loads a budget of testdata (the JCGM 101 §9.2 models as budget files).
func load(t *testing.T, name string) *budget.Budget {
	t.Helper()
	b, err := budget.Load(filepath.Join("testdata", name))
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// check fails when got is farther than tol from want.
func check(t *testing.T, what string, got, want, tol float64) {
	t.Helper()
	if math.Abs(got-want) > tol {
		t.Errorf("%s = %.6g, want %.6g ± %.3g", what, got, want, tol)
	}
}

// published checks got rounded to digits decimals against a value as printed.
func published(t *testing.T, what string, got, printed float64, digits int) {
	t.Helper()
	p := math.Pow(10, float64(digits))
	if math.Round(got*p)/p != printed {
		t.Errorf("%s = %.*f, published %.*f (from memory)", what, digits+2, got, digits, printed)
	}
}

// JCGM 101:2008 §9.2.2: four normal inputs N(0, 1). GUM: y = 0, u(y) = 2.00, the
// 95 % interval ±1.96·2 = ±3.92 (from memory: the document prints u(y) = 2.00
// and [−3.92, 3.92]).
func TestJCGM101AdditiveNormal(t *testing.T) {
	b := load(t, "jcgm101-9.2.2-budget.yaml")
	p := b.Propagate()[0]
	t.Logf("Propagate: %s u = %.6f %s, 95 %% [%.4f, %.4f], worst case [%.2f, %.2f]", p.Name, p.U, p.Unit, p.Interval95[0], p.Interval95[1], p.WorstCase[0], p.WorstCase[1])
	check(t, "GUM u(y)", p.U, 2, 1e-6)
	published(t, "GUM u(y)", p.U, 2.00, 2)
	published(t, "GUM y_high", p.Interval95[1], 3.92, 2)
	check(t, "worst case (±3σ each, said so in Propagation)", p.WorstCase[1], 12, 1e-6)
	for name, s := range p.Shares {
		check(t, "share of "+name, s, 0.25, 1e-6)
	}
}

// JCGM 101:2008 §9.2.3: four rectangular inputs of u = 1 (half-width √3). GUM
// u(y) = 2 and ±3.92 (normal, k = 1.96; from memory); the worst case is 4·√3.
func TestJCGM101AdditiveRectangular(t *testing.T) {
	a := math.Sqrt(3)
	b := load(t, "jcgm101-9.2.3-budget.yaml")
	p := b.Propagate()[0]
	t.Logf("Propagate: u = %.6f, 95 %% [%.4f, %.4f], worst case [%.4f, %.4f]", p.U, p.Interval95[0], p.Interval95[1], p.WorstCase[0], p.WorstCase[1])
	check(t, "GUM u(y)", p.U, 2, 1e-6)
	published(t, "GUM y_high", p.Interval95[1], 3.92, 2)
	check(t, "worst case 4·√3", p.WorstCase[1], 4*a, 1e-6)
}

// JCGM 101:2008 §9.2.4: three normal inputs N(0, 1) and a rectangular one of u =
// 10 (half-width 10√3) that dominates. GUM u(y) = √103 = 10.15 and ±19.9 (from
// memory), the rectangle's share 100/103.
func TestJCGM101AdditiveDominantRectangular(t *testing.T) {
	bud := load(t, "jcgm101-9.2.4-budget.yaml")
	p := bud.Propagate()[0]
	t.Logf("Propagate: u = %.4f, 95 %% [%.3f, %.3f], shares %v", p.U, p.Interval95[0], p.Interval95[1], p.Shares)
	published(t, "GUM u(y)", p.U, 10.15, 2)
	published(t, "GUM y_high", p.Interval95[1], 19.9, 1)
	check(t, "share of X4", p.Shares["X4"], 100.0/103, 1e-9)
}
