package uncertainty_test

import (
	"math"
	"testing"

	"trimline/sequencer/uncertainty"
)

// noisySweep is an 11-point sweep whose budget the readings' scatter
// dominates (like the demo's excess-noise unit): every point the mean of n
// readings, all sharing one pooled standard deviation sp with ν = 11·(n − 1)
// degrees of freedom (JCGM 100 §4.2.4), small rectangular specs beside it.
func noisySweep(n int) uncertainty.Sweep {
	const sp = 800e-6 // V, pooled SD of one reading
	s := uncertainty.Sweep{
		Meter:           uncertainty.Spec{OfReading: 1e-6, OfRange: 0.1e-6, Range: 10},
		MeterResolution: 1e-6,
		Source:          uncertainty.Spec{OfReading: 1e-6, OfRange: 0.1e-6, Range: 0.1},
		PooledRandom:    true,
	}
	nu := float64(11 * (n - 1))
	for i := range 11 {
		x := -10e-3 + 2e-3*float64(i)
		s.X = append(s.X, x)
		s.Y = append(s.Y, 200*x+3e-5*math.Sin(float64(i)))
		s.URandom = append(s.URandom, sp/math.Sqrt(float64(n)))
		s.DOFRandom = append(s.DOFRandom, nu)
	}
	return s
}

// TestMonteCarloPooledScale checks the Type A draw of a pooled standard
// deviation (JCGM 101:2008 §6.4.9: a scaled and shifted t_ν for a Type A
// evaluation from repeated indications; here one scale per trial, shared by
// the points, because one pooled estimate serves them all). On a noisy
// sweep of 8 readings per point (ν = 77) the Monte Carlo u(b0) and u(b1)
// agree with the GUM ones within 2 % (the t_77 variance is 77/75 of the
// normal's, +1.3 % in u). The draw records of metrology revision 0 were made
// with, an independent t per point with ν/N = 7 degrees of freedom each,
// overstates u by more than 10 % on the same sweep (√(7/5) = 1.18 for the
// Type A part): that is the check this test would fail with it.
func TestMonteCarloPooledScale(t *testing.T) {
	s := noisySweep(8)
	f, err := uncertainty.FitLine(s)
	if err != nil {
		t.Fatal(err)
	}
	u0, u1 := f.StdUnc()
	run, err := uncertainty.MonteCarloLine(s, uncertainty.MCOptions{P: 0.9545, Seed: 22, Trials: 200_000})
	if err != nil {
		t.Fatal(err)
	}
	r0, r1 := run.Summary(0).Std/u0, run.Summary(1).Std/u1
	t.Logf("pooled draw, ν = 77: MC/GUM u(b0) %.4f, u(b1) %.4f", r0, r1)
	within := func(r float64) bool { return math.Abs(r-1) <= 0.02 }
	if !within(r0) || !within(r1) {
		t.Errorf("pooled draw: MC/GUM u(b0) %.4f, u(b1) %.4f, want within 2 %%", r0, r1)
	}

	// The revision-0 draw on the sweep as revision 0 handed it over:
	// ν/N per point, not pooled.
	old := s
	old.PooledRandom = false
	old.DOFRandom = make([]float64, len(s.X))
	for i := range old.DOFRandom {
		old.DOFRandom[i] = s.DOFRandom[i] / float64(len(s.X))
	}
	mc, err := uncertainty.MonteCarloCoverage(old, 200_000, 22, 0.9545)
	if err != nil {
		t.Fatal(err)
	}
	o0, o1 := mc.Std[0]/u0, mc.Std[1]/u1
	t.Logf("revision-0 draw, ν/N = 7 per point: MC/GUM u(b0) %.4f, u(b1) %.4f", o0, o1)
	if within(o0) || within(o1) || o0 < 1.10 || o1 < 1.10 {
		t.Errorf("revision-0 draw: MC/GUM u(b0) %.4f, u(b1) %.4f; expected the > 10 %% overstatement it was replaced for", o0, o1)
	}
}

// TestMonteCarloPooledInterval: with the scatter alone (no specs, no
// resolution) and one pooled estimate with ν = 5, b0 = Σ c_i·e_i is exactly
// u_GUM(b0) times a Student t with 5 degrees of freedom when the points
// share the scale, so its 95 % interval is ±t_0.975,5·u = ±2.5706·u (JCGM 101
// §6.4.9 with JCGM 100 G.3: here the GUM's k from ν_eff is exact). Drawing
// an independent t per point instead gives a nearly normal sum with the same
// variance, whose tails are too light.
func TestMonteCarloPooledInterval(t *testing.T) {
	s := noisySweep(8)
	s.Meter, s.Source, s.MeterResolution = uncertainty.Spec{}, uncertainty.Spec{}, 0
	for i := range s.DOFRandom {
		s.DOFRandom[i] = 5
	}
	f, err := uncertainty.FitLine(s)
	if err != nil {
		t.Fatal(err)
	}
	u0, _ := f.StdUnc()
	run, err := uncertainty.MonteCarloLine(s, uncertainty.MCOptions{P: 0.95, Seed: 5, Trials: 400_000})
	if err != nil {
		t.Fatal(err)
	}
	sum := run.Summary(0)
	half := (sum.High - sum.Low) / 2 / u0
	k := uncertainty.CoverageFactor(0.95, 5)
	t.Logf("ν = 5: half-width/u = %.4f, t_0.975,5 = %.4f, u ratio %.4f (√(5/3) = %.4f)", half, k, sum.Std/u0, math.Sqrt(5.0/3))
	checkRel(t, "half-width / u_GUM", half, k, 0.01)
	checkRel(t, "u_MC / u_GUM", sum.Std/u0, math.Sqrt(5.0/3), 0.02)
	// The tails tell the draws apart: at p = 99 % the shared scale gives
	// ±t_0.995,5·u = ±4.032·u, while the earlier draw (MonteCarlo: an
	// independent t_5 per point, same variance) gives a nearly normal b0,
	// about ±2.576·√(5/3)·u = ±3.33·u.
	run99, err := uncertainty.MonteCarloLine(s, uncertainty.MCOptions{P: 0.99, Seed: 5, Trials: 400_000})
	if err != nil {
		t.Fatal(err)
	}
	s99 := run99.Summary(0)
	k99 := uncertainty.CoverageFactor(0.99, 5)
	checkRel(t, "99 % half-width / u_GUM", (s99.High-s99.Low)/2/u0, k99, 0.02)
	old, err := uncertainty.MonteCarloCoverage(s, 400_000, 5, 0.99)
	if err != nil {
		t.Fatal(err)
	}
	oldHalf := (old.High[0] - old.Low[0]) / 2 / u0
	t.Logf("p = 99 %%: shared scale %.4f·u, independent t per point %.4f·u, t_0.995,5 = %.4f", (s99.High-s99.Low)/2/u0, oldHalf, k99)
	if relErr(oldHalf, k99) <= 0.05 {
		t.Errorf("the per-point draw's 99 %% half-width %.4f·u is within 5 %% of t·u = %.4f·u: the test cannot tell the draws apart", oldHalf, k99)
	}
}
