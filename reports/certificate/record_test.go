package certificate_test

import (
	"fmt"
	"math"
	"math/rand/v2"
	"time"

	"trimline/instruments"
	"trimline/limits"
	"trimline/sequencer"
)

// Ideal transfer of the sample product: a bridge amplifier with a gain of 100 and
// its output centred on 2.5 V, driven from -20 mV to +20 mV.
const (
	idealGain   = 100.0
	idealOffset = 2.5
	fullScale   = 4.0
)

var t0 = time.Date(2026, 3, 14, 9, 41, 7, 0, time.UTC)

// sweep builds an 11-point sweep with n readings per point. The unit's output is
// gain·x + offset + bow·(x/xmax)² - bow/3 plus Gaussian noise of sd volts.
func sweep(name string, rng *rand.Rand, start time.Time, gain, offset, bow, sd float64, n int) sequencer.Sweep {
	s := sequencer.Sweep{Name: name}
	at := start
	for i := range 11 {
		x := -0.020 + 0.004*float64(i)
		u := x / 0.020
		truth := gain*x + offset + bow*(u*u-1.0/3)
		p := sequencer.Point{Stimulus: x}
		sum := 0.0
		for range n {
			at = at.Add(100 * time.Millisecond)
			v := truth + sd*rng.NormFloat64()
			p.Readings = append(p.Readings, instruments.Reading{Value: v, Time: at})
			sum += v
		}
		p.Valid = n
		p.Mean = sum / float64(n)
		ss := 0.0
		for _, r := range p.Readings {
			ss += (r.Value - p.Mean) * (r.Value - p.Mean)
		}
		p.SD = math.Sqrt(ss / float64(n-1))
		s.Points = append(s.Points, p)
		at = at.Add(400 * time.Millisecond)
	}
	return s
}

// fitSweep is an ordinary least-squares line through a sweep's means.
func fitSweep(s sequencer.Sweep) sequencer.FitSummary {
	var sx, sy, sxx, sxy float64
	n := float64(len(s.Points))
	for _, p := range s.Points {
		sx += p.Stimulus
		sy += p.Mean
		sxx += p.Stimulus * p.Stimulus
		sxy += p.Stimulus * p.Mean
	}
	slope := (n*sxy - sx*sy) / (n*sxx - sx*sx)
	icpt := (sy - slope*sx) / n
	f := sequencer.FitSummary{Sweep: s.Name, Slope: slope, Intercept: icpt, DOF: len(s.Points) - 2}
	ss, worst := 0.0, 0.0
	for _, p := range s.Points {
		r := p.Mean - (icpt + slope*p.Stimulus)
		f.Residuals = append(f.Residuals, r)
		ss += r * r
		worst = math.Max(worst, math.Abs(r))
	}
	f.ResidualSD = math.Sqrt(ss / float64(f.DOF))
	f.Nonlinearity = worst / fullScale
	v := f.ResidualSD * f.ResidualSD
	f.Cov = [2][2]float64{{v * sxx / (n*sxx - sx*sx), -v * sx / (n*sxx - sx*sx)}, {-v * sx / (n*sxx - sx*sx), v * n / (n*sxx - sx*sx)}}
	return f
}

// unc is an uncertainty with U = k·u.
func unc(u, dof, k float64, method string) sequencer.Uncertainty {
	return sequencer.Uncertainty{Std: u, DOF: dof, K: k, Expanded: k * u, Method: method}
}

func ptr(v float64) *float64 { return &v }

// normCDF is the standard normal distribution function.
func normCDF(z float64) float64 { return 0.5 * math.Erfc(-z/math.Sqrt2) }

// decide evaluates a toleranced limit the way the limits package does
// (ILAC-G8:09/2019): acceptance limits AL = TL ∓ w with w = r·U for the guarded
// rule, the zone of the value, the probability that the true value (normal, mean
// v, sd u) lies outside the tolerance, and TUR = (upper − lower)/(2U). A TUR below
// 4:1 (common practice) is flagged low. As in the limits package, the decision's
// dof is math.Inf(1) for infinite.
func decide(result string, v float64, lo, hi *float64, rule string, r float64, binary bool, u, k, dof float64) *limits.Decision {
	U := k * u
	d := &limits.Decision{Result: result, Lower: lo, Upper: hi, Rule: rule, Value: v, Std: u, U: U, K: k, DOF: limits.DegreesOfFreedom(dof), Binary: binary}
	if rule == "guarded" {
		d.GuardFactor, d.Guard = r, r*U
	}
	w := d.Guard
	inside, accept, near := true, true, true
	if lo != nil {
		d.AcceptLower = ptr(*lo + w)
		inside, accept, near = inside && v >= *lo, accept && v >= *lo+w, near && v >= *lo-w
		d.POutside += normCDF((*lo - v) / u)
	}
	if hi != nil {
		d.AcceptUpper = ptr(*hi - w)
		inside, accept, near = inside && v <= *hi, accept && v <= *hi-w, near && v <= *hi+w
		d.POutside += 1 - normCDF((*hi-v)/u)
	}
	switch {
	case accept:
		d.Zone = limits.ZonePass
	case inside && !binary:
		d.Zone = limits.ZoneConditionalPass
	case !inside && near && !binary:
		d.Zone = limits.ZoneConditionalFail
	default:
		d.Zone = limits.ZoneFail
	}
	if lo != nil && hi != nil {
		d.TUR = (*hi - *lo) / (2 * U)
		d.TURLow = d.TUR < 4
	}
	how := "simple acceptance (w = 0)"
	if rule == "guarded" {
		how = fmt.Sprintf("guarded acceptance, w = %g·U = %.3g", r, w)
	}
	d.Statement = fmt.Sprintf("Judged by %s, %s statement: the measured value %.4g with U = %.2g (k = %.2f) lies in the %s zone; "+
		"probability that the true value is outside the tolerance %.2g.", how, map[bool]string{true: "binary", false: "non-binary"}[binary],
		v, U, k, d.Zone, d.POutside)
	return d
}

// sampleRecord is a realistic FAIL record: trimmed well, but its post-trim
// nonlinearity is just above the limit. Three limits are toleranced: post_offset
// and post_gain by guarded acceptance with a non-binary statement (post_offset with
// a low TUR, post_gain in the conditional-pass zone, which this limit file's policy
// ships: conditional_pass: ship), post_noise by simple acceptance against a
// one-sided tolerance. The others are expressions.
func sampleRecord() *sequencer.Record {
	rng := rand.New(rand.NewPCG(7, 11))
	pre := sweep("pre-trim", rng, t0.Add(3*time.Second), idealGain*1.0081, idealOffset+3.214e-3, 0.42e-3, 2.1e-6, 8)
	post := sweep("verify", rng, t0.Add(26*time.Second), idealGain*(1+17.9e-6), idealOffset-4.2e-6, 18e-6, 1.8e-6, 8)
	fPre, fPost := fitSweep(pre), fitSweep(post)

	preOffset := fPre.Intercept - idealOffset
	preGainErr := fPre.Slope/idealGain - 1
	postOffset := fPost.Intercept - idealOffset
	postGainErr := fPost.Slope/idealGain - 1
	postMax := 0.0
	for _, p := range post.Points {
		postMax = math.Max(postMax, math.Abs(p.Mean-(idealGain*p.Stimulus+idealOffset)))
	}

	inf := math.Inf(1)
	results := []sequencer.Result{
		{Name: "pre_offset", Value: preOffset, Unit: "V", Valid: true, Unc: unc(6.6e-6, inf, 2, "GUM")},
		{Name: "pre_gain_error", Value: preGainErr, Unit: "ratio", Valid: true, Unc: unc(1.4e-6, 30, 2.09, "GUM")},
		{Name: "pre_nonlinearity", Value: fPre.Nonlinearity, Unit: "ratio", Valid: true, Unc: unc(0.21e-6, 9, 2.32, "GUM")},
		{Name: "post_offset", Value: postOffset, Unit: "V", Valid: true, Unc: unc(6.5e-6, inf, 2, "GUM")},
		{Name: "post_gain_error", Value: postGainErr, Unit: "ratio", Valid: true, Unc: unc(1.3e-6, 24, 2.11, "MC")},
		{Name: "post_nonlinearity", Value: fPost.Nonlinearity, Unit: "ratio", Valid: true, Unc: unc(0.2e-6, 9, 2.32, "GUM")},
		{Name: "post_noise", Value: fPost.ResidualSD, Unit: "V", Valid: true, Unc: unc(0.45e-6, 9, 2.32, "GUM")},
		{Name: "post_max_error", Value: postMax, Unit: "V", Valid: true, Unc: unc(6.6e-6, inf, 2, "GUM")},
		{Name: "offset_code", Value: 1873, Unit: "code", Valid: true},
		{Name: "gain_code", Value: 2405, Unit: "code", Valid: true},
		{Name: "pre_noise", Value: fPre.ResidualSD, Unit: "V", Valid: true, Unc: unc(9e-6, 9, 2.32, "GUM")},
		{Name: "post_drift", Value: math.NaN(), Unit: "V", Valid: false, Note: "not measured: one verify sweep only"},
	}
	// lim is a one-result limit "[abs(]name[)] <= max" in unit, judged here the way
	// the limits package would.
	lim := func(name, desc, result, unit string, scale, max float64, abs bool) limits.Outcome {
		v := 0.0
		for _, r := range results {
			if r.Name == result {
				v = r.Value * scale
			}
		}
		expr := fmt.Sprintf("%s <= %g", result, max)
		m := v
		if abs {
			expr = fmt.Sprintf("abs(%s) <= %g", result, max)
			m = math.Abs(v)
		}
		o := limits.Outcome{Name: name, Description: desc, Expr: expr, Unit: unit, Uses: []string{result},
			Values: map[string]float64{result: v}, Pass: m <= max}
		if !o.Pass {
			o.Reason = fmt.Sprintf("%s = %.3g %s is above %g %s", result, v, dispUnit(unit), max, dispUnit(unit))
		}
		return o
	}
	// tol is a toleranced limit judged by decide; the value and u are scaled into
	// the limit's unit.
	tol := func(name, desc, result, unit string, scale float64, lo, hi *float64, rule string, binary bool) limits.Outcome {
		o := lim(name, desc, result, unit, scale, *hi, lo != nil)
		var r sequencer.Result
		for _, x := range results {
			if x.Name == result {
				r = x
			}
		}
		d := decide(result, o.Values[result], lo, hi, rule, 1, binary, r.Unc.Std*scale, r.Unc.K, r.Unc.DOF)
		o.Decision = d
		o.Pass = d.Zone == limits.ZonePass || d.Zone == limits.ZoneConditionalPass && !binary // conditional_pass: ship
		o.Reason = ""
		if !o.Pass {
			o.Reason = fmt.Sprintf("%s is in the %s zone", result, d.Zone)
		}
		return o
	}
	outcomes := []limits.Outcome{
		lim("pre_offset_in_range", "Untrimmed offset within the trim range", "pre_offset", "mV", 1e3, 25, true),
		lim("pre_gain_in_range", "Untrimmed gain error within the trim range", "pre_gain_error", "%", 100, 2, true),
		tol("post_offset", "Offset after trim", "post_offset", "uV", 1e6, ptr(-50), ptr(50), "guarded", false),
		tol("post_gain", "Gain error after trim", "post_gain_error", "ppm", 1e6, ptr(-20), ptr(20), "guarded", false),
		lim("post_linearity", "Nonlinearity after trim, of full scale", "post_nonlinearity", "ppm", 1e6, 2, false),
		tol("post_noise", "Residual scatter about the fitted line", "post_noise", "uV", 1e6, nil, ptr(10), "simple", true),
		lim("post_max_error", "Largest error of any verify point", "post_max_error", "uV", 1e6, 100, false),
		{Name: "codes_in_range", Description: "Trim codes clear of the DAC end stops",
			Expr: "offset_code >= 16 && offset_code <= 4079 && gain_code >= 16 && gain_code <= 4079", Unit: "code",
			Uses: []string{"offset_code", "gain_code"}, Values: map[string]float64{"gain_code": 2405, "offset_code": 1873}, Pass: true},
	}
	var reasons []string
	for _, o := range outcomes {
		if !o.Pass {
			reasons = append(reasons, "limit "+o.Name+" failed: "+o.Reason)
		}
	}
	verdict := sequencer.Pass
	if len(reasons) > 0 {
		verdict = sequencer.Fail
	}

	return &sequencer.Record{
		Schema:   sequencer.RecordSchema,
		RunID:    "01JQ7Z4K9V6T2M8R3X5C0B1N7D",
		Serial:   "BA7-2611-00437",
		Product:  "BA-7 strain-bridge amplifier, 350 Ω bridge input",
		Revision: "C",
		Station:  "EOL-TRIM-02",
		Operator: "op-117",
		Software: "trimline 0.9.3",
		Started:  t0,
		Finished: t0.Add(48*time.Second + 350*time.Millisecond),
		Files: []sequencer.FileRef{
			{Kind: "station", Name: "eol-trim-02.yaml", Title: "Trim station 2, bay B", SHA256: "3f5a1c9e0b7d24e8a6f1c3b5d7e9f0a2b4c6d8e0f1a3b5c7d9e1f3a5b7c9d1e3"},
			{Kind: "sequence", Name: "ba7-trim.yaml", Title: "BA-7 gain and offset trim", SHA256: "a0b1c2d3e4f5061728394a5b6c7d8e9f00112233445566778899aabbccddeeff"},
			{Kind: "limits", Name: "ba7-limits-rev4.yaml", Title: "BA-7 end-of-line limits, rev 4", SHA256: "9e107d9d372bb6826bd81d3542a419d6e277d4d731479571562b82f74494341f"},
		},
		Instruments: []sequencer.InstrumentRef{
			{Role: "source", Address: "tcp://10.20.0.31:5025", Asset: "EQ-0142", CalDue: "2026-09-30",
				Accuracy: "±(50 ppm of setting + 2 µV), 23 °C ± 5 °C",
				Identity: instruments.Identity{Maker: "Fictive Metrology", Model: "DCV-20", Serial: "FM20-55831", Firmware: "2.14"}},
			{Role: "meter", Address: "usbtmc:///dev/usbtmc0", Asset: "EQ-0097", CalDue: "2026-06-15",
				Accuracy: "±(30 ppm of reading + 4 ppm of range), 23 °C ± 5 °C",
				Identity: instruments.Identity{Maker: "Fictive Metrology", Model: "DMM-75", Serial: "FM75-10292", Firmware: "1.08.2"}},
			{Role: "dut", Address: "serial:///dev/ttyUSB0?baud=115200", Asset: "FX-BA7-03",
				CalDue: "", Identity: instruments.Identity{Maker: "bench", Model: "BA-7 trim port", Serial: "0", Firmware: "0"}},
		},
		IdealGain:   idealGain,
		IdealOffset: idealOffset,
		FullScale:   fullScale,
		Sweeps:      []sequencer.Sweep{pre, post},
		Fits:        []sequencer.FitSummary{fPre, fPost},
		Trims: []sequencer.TrimCode{
			{DAC: "offset", Before: 2048, Ideal: 1873.417, Code: 1873, Readback: 1873, Stored: true},
			{DAC: "gain", Before: 2048, Ideal: 2405.262, Code: 2405, Readback: 2405, Stored: true},
		},
		Conditions: sequencer.Conditions{AmbientC: 23.1, AmbientSource: "entered"},
		Coverage:   0.9545,
		Results:    results,
		Outcomes:   outcomes,
		Verdict:    verdict,
		Reasons:    reasons,
	}
}

// reviewRecord is sampleRecord with the nonlinearity passing, under a limit file
// whose policy sends a conditional pass to review (conditional_pass: review):
// nothing failed, but post_gain is a conditional pass, so it did not pass and the
// unit is held for review.
func reviewRecord() *sequencer.Record {
	r := passRecord()
	o := &r.Outcomes[3]
	o.Pass = false
	o.Reason = "post_gain_error = 17.89 ppm lies within the tolerance interval −20 … 20 ppm but outside the acceptance interval " +
		"−17.26 … 17.26 ppm: conditional pass, so review (conditional_pass: review)"
	r.Verdict = sequencer.Review
	r.Reasons = []string{"limit post_gain: " + o.Reason}
	return r
}

// oldRecord is sampleRecord as a ledger written before uncertainties were evaluated
// holds it: no uncertainty, no decisions, no coverage, no conditions.
func oldRecord() *sequencer.Record {
	r := sampleRecord()
	r.Coverage, r.Conditions = 0, sequencer.Conditions{}
	for i := range r.Results {
		r.Results[i].Unc = sequencer.Uncertainty{}
	}
	for i := range r.Outcomes {
		r.Outcomes[i].Decision = nil
	}
	return r
}

// passRecord is sampleRecord with every limit passing.
func passRecord() *sequencer.Record {
	r := sampleRecord()
	for i := range r.Outcomes {
		r.Outcomes[i].Pass = true
		r.Outcomes[i].Reason = ""
	}
	r.Verdict = sequencer.Pass
	r.Reasons = nil
	return r
}

// faultRecord is what the engine keeps when the meter stopped answering before the
// first sweep finished: no fits, no codes, no outcomes.
func faultRecord() *sequencer.Record {
	return &sequencer.Record{
		Schema:   sequencer.RecordSchema,
		RunID:    "01JQ7Z9Q0000000000000000FX",
		Serial:   "BA7-2611-00438",
		Product:  "BA-7 strain-bridge amplifier, 350 Ω bridge input",
		Station:  "EOL-TRIM-02",
		Started:  t0,
		Finished: t0.Add(5 * time.Second),
		Instruments: []sequencer.InstrumentRef{
			{Role: "meter", Address: "usbtmc:///dev/usbtmc0", Identity: instruments.Identity{Maker: "0", Model: "0", Serial: "0", Firmware: "0"}},
		},
		IdealGain:   idealGain,
		IdealOffset: idealOffset,
		Sweeps:      []sequencer.Sweep{{Name: "pre-trim"}},
		Verdict:     sequencer.Fault,
		Reasons:     []string{"meter: read timed out after 2 s"},
		Fault:       "meter: read timed out after 2 s",
	}
}

func dispUnit(u string) string {
	if u == "uV" {
		return "µV"
	}
	return u
}
