package uncertainty_test

import (
	"math"
	"testing"

	"trimline/sequencer/uncertainty"
)

func TestTypeA(t *testing.T) {
	// Hand-worked: values 1..5, mean 3, s² = (4+1+0+1+4)/4 = 2.5, u = sqrt(2.5/5) = sqrt(0.5), ν = 4 (JCGM 100 §4.2.2–4.2.3).
	mean, c := uncertainty.TypeA("r", []float64{1, 2, 3, 4, 5})
	checkRel(t, "mean", mean, 3, 1e-15)               // source: hand arithmetic above
	checkRel(t, "u", c.U, math.Sqrt(0.5), 1e-15)      // source: JCGM 100 eq. (5), s(q̄) = s(q)/√n
	if c.DOF != 4 || c.Kind != "A" || c.Name != "r" { // source: JCGM 100 §4.2.3 / G.3.3, ν = n − 1
		t.Errorf("component %+v, want DOF 4 Kind A Name r", c)
	}
	// A large common offset must not cost accuracy (same numbers + 1e9).
	mean, c = uncertainty.TypeA("r", []float64{1e9 + 1, 1e9 + 2, 1e9 + 3, 1e9 + 4, 1e9 + 5})
	checkRel(t, "mean with offset", mean, 1e9+3, 1e-15) // source: hand arithmetic above
	checkRel(t, "u with offset", c.U, math.Sqrt(0.5), 1e-12)
	// Error-free contract for n < 2.
	for _, v := range [][]float64{nil, {7}} {
		m, c := uncertainty.TypeA("one", v)
		if !math.IsNaN(c.U) || c.DOF != 0 {
			t.Errorf("TypeA(%v) = %v, %+v; want U NaN, DOF 0", v, m, c)
		}
		if len(v) == 1 && m != 7 || len(v) == 0 && !math.IsNaN(m) {
			t.Errorf("TypeA(%v) mean = %v", v, m)
		}
	}
}

func TestRectangularAndResolution(t *testing.T) {
	c := uncertainty.Rectangular("spec", 3e-6)
	checkRel(t, "rectangular u", c.U, 3e-6/math.Sqrt(3), 1e-15) // source: JCGM 100 §4.3.7, u = a/√3
	if !math.IsInf(c.DOF, 1) || c.Kind != "B" {                 // source: JCGM 100 G.4.2, exactly known limits → ν = ∞
		t.Errorf("rectangular %+v, want DOF +Inf, Kind B", c)
	}
	checkRel(t, "rectangular of −a", uncertainty.Rectangular("", -3e-6).U, c.U, 0)
	r := uncertainty.Resolution("res", 1e-6)
	checkRel(t, "resolution u", r.U, 1e-6/(2*math.Sqrt(3)), 1e-15) // source: JCGM 100 F.2.2.1, half a count, u = 0.29·δx
	checkAbs(t, "resolution u / step", r.U/1e-6, 0.2887, 5e-5)     // source: JCGM 100 F.2.2.1, u = 0.29 δx (0.2887 to 4 d.p.)

	sp := uncertainty.Spec{OfReading: 30e-6, OfRange: 4e-6, Range: 10}
	checkRel(t, "HalfWidth(+2 V)", sp.HalfWidth(2), 30e-6*2+40e-6, 1e-15) // source: definition ±(of reading + of range)
	checkRel(t, "HalfWidth(−2 V)", sp.HalfWidth(-2), 100e-6, 1e-15)       // source: |reading| in the definition
	checkRel(t, "Spec.U(2 V)", sp.U(2), 100e-6/math.Sqrt(3), 1e-15)       // source: JCGM 100 §4.3.7
}

func TestCombineWelchSatterthwaite(t *testing.T) {
	// Hand-worked (JCGM 100 G.2b): u1 = 3 (ν 4), u2 = 4 (ν ∞): uc = sqrt(9 + 16) = 5,
	// ν_eff = 5⁴ / (3⁴/4 + 4⁴/∞) = 625 / (81/4) = 2500/81 = 30.864…
	uc, dof := uncertainty.Combine([]uncertainty.Component{{U: 3, DOF: 4}, {U: 4, DOF: math.Inf(1)}})
	checkRel(t, "uc", uc, 5, 1e-15)             // source: hand arithmetic above
	checkRel(t, "ν_eff", dof, 2500.0/81, 1e-14) // source: hand arithmetic above
	checkAbs(t, "ν_eff (2 d.p.)", dof, 30.86, 0.005)

	// Hand-worked: u = 1 (ν 2), 2 (ν 8), 2 (ν 8): uc² = 9, ν_eff = 81/(1/2 + 16/8 + 16/8) = 81/4.5 = 18.
	uc, dof = uncertainty.Combine([]uncertainty.Component{{U: 1, DOF: 2}, {U: -2, DOF: 8}, {U: 2, DOF: 8}})
	checkRel(t, "uc (3 comps)", uc, 3, 1e-15)
	checkRel(t, "ν_eff (3 comps)", dof, 18, 1e-14) // source: hand arithmetic above
	// ν_eff ≤ Σν_i (a property of G.2b), with equality exactly when all u_i²/ν_i are equal, as here (1/2, 4/8, 4/8).
	if dof > 2+8+8+1e-12 {
		t.Errorf("ν_eff %v exceeds Σν_i = 18", dof)
	}

	// Edge contracts.
	if uc, dof := uncertainty.Combine(nil); uc != 0 || !math.IsInf(dof, 1) {
		t.Errorf("Combine(nil) = %v, %v; want 0, +Inf", uc, dof)
	}
	if _, dof := uncertainty.Combine([]uncertainty.Component{{U: 1, DOF: math.Inf(1)}, {U: 0, DOF: 0}}); !math.IsInf(dof, 1) {
		t.Errorf("all-infinite ν_eff = %v, want +Inf (zero components ignored)", dof)
	}
	if _, dof := uncertainty.Combine([]uncertainty.Component{{U: 1, DOF: 0}}); dof != 0 {
		t.Errorf("DOF 0 component: ν_eff = %v, want 0", dof)
	}
	if uc, dof := uncertainty.Combine([]uncertainty.Component{{U: math.NaN(), DOF: 1}}); !math.IsNaN(uc) || !math.IsNaN(dof) {
		t.Errorf("NaN component: %v, %v", uc, dof)
	}
	// Scaling: tiny and huge values do not under/overflow.
	for _, s := range []float64{1e-200, 1e200} {
		uc, dof := uncertainty.Combine([]uncertainty.Component{{U: 3 * s, DOF: 4}, {U: 4 * s, DOF: math.Inf(1)}})
		checkRel(t, "scaled uc", uc, 5*s, 1e-15)
		checkRel(t, "scaled ν_eff", dof, 2500.0/81, 1e-14)
	}
}

func TestCoverageFactorTableG2(t *testing.T) {
	// source: JCGM 100:2008 Table G.2, t_p(ν) for p = 95 % and 95.45 %.
	for _, c := range []struct {
		dof, p, k float64
		dec       int
	}{
		{9, 0.95, 2.26, 2}, {9, 0.9545, 2.32, 2},
		{10, 0.95, 2.23, 2}, {10, 0.9545, 2.28, 2}, {10, 0.99, 3.17, 2},
		{20, 0.95, 2.09, 2}, {20, 0.9545, 2.13, 2},
		{math.Inf(1), 0.95, 1.960, 3}, {math.Inf(1), 0.9545, 2.000, 3}, {math.Inf(1), 0.99, 2.576, 3},
		{math.Inf(1), 0.9973, 3.000, 3},
	} {
		k := uncertainty.CoverageFactor(c.p, c.dof)
		checkPublished(t, "k", k, c.k, c.dec)
	}
	// Continuity across the normal switch at ν = 1e7.
	checkRel(t, "k(ν=1e7) vs normal", uncertainty.CoverageFactor(0.95, 1e7), uncertainty.CoverageFactor(0.95, math.Inf(1)), 1e-6)
	// Non-integer ν lies between its neighbours.
	if k := uncertainty.CoverageFactor(0.95, 30.86); !(k < uncertainty.CoverageFactor(0.95, 30) && k > uncertainty.CoverageFactor(0.95, 31)) {
		t.Errorf("k(30.86) = %v not between k(31) and k(30)", k)
	}
	for _, c := range [][2]float64{{0, 10}, {1, 10}, {0.95, 0}, {0.95, -1}, {math.NaN(), 10}, {0.95, math.NaN()}} {
		if k := uncertainty.CoverageFactor(c[0], c[1]); !math.IsNaN(k) {
			t.Errorf("CoverageFactor(%v, %v) = %v, want NaN", c[0], c[1], k)
		}
	}
	k, U := uncertainty.Expand(0.5, 10, 0.95)
	checkPublished(t, "Expand k", k, 2.23, 2) // source: JCGM 100 Table G.2, ν = 10, 95 %
	checkRel(t, "Expand U", U, 0.5*k, 1e-15)  // source: JCGM 100 §6.2.1, U = k·uc
}
