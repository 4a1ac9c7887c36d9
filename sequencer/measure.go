package sequencer

import (
	"fmt"
	"hash/fnv"
	"math"

	"trimline/instruments"
	"trimline/sequencer/uncertainty"
)

// analysis is one sweep's fit with its uncertainty.
type analysis struct {
	sum     FitSummary
	lf      uncertainty.LineFit
	sw      uncertainty.Sweep
	poolDOF float64 // degrees of freedom of the pooled standard deviation, Σ(n_i − 1)
}

// specs are the accuracy specifications of the sweep's meter and source.
func specs(st *Station, p SweepPlan) (meter, source uncertainty.Spec, resolution float64) {
	m := st.Instruments[p.Meter].Accuracy
	s := st.Instruments[p.Source].Accuracy
	return uncertainty.Spec{OfReading: m.OfReading, OfRange: m.OfRange, Range: m.Range},
		uncertainty.Spec{OfReading: s.OfReading, OfRange: s.OfRange, Range: s.Range}, m.Resolution
}

// annotate fills each point's Type A and Type B standard uncertainties. The Type A
// part uses the pooled standard deviation of the whole sweep (JCGM 100 §4.2.4: the
// noise of one unit on one range is one process, and a pooled estimate with
// Σ(n_i − 1) degrees of freedom is far better than eleven estimates from 8 readings
// each); weights then differ only where the number of readings does, and a chance
// small SD at one point cannot tilt the line.
func annotate(cfg Config, plan SweepPlan, sw *Sweep) {
	meter, source, res := specs(cfg.Station, plan)
	g := cfg.Sequence.IdealGain
	sp, _ := pooledSD(sw.Points)
	for i := range sw.Points {
		p := &sw.Points[i]
		if p.Valid > 1 {
			p.URandom = sp / math.Sqrt(float64(p.Valid))
		}
		if p.Valid > 0 {
			// Meter spec at the reading, half a count of resolution, and the
			// source spec at the stimulus seen through the ideal gain; each
			// rectangular (JCGM 100 §4.3.7).
			p.USys, _ = uncertainty.Combine([]uncertainty.Component{
				uncertainty.Rectangular("meter", meter.HalfWidth(p.Mean)),
				uncertainty.Resolution("resolution", res),
				uncertainty.Rectangular("source", math.Abs(g)*source.HalfWidth(p.Stimulus)),
			})
		}
	}
}

// analyse fits a straight line through the sweep's means with its uncertainty,
// including the correlated parts of the source and meter errors. Any point with an
// invalid reading (NaN, infinite, overload) makes the fit unusable, because a
// flagged reading must never contribute to a passing result.
func analyse(cfg Config, plan SweepPlan, sw Sweep, seed string) (analysis, error) {
	x := make([]float64, len(sw.Points))
	y := make([]float64, len(sw.Points))
	ur := make([]float64, len(sw.Points))
	dof := make([]float64, len(sw.Points))
	// One pooled estimate serves every point, so its Σ(n_i − 1) degrees of freedom
	// must be counted once: handing each of the N points ν/N makes the
	// Welch–Satterthwaite sum over equal contributions come back to ν.
	_, pooled := pooledSD(sw.Points)
	if pooled == 0 {
		pooled = math.Inf(1)
	}
	pdof := pooled / float64(len(sw.Points))
	for i, p := range sw.Points {
		if p.Valid != len(p.Readings) || len(p.Readings) == 0 {
			return analysis{}, fmt.Errorf("invalid reading (%s) at %s", firstBad(p.Readings), fmtV(p.Stimulus))
		}
		x[i], y[i], ur[i], dof[i] = p.Stimulus, p.Mean, p.URandom, pdof
	}
	meter, source, res := specs(cfg.Station, plan)
	us := uncertainty.Sweep{X: x, Y: y, URandom: ur, DOFRandom: dof, Meter: meter, MeterResolution: res, Source: source}
	lf, err := uncertainty.FitLine(us)
	if err != nil {
		return analysis{}, err
	}
	a := analysis{lf: lf, sw: us, poolDOF: pooled}
	s := &a.sum
	s.Sweep, s.Intercept, s.Slope = sw.Name, lf.B0, lf.B1
	s.Cov, s.CovTotal = lf.CovRandom, lf.Cov
	s.DOFEff = lf.DOFB0
	s.Residuals = lf.Residuals
	s.DOF = len(x) - 2
	var rss, maxAbs float64
	for _, r := range lf.Residuals {
		rss += r * r
		maxAbs = math.Max(maxAbs, math.Abs(r))
	}
	s.ResidualSD = math.Sqrt(rss / float64(s.DOF))
	s.Nonlinearity = maxAbs / cfg.Sequence.FullScale
	if cfg.Sequence.Uncertainty == "monte_carlo" {
		h := fnv.New64a()
		h.Write([]byte(seed + "/" + sw.Name))
		mc, err := uncertainty.MonteCarlo(us, cfg.Sequence.MCTrials, h.Sum64())
		if err != nil {
			return analysis{}, fmt.Errorf("monte carlo: %w", err)
		}
		s.CovTotal = mc.Cov
		a.lf.Cov = mc.Cov
	}
	return a, nil
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
