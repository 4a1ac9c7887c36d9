package sequencer

import (
	"math"
	"slices"
	"testing"

	"trimline/sequencer/uncertainty"
)

// lineAnalysis fits three points at −1, 0, +1 mV on y = b0 + b1·x, each mean
// with standard uncertainty sigma from a pooled s of nu degrees of freedom,
// read by meter and driven by source.
func lineAnalysis(t *testing.T, b0, b1, sigma, nu float64, meter, source uncertainty.Spec) analysis {
	t.Helper()
	x := []float64{-1e-3, 0, 1e-3}
	y := make([]float64, 3)
	for i := range x {
		y[i] = b0 + b1*x[i]
	}
	s := uncertainty.Sweep{X: x, Y: y, URandom: []float64{sigma, sigma, sigma}, DOFRandom: []float64{nu, nu, nu},
		PooledRandom: true, Meter: meter, Source: source}
	lf, err := uncertainty.FitLine(s)
	if err != nil {
		t.Fatal(err)
	}
	a := analysis{sw: s, lf: lf, poolDOF: nu}
	a.sum.Intercept, a.sum.Slope = lf.B0, lf.B1
	return a
}

var (
	testMeter  = uncertainty.Spec{OfReading: 30e-6, OfRange: 5e-6, Range: 10}
	testSource = uncertainty.Spec{OfReading: 20e-6, OfRange: 5e-6, Range: 0.1}
	sameRoles  = sweepRoles{meter: "meter", source: "source"}
)

// Two sweeps with the same instruments on the same ranges share the four
// systematic errors: each is one input with a sensitivity in each fit, and the
// change Δ = b0_post − b0_pre has u²(Δ) = Σ_random + Σ_shared (c_post −
// c_pre)²·u² (JCGM 100 §5.2, correlated input quantities: eq. (13) with
// r(pre, post) = 1 for each shared error). Hand-worked:
//
//   - three points at x = −1, 0, +1 mV, equal u = σ = 3 µV: the random part of
//     each b0 is σ/√3 (the mean of three at x̄ = 0), so of Δ σ·√(2/3) =
//     2.449490 µV, with ν_eff = 2ν by Welch–Satterthwaite (JCGM 100 G.2b) for
//     two equal components of ν each;
//   - same slope and intercept in both fits: every shared term's sensitivity
//     difference is 0 (meter gain −b0, meter offset −1, source gain −b1·X0 = 0,
//     source offset −b1), so the systematic terms cancel exactly;
//   - treated as independent, each fit carries besides σ²/3 the meter offset
//     (5 ppm of 10 V)/√3 = 28.8675 µV, the meter gain 2.5 V·30 ppm/√3 =
//     43.3013 µV and the source offset 200·(5 ppm of 0.1 V)/√3 = 57.7350 µV:
//     u = sqrt(2·(3 + 833.333 + 1875 + 3333.333)·10⁻¹²) V = 109.9515 µV.
func TestTrimEffectSharedErrorsCancel(t *testing.T) {
	const sigma, nu = 3e-6, 77
	pre := lineAnalysis(t, 2.5, 200, sigma, nu, testMeter, testSource)
	post := lineAnalysis(t, 2.5, 200, sigma, nu, testMeter, testSource)
	v, u, dof, te := trimEffect(pre, post, sameRoles, sameRoles, [2]float64{1, 0})
	wantU := sigma * math.Sqrt(2.0/3)
	if math.Abs(v) > 1e-15 || math.Abs(u-wantU) > 1e-6*wantU || math.Abs(dof-2*nu) > 1e-6 {
		t.Errorf("Δ = %g, u = %.7g, ν = %.6g; want 0, %.7g, %d", v, u, dof, wantU, 2*nu)
	}
	if want := []string{uncertainty.NameMeterGain, uncertainty.NameMeterOffset, uncertainty.NameSourceGain, uncertainty.NameSourceOffset}; !slices.Equal(te.Shared, want) || len(te.Separate) != 0 {
		t.Errorf("shared %v separate %v; want all four shared", te.Shared, te.Separate)
	}
	if wantI := 109.9515e-6; math.Abs(te.UIndependent-wantI) > 1e-6*wantI {
		t.Errorf("u if independent = %.7g, want %.7g", te.UIndependent, wantI)
	}
}

// Where the trim moved the line, each shared error leaves the difference of its
// sensitivities (JCGM 100 §5.2, eq. (13)). Hand-worked for b0 2.501 → 2.5 V
// and b1 200.2 → 200 V/V:
//
//   - offset change: the meter gain (sensitivity −b0 in each fit) leaves
//     1 mV·30 ppm/√3 = 17.3205 nV, the source offset (sensitivity −b1) leaves
//     0.2·0.5 µV/√3 = 57.735 nV, in quadrature with the random 2.449490 µV;
//   - gain change (Δb1/200): the random part of each b1 is σ/√(Σx²) =
//     σ/(√2·1 mV), √2 of it for the two fits, /200 = 15 ppm; the meter gain
//     (sensitivity −b1) leaves 0.2·30 ppm/√3/200 = 17.3205 ppb; the source
//     offset has no sensitivity on b1, the source gain −b1 in each fit leaves
//     0.2·20 ppm/√3/200 = 11.547 ppb.
func TestTrimEffectSensitivityDifference(t *testing.T) {
	const sigma, nu = 3e-6, 77
	pre := lineAnalysis(t, 2.501, 200.2, sigma, nu, testMeter, testSource)
	post := lineAnalysis(t, 2.5, 200, sigma, nu, testMeter, testSource)
	v, u, _, _ := trimEffect(pre, post, sameRoles, sameRoles, [2]float64{1, 0})
	sq3 := math.Sqrt(3)
	want := math.Sqrt(2*sigma*sigma/3 + math.Pow(1e-3*30e-6/sq3, 2) + math.Pow(0.2*0.5e-6/sq3, 2))
	if math.Abs(v+1e-3) > 1e-12 || math.Abs(u-want) > 1e-9*want {
		t.Errorf("offset change %.9g ± u %.9g, want −0.001 ± %.9g", v, u, want)
	}
	vg, ug, _, _ := trimEffect(pre, post, sameRoles, sameRoles, [2]float64{0, 1.0 / 200})
	rnd := sigma / (math.Sqrt2 * 1e-3) / 200 * math.Sqrt2
	wantG := math.Sqrt(rnd*rnd + math.Pow(0.2*30e-6/sq3/200, 2) + math.Pow(0.2*20e-6/sq3/200, 2))
	if math.Abs(vg+1e-3) > 1e-12 || math.Abs(ug-wantG) > 1e-9*wantG {
		t.Errorf("gain change %.9g ± u %.9g, want −0.001 ± %.9g", vg, ug, wantG)
	}
}

// On another meter range the meter's errors are other errors: they are
// treated as independent and said so; the source's still cancel.
func TestTrimEffectOtherRangeIsIndependent(t *testing.T) {
	const sigma, nu = 3e-6, 77
	pre := lineAnalysis(t, 2.5, 200, sigma, nu, testMeter, testSource)
	m := testMeter
	m.Range = 100
	post := lineAnalysis(t, 2.5, 200, sigma, nu, m, testSource)
	_, u, _, te := trimEffect(pre, post, sameRoles, sameRoles, [2]float64{1, 0})
	if !slices.Equal(te.Separate, []string{uncertainty.NameMeterGain, uncertainty.NameMeterOffset}) {
		t.Errorf("separate %v, want the meter's two", te.Separate)
	}
	sq3 := math.Sqrt(3)
	want := math.Sqrt(2*sigma*sigma/3 + 2*math.Pow(2.5*30e-6/sq3, 2) + math.Pow(50e-6/sq3, 2) + math.Pow(500e-6/sq3, 2))
	if math.Abs(u-want) > 1e-9*want {
		t.Errorf("u = %.9g, want %.9g", u, want)
	}
	// Another meter role: the same.
	_, _, _, te = trimEffect(pre, pre, sameRoles, sweepRoles{meter: "meter2", source: "source"}, [2]float64{1, 0})
	if !slices.Equal(te.Shared, []string{uncertainty.NameSourceGain, uncertainty.NameSourceOffset}) {
		t.Errorf("another meter: shared %v, want the source's two", te.Shared)
	}
}
