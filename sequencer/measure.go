package sequencer

import (
	"fmt"
	"hash/fnv"
	"math"

	"trimline/instruments"
	"trimline/instruments/units"
	"trimline/sequencer/uncertainty"
)

// analysis is one sweep's fit with its uncertainty.
type analysis struct {
	sum     FitSummary
	lf      uncertainty.LineFit  // order 1
	quad    *uncertainty.QuadFit // order 2, else nil
	sw      uncertainty.Sweep
	poolDOF float64 // degrees of freedom of the pooled standard deviation, Σ(n_i − 1)
	// mc is the Monte Carlo run of a sequence with uncertainty method
	// monte_carlo (metrology revision ≥ 1), nil otherwise; gum is the line fit
	// with its law-of-propagation covariance (lf.Cov holds the Monte Carlo
	// covariance in records of revision 0).
	mc  *uncertainty.MCRun
	gum uncertainty.LineFit
}

// specs are the accuracy specifications of the sweep's meter (its spec for the
// quantity read) and source (its spec for the stimulus: a voltage, or a current
// with its range in A), and the resolution of the readings, for a reading of
// value y and a level x (volts or amperes). Where an instrument has several
// specs of that dimension, the meter's is the one of the range the plan sets
// (or the smallest that holds |y| on auto range) and the source's the smallest
// range that holds |x| (StationInstrument.SpecAt). A unit that reports its own
// response has no meter spec: the resolution is the one its response: declares.
func specs(st *Station, p SweepPlan, y, x float64) (meter, source uncertainty.Spec, resolution float64) {
	s := st.Instruments[p.Source].SpecAt(p.stimDim(), 0, x)
	source = uncertainty.Spec{OfReading: s.OfReading, OfRange: s.OfRange, Range: s.Range}
	if p.Response != nil {
		return uncertainty.Spec{}, source, p.Response.Resolution
	}
	q := p.Quantity
	if q == units.Ratio { // a plan made before plans said their quantity
		q = units.Volt
	}
	m := st.Instruments[p.Meter].SpecAt(q, p.MeterSet.Range, y)
	return uncertainty.Spec{OfReading: m.OfReading, OfRange: m.OfRange, Range: m.Range}, source, m.Resolution
}

// sweepSpecs are specs for the whole sweep, as its fit takes them (one meter
// and one source whose errors are shared by every point): those for the
// largest |mean| and the largest |level|, so on auto range the range that
// holds every point.
func sweepSpecs(st *Station, p SweepPlan, ps []Point) (meter, source uncertainty.Spec, resolution float64) {
	var y, x float64
	for _, pt := range ps {
		y, x = math.Max(y, math.Abs(pt.Mean)), math.Max(x, math.Abs(pt.Stimulus))
	}
	return specs(st, p, y, x)
}

// annotate fills each point's Type A and Type B standard uncertainties. The Type A
// part uses the pooled standard deviation of the whole sweep (JCGM 100 §4.2.4: the
// noise of one unit on one range is one process, and a pooled estimate with
// Σ(n_i − 1) degrees of freedom is far better than eleven estimates from 8 readings
// each); weights then differ only where the number of readings does, and a chance
// small SD at one point cannot tilt the line.
func annotate(cfg Config, plan SweepPlan, sw *Sweep) {
	g := cfg.Sequence.IdealGain
	sp, _ := pooledSD(sw.Points)
	for i := range sw.Points {
		p := &sw.Points[i]
		if p.Valid > 1 {
			p.URandom = sp / math.Sqrt(float64(p.Valid))
		}
		if p.Valid > 0 {
			meter, source, res := specs(cfg.Station, plan, p.Mean, p.Stimulus)
			// Meter spec at the reading, half a count of resolution, and the
			// source spec at the stimulus seen through the ideal gain; each
			// rectangular (JCGM 100 §4.3.7).
			// A unit that reports its own response has no meter spec.
			var cs []uncertainty.Component
			if plan.Response == nil {
				cs = append(cs, uncertainty.Rectangular("meter", meter.HalfWidth(p.Mean)))
			}
			p.USys, _ = uncertainty.Combine(append(cs,
				uncertainty.Resolution("resolution", res),
				uncertainty.Rectangular("source", math.Abs(g)*source.HalfWidth(p.Stimulus)),
			))
		}
	}
}

// analyse fits a straight line through the sweep's means with its uncertainty,
// including the correlated parts of the source and meter errors. Any point with an
// invalid reading (NaN, infinite, overload) makes the fit unusable, because a
// flagged reading must never contribute to a passing result.
//
// order 2 fits a quadratic instead (its slope and intercept are those at zero
// stimulus); its uncertainty is always evaluated by the law of propagation.
// Every fit carries a lack-of-fit statistic where one can be made.
func analyse(cfg Config, plan SweepPlan, sw Sweep, order int, seed string, rules int) (analysis, error) {
	x := make([]float64, len(sw.Points))
	y := make([]float64, len(sw.Points))
	ur := make([]float64, len(sw.Points))
	dof := make([]float64, len(sw.Points))
	// One pooled estimate serves every point, so its Σ(n_i − 1) degrees of freedom
	// are counted once: the points' Type A inputs are one input with ν = Σ(n_i − 1)
	// (uncertainty.Sweep.PooledRandom). Handing each point ν/N instead would make
	// Welch–Satterthwaite treat N independent variance estimates, which they are
	// not, and understate ν_eff wherever the weights differ. Records of metrology
	// revision 0 were computed with ν/N per point and replay so.
	_, pooled := pooledSD(sw.Points)
	if pooled == 0 {
		pooled = math.Inf(1)
	}
	pdof, poolOnce := pooled, rules >= 1
	if !poolOnce {
		pdof = pooled / float64(len(sw.Points))
	}
	for i, p := range sw.Points {
		if p.Valid != len(p.Readings) || len(p.Readings) == 0 {
			return analysis{}, fmt.Errorf("invalid reading (%s) at %s", firstBad(p.Readings), fmtStim(plan.Stimulus, p.Stimulus))
		}
		x[i], y[i], ur[i], dof[i] = p.Stimulus, p.Mean, p.URandom, pdof
	}
	meter, source, res := sweepSpecs(cfg.Station, plan, sw.Points)
	us := uncertainty.Sweep{X: x, Y: y, URandom: ur, DOFRandom: dof, PooledRandom: poolOnce, Meter: meter, MeterResolution: res, Source: source}
	zero := plan.zero.apply(&us) // a zero check's measured source offset (step_zero.go)
	a := analysis{sw: us, poolDOF: pooled}
	s := &a.sum
	if order == 2 {
		qf, err := uncertainty.FitQuadratic(us)
		if err != nil {
			return analysis{}, err
		}
		a.quad = &qf
		s.Order, s.Coef = 2, qf.B[:]
		s.Intercept, s.Slope = qf.B[0], qf.B[1]
		s.Cov, s.CovTotal = block2(qf.CovRandom), block2(qf.Cov)
		s.DOFEff, s.Residuals, s.DOF = qf.DOFB0, qf.Residuals, len(x)-3
	} else {
		lf, err := uncertainty.FitLine(us)
		if err != nil {
			return analysis{}, err
		}
		a.lf = lf
		s.Intercept, s.Slope = lf.B0, lf.B1
		s.Cov, s.CovTotal = lf.CovRandom, lf.Cov
		s.DOFEff, s.Residuals, s.DOF = lf.DOFB0, lf.Residuals, len(x)-2
	}
	s.Sweep, s.Order, s.SourceZero = sw.Name, order, zero
	s.LackOfFit = lackOfFit(us, s.Residuals, order+1)
	var rss, maxAbs float64
	for _, r := range s.Residuals {
		rss += r * r
		maxAbs = math.Max(maxAbs, math.Abs(r))
	}
	s.ResidualSD = math.Sqrt(rss / float64(s.DOF))
	s.Nonlinearity = maxAbs / cfg.Sequence.FullScale
	if cfg.Sequence.Uncertainty == "monte_carlo" && order != 2 {
		h := fnv.New64a()
		h.Write([]byte(seed + "/" + sw.Name))
		a.gum = a.lf
		if rules < 1 {
			// Records of metrology revision 0: an independent t per point, a
			// fixed number of trials, and only the covariance kept (U = k·u
			// with k from νeff).
			trials := cfg.Sequence.MCTrials
			if trials == 0 {
				trials = LegacyMCTrials
			}
			mc, err := uncertainty.MonteCarlo(us, trials, h.Sum64())
			if err != nil {
				return analysis{}, fmt.Errorf("monte carlo: %w", err)
			}
			s.CovTotal = mc.Cov
			a.lf.Cov = mc.Cov
			return a, nil
		}
		// JCGM 101: the pooled Type A scale drawn once per trial, the adaptive
		// procedure (§7.9) unless the file fixes the trials, and coverage
		// intervals from the model values (resultUnc).
		run, err := uncertainty.MonteCarloLine(us, uncertainty.MCOptions{
			P: coverage(cfg.Sequence), Interval: cfg.Sequence.MCInterval, Trials: cfg.Sequence.MCTrials,
			MaxTrials: MaxMCTrials, Digits: mcDigits, Seed: h.Sum64(),
		}, [2]float64{0, 1 / cfg.Sequence.IdealGain}) // the gain error, b1/G − 1, is reported too
		if err != nil {
			return analysis{}, fmt.Errorf("monte carlo: %w", err)
		}
		// The record's covariance is the Monte Carlo one; the analysis keeps
		// the law of propagation's for the results that are not evaluated
		// from the model values (temperature coefficients, coefficients, the
		// trim's prediction), which say "GUM".
		a.mc = run
		for j := range 2 {
			for k := range 2 {
				s.CovTotal[j][k] = run.Cov(j, k)
			}
		}
	}
	return a, nil
}

// lean is a without its Monte Carlo model values (up to 10⁶ trials of three
// outputs, 24 MB), for what later steps keep: only the fit step's own results
// are evaluated from them.
func (a analysis) lean() analysis {
	a.mc = nil
	return a
}

// mcDigits is n_dig, the significant digits of a standard uncertainty that the
// Monte Carlo results are made good to (JCGM 101 §7.9.2) and that the GUM
// result is validated at (§8.2): two, as U is stated (JCGM 100 §7.2.6).
const mcDigits = 2

// unc is the uncertainty of the fit result c + g·(b0, b1), whose standard
// uncertainty and dof by a.linear(g) are std and dof: u.Unc(std, dof) (U = k·u,
// k from νeff), unless the sequence's method is monte_carlo at metrology
// revision ≥ 1. Then it is the Monte Carlo coverage interval of that
// combination, evaluated trial by trial: u its standard deviation, U the larger
// distance from the value (the fit's estimate) to an end of the interval, so
// that value ± U holds the interval and a limit that judges with a symmetric U
// is at least as cautious as the interval; k = U/u; νeff the GUM's, for
// reference. The GUM interval (value ± k·u, k from νeff) is validated against
// it (JCGM 101 §8.2) and the result is recorded in Uncertainty.MC.
func (a analysis) unc(u *Unit, g [2]float64, c, std, dof float64) Uncertainty {
	if a.mc == nil {
		return u.Unc(std, dof)
	}
	value := c + g[0]*a.sum.Intercept + g[1]*a.sum.Slope
	gstd, gdof := a.gum.Linear(g)
	gum := u.Unc(math.Abs(gstd), gdof)
	m := a.mc.Linear(g[:], c)
	U := math.Max(value-m.Low, m.High-value)
	if !(m.Std > 0) || !(U > 0) {
		return gum
	}
	// The GUM interval is validated as computed, y ± k·u: the stated (rounded up)
	// U would move its end points by up to a tenth of U, far beyond δ.
	v := uncertainty.Validate(value, gum.Std, gum.K*gum.Std, m.Low, m.High, mcDigits)
	unc := u.IntervalUnc(m.Std, gum.DOF, U)
	unc.Method = "MC"
	unc.MC = &MCInterval{Low: m.Low, High: m.High, Interval: a.mc.Interval, Trials: a.mc.Trials,
		Adaptive: a.mc.Adaptive, Capped: a.mc.Adaptive && !a.mc.Converged,
		Delta:  uncertainty.NumericalTolerance(m.Std, mcDigits),
		GUMStd: gum.Std, GUMExpanded: gum.Expanded, DLow: v.DLow, DHigh: v.DHigh, GUMDelta: v.Tolerance, Validated: v.Validated}
	return unc
}

// block2 is the (b0, b1) block of a quadratic's covariance.
func block2(c [3][3]float64) [2][2]float64 {
	return [2][2]float64{{c[0][0], c[0][1]}, {c[1][0], c[1][1]}}
}

// linear is the standard uncertainty and effective dof of g[0]·b0 + g[1]·b1 of the
// fit, b0 and b1 being the output and the slope at zero stimulus.
func (a analysis) linear(g [2]float64) (u, dof float64) {
	if a.quad != nil {
		return a.quad.Linear([3]float64{g[0], g[1], 0})
	}
	return a.lf.Linear(g)
}

// cov is the covariance of (b0, b1) with every contribution.
func (a analysis) cov() [2][2]float64 {
	if a.quad != nil {
		return block2(a.quad.Cov)
	}
	return a.lf.Cov
}

// lackOfFit tests the fit against its points (uncertainty.LackOfFit): the F test
// against pure error where stimulus levels repeat, else χ²/ν against the points'
// own uncertainties; nil when neither can be made.
func lackOfFit(s uncertainty.Sweep, resid []float64, params int) *LackOfFit {
	u, err := s.PointU()
	if err != nil {
		return nil
	}
	fitted := make([]float64, len(s.Y))
	for i := range fitted {
		fitted[i] = s.Y[i] - resid[i]
	}
	lof, err := uncertainty.LackOfFit(s.X, s.Y, u, fitted, params)
	if err != nil {
		return nil
	}
	out := &LackOfFit{Method: "chi2/dof", Statistic: lof.Statistic, DOF1: float64(lof.DOF1), P: lof.P}
	if lof.Method == uncertainty.LOFF {
		out.Method, out.DOF2 = "F", float64(lof.DOF2)
	}
	return out
}

// pooledSD returns the pooled standard deviation of the points' readings and its
// degrees of freedom Σ(n_i − 1).
func pooledSD(ps []Point) (sd, dof float64) {
	var ss float64
	for _, p := range ps {
		if p.Valid > 1 {
			ss += p.SD * p.SD * float64(p.Valid-1)
			dof += float64(p.Valid - 1)
		}
	}
	if dof == 0 {
		return 0, 0
	}
	return math.Sqrt(ss / dof), dof
}

func firstBad(rs []instruments.Reading) string {
	for _, r := range rs {
		if !r.Valid() {
			if r.Flag == instruments.FlagNone {
				return fmt.Sprint(r.Value)
			}
			return r.Flag.String()
		}
	}
	return "no reading"
}

// pointErrorU is the standard uncertainty of one point's deviation from the ideal
// transfer: its Type A part (from the pooled SD with poolDOF degrees of freedom) and
// the meter and source specs at that point.
func pointErrorU(p Point, poolDOF float64) (u, dof float64) {
	return uncertainty.Combine([]uncertainty.Component{
		{Name: "repeatability", U: p.URandom, DOF: poolDOF, Kind: uncertainty.KindA},
		{Name: "specs", U: p.USys, DOF: math.Inf(1), Kind: uncertainty.KindB},
	})
}
