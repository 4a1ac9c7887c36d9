package sequencer_test

// The measurands a fit names: the best-fit-line offset and the terminal offset
// at zero input, the lack of fit, and the line's uncertainty from its
// residuals (JCGM 100 H.3).

import (
	"math"
	"strings"
	"testing"

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
	// The terminal offset is the point's mean less the ideal 2.5 V, its u that
	// point's Type A and Type B parts in quadrature (JCGM 100 §5.1.2, independent
	// inputs), its dof by Welch–Satterthwaite with the pooled SD's Σ(n_i − 1) =
	// 11·7 = 77 and infinite for the specs (JCGM 100 G.4.1).
	p := pointAt(t, rec, "verify", 0)
	if want := p.Mean - 2.5; term.Value != want {
		t.Errorf("terminal offset %g, want mean at 0 V − 2.5 V = %g", term.Value, want)
	}
	u := math.Hypot(p.URandom, p.USys)
	if math.Abs(term.Unc.Std-u) > 1e-12*u {
		t.Errorf("u(terminal offset) = %g, want %g", term.Unc.Std, u)
	}
	if dof := 77 * math.Pow(u/p.URandom, 4); math.Abs(term.Unc.DOF-dof) > 1e-6*dof {
		t.Errorf("dof = %g, want %g", term.Unc.DOF, dof)
	}
	// The two differ by far more than the trim's resolution: the step at 3 mV
	// moves the line but not the output at 0 V.
	f := fitOf(t, rec, "verify fit")
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
