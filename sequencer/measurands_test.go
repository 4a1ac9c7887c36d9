package sequencer_test

// The measurands a fit names: the best-fit-line offset and the terminal offset
// at zero input, the lack of fit, and the line's uncertainty from its
// residuals (JCGM 100 H.3).

import (
	"math"
	"strings"
	"testing"

	"trimline/instruments/units"
	"trimline/sequencer"
	"trimline/sequencer/uncertainty"
)

const verifyFitMore = `      max_error: post_max_error
      noise: post_noise
      line_offset: post_line_offset
      terminal_offset: post_terminal_offset
      lack_of_fit: post_lof
      lack_of_fit_p: post_lof_p
`

// pointAt is the record's point of sweep at stimulus x.
func pointAt(t *testing.T, rec *sequencer.Record, sweep string, x float64) sequencer.Point {
	t.Helper()
	for _, sw := range rec.Sweeps {
		if sw.Name != sweep {
			continue
		}
		for _, p := range sw.Points {
			if p.Stimulus == x {
				return p
			}
		}
	}
	t.Fatalf("no point at %g in sweep %q", x, sweep)
	return sequencer.Point{}
}

func fitOf(t *testing.T, rec *sequencer.Record, step string) sequencer.FitSummary {
	t.Helper()
	for _, f := range rec.Fits {
		if f.Step == step {
			return f
		}
	}
	t.Fatalf("no fit %q", step)
	return sequencer.FitSummary{}
}

// On the demo card the input pair hands over at 3 mV (the simulator's
// crossover step, 300 µV at the output): the line through the sweep and the
// output at zero input are two measurands, and the fit gives each under its
// own name.
func TestTwoOffsets(t *testing.T) {
	seq := demoSteps(t, verifyFit, verifyFitMore)
	e, cfg := kindsBench{seq: seq, set: map[string]map[string]string{"dut": {"defect_rate": "0"}}}.open(t)
	rec := runReplayed(t, e, cfg, "BRX-00001")
	line, term := resultOf(t, rec, "post_offset"), resultOf(t, rec, "post_terminal_offset")
	if alias := resultOf(t, rec, "post_line_offset"); alias.Value != line.Value || alias.Unc != line.Unc || alias.Quantity != "offset" {
		t.Errorf("line_offset %+v is not offset %+v", alias, line)
	}
	if term.Quantity != "terminal_offset" || term.Step != "verify fit" {
		t.Errorf("terminal offset says quantity %q, step %q", term.Quantity, term.Step)
	}
	// The terminal offset is the output at a true zero input: the point's mean
	// less the ideal 2.5 V and less the slope's share of the stimulus the zero
	// check found the station delivers at a programmed 0 (b1·ô_s). Its u is that
	// point's Type A and Type B parts in quadrature (JCGM 100 §5.1.2, independent
	// inputs), with the check's Type A u in place of the source's offset spec;
	// its budget lists them, and their root sum of squares is that u (JCGM 100
	// §5.1.3, eq. (10)); its dof is Welch–Satterthwaite over them (JCGM 100
	// G.4.1), the pooled SD's Σ(n_i − 1) = 11·7 = 77 counted once.
	p := pointAt(t, rec, "verify", 0)
	f := fitOf(t, rec, "verify fit")
	if len(rec.Zeros) != 1 || !rec.Zeros[0].Applied || f.SourceZero != rec.Zeros[0].Name {
		t.Fatalf("the demo's zero check was not applied to the verify fit: %+v, fit's %q", rec.Zeros, f.SourceZero)
	}
	z := rec.Zeros[0]
	if want := p.Mean - f.Slope*z.Offset - 2.5; math.Abs(term.Value-want) > 1e-15 {
		t.Errorf("terminal offset %g, want mean at 0 V − b1·ô_s − 2.5 V = %g", term.Value, want)
	}
	var ss, den float64
	for _, r := range term.Budget {
		ss += r.U * r.U
		if !math.IsInf(r.DOF, 1) {
			den += math.Pow(r.U, 4) / r.DOF
		}
	}
	if len(term.Budget) != 4 || math.Abs(math.Sqrt(ss)-term.Unc.Std) > 1e-9*term.Unc.Std {
		t.Errorf("terminal offset budget %+v: √Σu² = %g, u = %g, want 4 rows", term.Budget, math.Sqrt(ss), term.Unc.Std)
	}
	src := term.Budget[len(term.Budget)-1]
	if src.Name != uncertainty.NameSourceOffset || src.Kind != uncertainty.KindA || src.InputU != z.Unc.Std {
		t.Errorf("source row %+v, want the zero check's u %g V, Type A", src, z.Unc.Std)
	}
	if dof := ss * ss / den; math.Abs(term.Unc.DOF-dof) > 1e-6*dof {
		t.Errorf("dof = %g, want %g", term.Unc.DOF, dof)
	}
	// The two differ by far more than the trim's resolution: the step at 3 mV
	// moves the line but not the output at 0 V.
	if line.Value != f.Intercept-2.5 || math.Abs(term.Value-line.Value) < 50e-6 {
		t.Errorf("line offset %g µV, terminal %g µV: the crossover unit should show them apart", line.Value*1e6, term.Value*1e6)
	}
	t.Logf("BRX-00001: best-fit-line offset %.1f µV, terminal offset %.1f µV ± %.1f µV", line.Value*1e6, term.Value*1e6, term.Unc.Expanded*1e6)

	// The lack of fit: its statistic and probability as results, and the model
	// judged at p < 0.01 (JCGM 100 §4.1.2).
	lof := f.LackOfFit
	if lof == nil || resultOf(t, rec, "post_lof").Value != lof.Statistic || resultOf(t, rec, "post_lof_p").Value != lof.P {
		t.Fatalf("lack of fit %+v, results %+v %+v", lof, resultOf(t, rec, "post_lof"), resultOf(t, rec, "post_lof_p"))
	}
	if adequate, judged := lof.Judged(); !judged || adequate || lof.Alpha != 0.01 {
		t.Errorf("χ²/ν = %.1f on %g dof, p = %g: want the model judged not adequate at α = 0.01, got %+v", lof.Statistic, lof.DOF1, lof.P, lof)
	}
}

// A limit judges the lack of fit like any result: the straight line fails it on
// the crossover unit and passes it on a unit without the step.
func TestLimitJudgesLackOfFit(t *testing.T) {
	seq := demoSteps(t, verifyFit, verifyFitMore)
	lim := withLimits(t, `  - name: straight line after trim
    description: The straight-line model describes the verify sweep.
    unit: ""
    uses: [post_lof]
    tolerance: {upper: 3}
  - name: straight line after trim, p
    description: The probability of so large a lack of fit from a straight line is 1 % or more.
    unit: "%"
    uses: [post_lof_p]
    tolerance: {lower: 1}
`)
	for _, c := range []struct {
		step string
		pass bool
	}{{"1.5uV", false}, {"0uV", true}} {
		e, cfg := kindsBench{seq: seq, lim: lim, set: map[string]map[string]string{"dut": {"defect_rate": "0", "crossover_step": c.step, "dnl": "0"}}}.open(t)
		rec := runReplayed(t, e, cfg, "BRX-00001")
		if len(rec.Outcomes) != 2 {
			t.Fatalf("outcomes %+v", rec.Outcomes)
		}
		lof := resultOf(t, rec, "post_lof")
		for _, o := range rec.Outcomes {
			if o.Pass != c.pass {
				t.Errorf("crossover step %s: χ²/ν = %.2f, p = %.3g: limit %q pass = %v, want %v (%s)", c.step, lof.Value, resultOf(t, rec, "post_lof_p").Value, o.Name, o.Pass, c.pass, o.Reason)
			}
		}
	}
}

// A sequence that asks for the terminal offset where no level is at zero input
// is refused at load, at the key, naming what it expects.
func TestTerminalOffsetNeedsZeroLevel(t *testing.T) {
	for _, c := range []struct{ name, seq, want string }{
		{"sweep", strings.Replace(demoSteps(t, verifyFit, verifyFitMore), "    from: -10 mV\n    to: 10 mV\n    points: 11\n    settle: 20 ms\n    readings: 8\n\n  - kind: fit\n    name: verify fit",
			"    from: -10 mV\n    to: 10 mV\n    points: 10\n    settle: 20 ms\n    readings: 8\n\n  - kind: fit\n    name: verify fit", 1),
			`the terminal offset is the output measured at zero input: expected a level of 0 V in sweep "verify" (-10 mV … 10 mV, 10 levels)`},
		{"window", demoSteps(t, verifyFit, verifyFit+`
  - kind: fit
    name: upper half
    sweep: verify
    window: {from: 2 mV, to: 10 mV}
    results: {terminal_offset: upper_terminal}
`), `the terminal offset is the output measured at zero input: expected a level of 0 V in the window 2 mV … 10 mV of sweep "verify"`},
	} {
		_, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(c.seq), demoReader(t, nil))
		if err == nil || !strings.Contains(err.Error(), c.want) || !strings.Contains(err.Error(), "brx200-sequence.yaml:") {
			t.Errorf("%s: error %v\nwant one with file:line:col containing %q", c.name, err, c.want)
		}
	}
}

// random: residuals takes the line's random part from the residual scatter
// (JCGM 100 H.3) and keeps the instruments' specs: on the crossover unit, where
// χ²/ν is far above 1, u(offset) grows; the line itself is the same (equal
// readings per point: the weighted and the ordinary least-squares lines agree).
func TestFitRandomResiduals(t *testing.T) {
	seq := demoSteps(t, verifyFit, verifyFit+`
  - kind: fit
    name: verify residuals
    sweep: verify
    random: residuals
    results: {offset: res_offset, gain_error: res_gain_error}
`)
	e, cfg := kindsBench{seq: seq, set: map[string]map[string]string{"dut": {"defect_rate": "0"}}}.open(t)
	rec := runReplayed(t, e, cfg, "BRX-00001")
	a, b := resultOf(t, rec, "post_offset"), resultOf(t, rec, "res_offset")
	if math.Abs(a.Value-b.Value) > 1e-12 {
		t.Errorf("offset by readings %g, by residuals %g: the same line", a.Value, b.Value)
	}
	f := fitOf(t, rec, "verify residuals")
	if f.Random != "residuals" || f.DOFEff < 9 {
		t.Errorf("fit %+v", f)
	}
	// Independent recomputation: the H.3 line through the record's points, plus
	// the systematic covariance of the readings' fit (the same line, so the
	// same sensitivities).
	var x, y []float64
	for _, sw := range rec.Sweeps {
		if sw.Name == "verify" {
			for _, p := range sw.Points {
				x, y = append(x, p.Stimulus), append(y, p.Mean)
			}
		}
	}
	ls, s, err := uncertainty.FitLineLS(x, y, 0)
	if err != nil {
		t.Fatal(err)
	}
	r := fitOf(t, rec, "verify fit")
	sys := r.CovTotal[0][0] - r.Cov[0][0]
	want := math.Sqrt(ls.Cov[0][0] + sys)
	if math.Abs(b.Unc.Std-want) > 1e-9*want {
		t.Errorf("u(offset) by residuals %g, want sqrt(s²(b0) + sys) = %g", b.Unc.Std, want)
	}
	if !(b.Unc.Std > a.Unc.Std) {
		t.Errorf("u by residuals %g ≤ u by readings %g, with s = %g", b.Unc.Std, a.Unc.Std, s)
	}
	t.Logf("u(offset): readings %.1f µV, residuals %.1f µV (s = %.1f µV, ν_eff %.0f)", a.Unc.Std*1e6, b.Unc.Std*1e6, s*1e6, b.Unc.DOF)
}

// The option is refused where it does not apply, at its key.
func TestFitRandomRefused(t *testing.T) {
	for _, c := range []struct{ add, want string }{
		{"    random: noise\n", `expected readings (the readings' pooled standard deviation) or residuals`},
		{"    random: residuals\n    order: 2\n", `random: residuals takes a straight line's uncertainty from its residuals (JCGM 100 H.3): use order 1`},
	} {
		seq := demoSteps(t, "    name: verify fit\n", "    name: verify fit\n"+c.add)
		_, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(seq), demoReader(t, nil))
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%q: error %v, want %q", c.add, err, c.want)
		}
	}
}

// offset: terminal trims the output measured at zero input to the ideal: on
// the crossover unit the verify sweep's output at 0 V lands within the offset
// DAC's half LSB (6.1 µV) and the noise of two means of 8 readings (20 µV
// rms each: 3·√2·20/√8 ≈ 30 µV) of 2.5 V, where the default trim leaves it
// about 114 µV off (the step's share of the line's intercept). DNL off: the
// DAC's own code errors are not what this checks.
func TestTrimToTerminalOffset(t *testing.T) {
	set := map[string]map[string]string{"dut": {"defect_rate": "0", "dnl": "0"}}
	run := func(seq string) *sequencer.Record {
		e, cfg := kindsBench{seq: seq, set: set}.open(t)
		return runReplayed(t, e, cfg, "BRX-00001")
	}
	line := run(demoSteps(t, verifyFit, verifyFitMore))
	term := run(demoSteps(t, verifyFit, verifyFitMore, "    pivot: 2.5 V", "    pivot: 2.5 V\n    offset: terminal"))
	for _, rec := range []*sequencer.Record{line, term} {
		if rec.Verdict != sequencer.Pass {
			t.Fatalf("verdict %s %v", rec.Verdict, rec.Reasons)
		}
	}
	lt, tt := resultOf(t, line, "post_terminal_offset").Value, resultOf(t, term, "post_terminal_offset").Value
	ll, tl := resultOf(t, line, "post_offset").Value, resultOf(t, term, "post_offset").Value
	t.Logf("trim to the line: line %.1f µV, terminal %.1f µV; trim to the terminal: line %.1f µV, terminal %.1f µV", ll*1e6, lt*1e6, tl*1e6, tt*1e6)
	if math.Abs(tt) > 36e-6 || math.Abs(ll) > 36e-6 {
		t.Errorf("the offset each trim aims at is %.1f µV (terminal) and %.1f µV (line) off, want within 36 µV", tt*1e6, ll*1e6)
	}
	if math.Abs(lt) < 60e-6 || math.Abs(tl) < 60e-6 {
		t.Errorf("the offset each trim does not aim at is %.1f µV and %.1f µV: the crossover should keep them apart", lt*1e6, tl*1e6)
	}
	if tc := trimOf(t, term, "offset"); tc.Offset != "terminal" || trimOf(t, line, "offset").Offset != "" || trimOf(t, term, "gain").Offset != "" {
		t.Errorf("the record should say the offset DAC was trimmed to the terminal offset: %+v", tc)
	}
	if trimOf(t, term, "gain").Code != trimOf(t, line, "gain").Code {
		t.Errorf("the gain code should not depend on the offset chosen")
	}
}

// The choice is refused where it cannot be made, at its key.
func TestTrimOffsetChoiceRefused(t *testing.T) {
	for _, c := range []struct{ seq, want string }{
		{demoSteps(t, "    pivot: 2.5 V", "    pivot: 2.5 V\n    offset: middle"), `expected line (the best-fit line's output at zero input) or terminal (the output measured at zero input), found "middle"`},
		{demoSteps(t, preSweep, `  - kind: sweep
    name: pre-trim
    levels: [-10 mV, -5 mV, 5 mV, 10 mV]
`, "    pivot: 2.5 V", "    pivot: 2.5 V\n    offset: terminal"), `offset: terminal trims the output measured at zero input: expected a level of 0 V in sweep "pre-trim" (-10 mV … 10 mV, 4 levels) (fit "pre-trim fit")`},
	} {
		_, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(c.seq), demoReader(t, nil))
		if err == nil || !strings.Contains(err.Error(), c.want) || !strings.Contains(err.Error(), "brx200-sequence.yaml:") {
			t.Errorf("error %v\nwant file:line:col and %q", err, c.want)
		}
	}
}

// The coefficients step solves its offset on the output measured at zero input
// when told to: m = Y0 − k·y0 with k = G/s (hand-derived from corrected =
// k·raw + m at raw = y0), against the record's own point and fit.
func TestCoefficientsToTerminalOffset(t *testing.T) {
	seq := strings.Replace(coefSeq, "    fit: raw fit\n", "    fit: raw fit\n    offset: terminal\n", 1)
	e, cfg := coefBench(t, seq)
	rec := runReplayed(t, e, cfg, "BRX-00001")
	if rec.Verdict != sequencer.Pass {
		t.Fatalf("verdict %s %v %s", rec.Verdict, rec.Reasons, rec.Fault)
	}
	fit := rec.Fits[0]
	y0 := pointAt(t, rec, "raw", 0).Mean
	k := cfg.Sequence.IdealGain / fit.Slope
	ws := coefWrites(rec, "correct")
	if len(ws) != 2 {
		t.Fatalf("writes %+v", ws)
	}
	if want := (cfg.Sequence.IdealOffset - k*y0) * 1e3; math.Abs(ws[1].Ideal-want) > 1e-12*math.Abs(want) {
		t.Errorf("offset coefficient %.9g mV, want %.9g mV (on the output at 0 V, not the intercept's %.9g mV)", ws[1].Ideal, want, (cfg.Sequence.IdealOffset-k*fit.Intercept)*1e3)
	}
	if ws[1].IdealU <= 0 {
		t.Errorf("offset coefficient without uncertainty: %+v", ws[1])
	}
}

// A terminal offset of a unit that reports counts is a count it reported, not
// a trim code.
func TestTerminalOffsetInCounts(t *testing.T) {
	if u := (sequencer.ResultDef{Dim: units.Count, Quantity: "terminal_offset"}).Unit(); u != "count" {
		t.Errorf("unit %q, want count", u)
	}
}
