package uncertainty

import (
	"math"
	"testing"
)

// A pooled standard deviation is one Type A input: its degrees of freedom enter
// Welch–Satterthwaite once (JCGM 100:2008 G.4.1, eq. G.2b, with the Type A
// evaluation of §4.2.4 that pools one process's scatter). The expected ν_eff is
// worked by hand from the budget rows: ν_eff = u_c⁴ / (u_A⁴/ν), the systematic
// rows having ν = ∞.
func TestPooledRandomIsOneInput(t *testing.T) {
	x := []float64{-1, -0.5, 0, 0.5, 1}
	y := []float64{-2.01, -0.99, 0.02, 1.01, 1.98}
	// Point means from different numbers of readings (8, 8, 16, 8, 4) share one
	// pooled s = 0.01 with ν = 7+7+15+7+3 = 39.
	n := []float64{8, 8, 16, 8, 4}
	const sp, nu = 0.01, 39.0
	ur, dof := make([]float64, len(x)), make([]float64, len(x))
	for i := range x {
		ur[i], dof[i] = sp/math.Sqrt(n[i]), nu
	}
	s := Sweep{X: x, Y: y, URandom: ur, DOFRandom: dof, PooledRandom: true,
		Meter: Spec{OfReading: 30e-6, OfRange: 4e-6, Range: 10}, Source: Spec{OfReading: 20e-6, OfRange: 5e-6, Range: 1}}
	f, err := FitLine(s)
	if err != nil {
		t.Fatal(err)
	}
	for k, b := range [][]Component{f.Budget, f.BudgetB1} {
		var uA, uc2 float64
		for _, c := range b {
			uc2 += c.U * c.U
			if c.Name == NameRepeatability {
				uA = c.U
				if c.DOF != nu {
					t.Errorf("b%d: repeatability row has ν = %g, want the pooled %g", k, c.DOF, nu)
				}
			}
		}
		want := uc2 * uc2 / (uA * uA * uA * uA / nu)
		got := f.DOFB0
		if k == 1 {
			got = f.DOFB1
		}
		if math.Abs(got-want) > 1e-9*want {
			t.Errorf("b%d: ν_eff = %.10g, want %.10g (G.2b over the rows)", k, got, want)
		}
	}
	// Unequal weights: splitting ν over the points as N independent inputs with
	// ν/N each gives a smaller ν_eff, which is the error this flag removes.
	split := s
	split.PooledRandom = false
	split.DOFRandom = make([]float64, len(x))
	for i := range x {
		split.DOFRandom[i] = nu / float64(len(x))
	}
	g, err := FitLine(split)
	if err != nil {
		t.Fatal(err)
	}
	if !(g.DOFB1 < f.DOFB1) {
		t.Errorf("split ν/N gives ν_eff(b1) = %g, pooled %g: expected the split to be lower with unequal weights", g.DOFB1, f.DOFB1)
	}
}

// A measured source offset (a zero check) replaces the rectangular spec term:
// the source-offset row carries the measured u through the sensitivity −b1 and
// the measurement's degrees of freedom (JCGM 100 §5.1.3, G.2b).
func TestSourceZeroReplacesOffsetSpec(t *testing.T) {
	s := Sweep{X: []float64{-1, 0, 1}, Y: []float64{-2, 0, 2},
		Source: Spec{OfReading: 20e-6, OfRange: 5e-6, Range: 0.1}, SourceZero: &Measured{U: 1e-7, DOF: 15}}
	f, err := FitLine(s)
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range f.Budget {
		if c.Name == NameSourceOffset {
			if want := 2 * 1e-7; math.Abs(c.U-want) > 1e-18 || c.DOF != 15 || c.Kind != KindA {
				t.Errorf("source offset row %+v, want U %g (|b1|·u), DOF 15, Type A", c, want)
			}
			return
		}
	}
	t.Fatal("no source offset row")
}
