package uncertainty_test

import (
	"errors"
	"math"
	"testing"
	"time"

	"trimline/sequencer/uncertainty"
)

// TestMonteCarloRealistic compares JCGM 101 Monte Carlo with the GUM law of
// propagation (FitLine) on the realistic sweep, whose budget is dominated
// by the rectangular systematic errors (source: JCGM 101:2008 §8, validation
// of the GUM uncertainty framework by Monte Carlo; a fixed M instead of the
// adaptive procedure of §7.9).
func TestMonteCarloRealistic(t *testing.T) {
	s := realisticSweep()
	f, err := uncertainty.FitLine(s)
	if err != nil {
		t.Fatal(err)
	}
	const trials = 200_000
	start := time.Now()
	mc, err := uncertainty.MonteCarlo(s, trials, 20260101)
	if err != nil {
		t.Fatal(err)
	}
	el := time.Since(start)
	u0, u1 := f.StdUnc()
	t.Logf("M = %d in %v", mc.Trials, el)
	t.Logf("b0: GUM %.7f ± %.4g µV, MC %.7f ± %.4g µV (ratio %.4f), 95 %% interval [%+.4g, %+.4g] µV about b0 (GUM k=1.96: ±%.4g)",
		f.B0, u0*1e6, mc.Mean[0], mc.Std[0]*1e6, mc.Std[0]/u0, (mc.Low[0]-f.B0)*1e6, (mc.High[0]-f.B0)*1e6, 1.96*u0*1e6)
	t.Logf("b1: GUM %.6f ± %.4g, MC %.6f ± %.4g (ratio %.4f), 95 %% interval [%+.4g, %+.4g] about b1 (GUM k=1.96: ±%.4g)",
		f.B1, u1, mc.Mean[1], mc.Std[1], mc.Std[1]/u1, mc.Low[1]-f.B1, mc.High[1]-f.B1, 1.96*u1)
	rGUM := f.Corr()
	rMC := mc.Cov[0][1] / (mc.Std[0] * mc.Std[1])
	t.Logf("r(b0, b1): GUM %.4f, MC %.4f", rGUM, rMC)

	if mc.Trials != trials {
		t.Errorf("Trials = %d", mc.Trials)
	}
	checkRel(t, "MC u(b0) vs GUM", mc.Std[0], u0, 0.05) // source: task brief, agree within 5 %
	checkRel(t, "MC u(b1) vs GUM", mc.Std[1], u1, 0.05) // source: task brief, agree within 5 %
	checkAbs(t, "MC r(b0,b1) vs GUM", rMC, rGUM, 0.02)
	// The model is linear to first order, so the MC mean is the estimate
	// within its own standard error u/√M (allow 5 standard errors).
	checkAbs(t, "MC mean b0", mc.Mean[0], f.B0, 5*u0/math.Sqrt(trials))
	checkAbs(t, "MC mean b1", mc.Mean[1], f.B1, 5*u1/math.Sqrt(trials))
	for k := range 2 {
		if !(mc.Low[k] < mc.Mean[k] && mc.Mean[k] < mc.High[k]) {
			t.Errorf("coefficient %d: interval [%v, %v] does not contain the mean %v", k, mc.Low[k], mc.High[k], mc.Mean[k])
		}
	}
	// Rectangular-dominated output: the 95 % interval is shorter than ±1.96·u
	// (the output is flatter than normal; JCGM 101 §9.2 shows the same effect)
	// but not shorter than ±√3·0.95·u, the bound of a single rectangular.
	for k, u := range []float64{u0, u1} {
		half := (mc.High[k] - mc.Low[k]) / 2
		if !(half < 1.96*u && half > 0.95*math.Sqrt(3)*u) {
			t.Errorf("coefficient %d: half-width %.4g outside (%.4g, %.4g)", k, half, 0.95*math.Sqrt(3)*u, 1.96*u)
		}
	}
}

// TestMonteCarloRandom checks the per-point draws with no systematic parts:
// normal draws reproduce CovRandom, and Student-t draws with ν degrees of
// freedom give variances larger by ν/(ν − 2) (source: JCGM 101:2008
// §6.4.9.4, variance of the scaled and shifted t distribution).
func TestMonteCarloRandom(t *testing.T) {
	base := uncertainty.Sweep{}
	for i := range 11 {
		x := float64(i) / 10
		base.X = append(base.X, x)
		base.Y = append(base.Y, 0.1+x)
		base.URandom = append(base.URandom, 1e-3*(1+float64(i%3)))
	}
	for _, nu := range []float64{math.Inf(1), 9} {
		s := base
		s.DOFRandom = make([]float64, len(s.X))
		for i := range s.DOFRandom {
			s.DOFRandom[i] = nu
		}
		f, err := uncertainty.FitLine(s)
		if err != nil {
			t.Fatal(err)
		}
		mc, err := uncertainty.MonteCarlo(s, 100_000, 7)
		if err != nil {
			t.Fatal(err)
		}
		factor := 1.0
		if !math.IsInf(nu, 1) {
			factor = math.Sqrt(nu / (nu - 2))
		}
		u0, u1 := f.StdUnc()
		t.Logf("ν = %v: MC/GUM u(b0) %.4f, u(b1) %.4f, expected %.4f", nu, mc.Std[0]/u0, mc.Std[1]/u1, factor)
		checkRel(t, "MC u(b0)/GUM", mc.Std[0]/u0, factor, 0.015)
		checkRel(t, "MC u(b1)/GUM", mc.Std[1]/u1, factor, 0.015)
		checkRel(t, "MC Cov01", mc.Cov[0][1]/(factor*factor), f.Cov[0][1], 0.05)
		if math.IsInf(nu, 1) {
			// Normal output: the 95 % interval is ±1.96·u within MC scatter.
			checkRel(t, "normal 95 % half-width b0", (mc.High[0]-mc.Low[0])/2, 1.96*u0, 0.02)
		}
	}
}

func TestMonteCarloContract(t *testing.T) {
	s := realisticSweep()
	a, err := uncertainty.MonteCarlo(s, 1000, 42)
	if err != nil {
		t.Fatal(err)
	}
	b, _ := uncertainty.MonteCarlo(s, 1000, 42)
	c, _ := uncertainty.MonteCarlo(s, 1000, 43)
	if a != b {
		t.Errorf("same seed, different results:\n%+v\n%+v", a, b)
	}
	if a == c {
		t.Errorf("different seeds, same results")
	}
	if a.Low[0] >= a.High[0] || a.Low[1] >= a.High[1] {
		t.Errorf("interval %v %v", a.Low, a.High)
	}
	if _, err := uncertainty.MonteCarlo(s, uncertainty.MinTrials-1, 1); !errors.Is(err, uncertainty.ErrInvalidInput) {
		t.Errorf("too few trials: %v", err)
	}
	if _, err := uncertainty.MonteCarloCoverage(s, 1000, 1, 1); !errors.Is(err, uncertainty.ErrInvalidInput) {
		t.Errorf("p = 1: %v", err)
	}
	bad := s
	bad.Y = bad.Y[:3]
	if _, err := uncertainty.MonteCarlo(bad, 1000, 1); !errors.Is(err, uncertainty.ErrInvalidInput) {
		t.Errorf("bad sweep: %v", err)
	}
	// No random uncertainty at all: only systematics are drawn.
	z := s
	z.URandom, z.DOFRandom, z.MeterResolution = nil, nil, 0
	if _, err := uncertainty.MonteCarlo(z, 1000, 1); err != nil {
		t.Errorf("systematics only: %v", err)
	}
}

// TestMonteCarloRevisionZeroDraw pins the draw that records of metrology
// revision 0 were computed with (an independent t per point, 2 000 trials,
// seed 42 here): those records must replay exactly, so MonteCarlo may not
// change by a bit. The values were produced by the code as it stood before
// the JCGM 101 adaptive engine was added.
func TestMonteCarloRevisionZeroDraw(t *testing.T) {
	mc, err := uncertainty.MonteCarlo(realisticSweep(), 2000, 42)
	if err != nil {
		t.Fatal(err)
	}
	want := [5]float64{5.758664162043484e-09, 1.4218439585879008e-07, 1.680476706706178e-05, 2.499852011434596, 2.5001400476650044}
	got := [5]float64{mc.Cov[0][0], mc.Cov[0][1], mc.Cov[1][1], mc.Low[0], mc.High[0]}
	if got != want || mc.Low[1] != 199.99214541278633 || mc.High[1] != 200.00745350195984 {
		t.Errorf("revision-0 draw changed:\n got %v %v %v\nwant %v", got, mc.Low[1], mc.High[1], want)
	}
}
