package sequencer_test

import (
	"context"
	"fmt"
	"math"
	"strings"
	"testing"
	"time"

	"trimline/instruments"
	"trimline/instruments/sim"
	"trimline/instruments/sim/serve"
	"trimline/instruments/sim/simtest"
	"trimline/sequencer"
	"trimline/sequencer/uncertainty"
)

// zeroStep is the demo sequence's zero check, as the tests find it.
const zeroStep = `  - kind: zero_check             # the station's own zero`

// withoutZero is the demo sequence with its zero check taken out.
func withoutZero(t testing.TB) string {
	t.Helper()
	text := demoFile(t, "brx200-sequence.yaml")
	i := strings.Index(text, zeroStep)
	j := strings.Index(text, "  - kind: sweep                  # the unit as found")
	if i < 0 || j < i {
		t.Fatal("the demo sequence has no zero check before its pre-trim sweep")
	}
	return text[:i] + text[j:]
}

// demoWithoutZero is the demo sequence less its zero check, parsed.
func demoWithoutZero(t *testing.T) *sequencer.Sequence {
	t.Helper()
	seq, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(withoutZero(t)), demoReader(t, nil))
	if err != nil {
		t.Fatal(err)
	}
	return seq
}

// runDemo runs serial on the demo station with sequence text seqText.
func runDemo(t *testing.T, seqText, serial string) (sequencer.Config, *sequencer.Record) {
	t.Helper()
	return runOn(t, demoFile(t, "brx200-station.yaml"), seqText, serial)
}

// runOn runs serial on the station stText with sequence seqText.
func runOn(t *testing.T, stText, seqText, serial string) (sequencer.Config, *sequencer.Record) {
	t.Helper()
	st, err := sequencer.ParseStation("brx200-station.yaml", []byte(stText))
	if err != nil {
		t.Fatal(err)
	}
	seq, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(seqText), demoReader(t, nil))
	if err != nil {
		t.Fatal(err)
	}
	cfg := sequencer.Config{Station: st, Sequence: seq, Operator: "test", Software: "test"}
	e, err := sequencer.Open(context.Background(), cfg)
	if err != nil {
		t.Fatal(err)
	}
	defer e.Close()
	rec := e.Run(context.Background(), serial)
	if rec.Verdict == sequencer.Fault || rec.Verdict == sequencer.Aborted {
		t.Fatalf("verdict %s: %s", rec.Verdict, rec.Fault)
	}
	return cfg, rec
}

// simZero is what the demo bench's source really delivers at a programmed 0:
// its offset plus the wiring's thermal EMF, from a bench of the demo's seed.
func simZero(t *testing.T) float64 {
	t.Helper()
	b, err := sim.NewBench([]instruments.Spec{{Address: "sim://source", Settings: map[string]string{"seed": "8"}}})
	if err != nil {
		t.Fatal(err)
	}
	defer b.Close()
	_, o := b.Source().Errors()
	return o + b.Source().ThermalEMF()
}

// pinnedSource is the demo station with the simulated source's offset and the
// wiring's thermal EMF set: 0.4 µV + 0.25 µV at a programmed 0.
func pinnedSource(t *testing.T) string {
	t.Helper()
	st := demoFile(t, "brx200-station.yaml")
	const addr = "    address: sim://source       # sim:// now; serial://, tcp://, usbtmc:// for real benches\n"
	if !strings.Contains(st, addr) {
		t.Fatal("the demo station's source address line moved")
	}
	return strings.Replace(st, addr, addr+"    settings: {offset: 0.4uV, thermal_emf: 0.25uV}\n", 1)
}

// The zero check measures the offset the simulated source and wiring were given
// (0.65 µV at the input), within its uncertainty (|ô_s − o_s| ≤ 3u, common
// practice for a single comparison), and its result and record agree. Replaying
// the record reproduces it and every result exactly.
func TestZeroCheckMeasuresTheSimulatedOffset(t *testing.T) {
	cfg, rec := runOn(t, pinnedSource(t), demoFile(t, "brx200-sequence.yaml"), "BRX-00001")
	if len(rec.Zeros) != 1 {
		t.Fatalf("%d zero checks in the record, want 1", len(rec.Zeros))
	}
	z := rec.Zeros[0]
	truth := 0.65e-6
	t.Logf("ô_s = %.4g V (u %.3g V, ν %.0f), simulated %.4g V", z.Offset, z.Unc.Std, z.Unc.DOF, truth)
	if !z.Valid || len(z.Shorted) != 8 || len(z.AtZero) != 8 || z.Gain != 200 {
		t.Fatalf("zero check %+v: want 8 + 8 valid readings referred through the ideal gain 200", z)
	}
	if 5*z.Unc.Std > truth {
		t.Errorf("u(ô_s) = %g V: too large for the check to see 0.65 µV", z.Unc.Std)
	}
	if d := math.Abs(z.Offset - truth); d > 3*z.Unc.Std {
		t.Errorf("ô_s = %g V, simulated %g V: off by %g V, more than 3u = %g V", z.Offset, truth, d, 3*z.Unc.Std)
	}
	if r := resultOf(t, rec, "station_zero"); r.Value != z.Offset || r.Unc != z.Unc {
		t.Errorf("station_zero = %g ± %+v, the record's check says %g ± %+v", r.Value, r.Unc, z.Offset, z.Unc)
	}
	for _, f := range rec.Fits {
		if f.SourceZero != "station zero" {
			t.Errorf("fit %q applied zero check %q, want \"station zero\"", f.Step, f.SourceZero)
		}
	}
	again, err := sequencer.Replay(cfg, rec)
	if err != nil {
		t.Fatal(err)
	}
	if d := sequencer.Differences(rec, again); len(d) > 0 {
		t.Errorf("replay differs: %s", strings.Join(d, "; "))
	}
	if len(again.Zeros) != 1 || again.Zeros[0].Offset != z.Offset || again.Zeros[0].Unc != z.Unc {
		t.Errorf("replayed zero check %+v, recorded %+v", again.Zeros, rec.Zeros)
	}
}

// On the demo bench as drawn (seed 8), the zero checks of twelve units agree with
// the source's drawn offset plus the wiring's drawn thermal EMF: their mean lies
// within 3 standard errors of it (the standard error from the twelve values' own
// scatter, JCGM 100 §4.2.3), and that scatter agrees with the checks' stated u
// (ratio within 0.5 … 2, common practice for twelve values).
func TestZeroCheckFindsTheDemoBenchZero(t *testing.T) {
	st, err := sequencer.ParseStation("brx200-station.yaml", []byte(demoFile(t, "brx200-station.yaml")))
	if err != nil {
		t.Fatal(err)
	}
	seq, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(demoFile(t, "brx200-sequence.yaml")), demoReader(t, nil))
	if err != nil {
		t.Fatal(err)
	}
	e, err := sequencer.Open(context.Background(), sequencer.Config{Station: st, Sequence: seq, Operator: "test", Software: "test"})
	if err != nil {
		t.Fatal(err)
	}
	defer e.Close()
	var v []float64
	var su float64
	for i := range 12 {
		rec := e.Run(context.Background(), fmt.Sprintf("BRX-%05d", 101+i))
		if len(rec.Zeros) != 1 || !rec.Zeros[0].Valid {
			t.Fatalf("%s: zero checks %+v", rec.Serial, rec.Zeros)
		}
		v = append(v, rec.Zeros[0].Offset)
		su += rec.Zeros[0].Unc.Std / 12
	}
	var m, ss float64
	for _, x := range v {
		m += x / float64(len(v))
	}
	for _, x := range v {
		ss += (x - m) * (x - m)
	}
	sd := math.Sqrt(ss / float64(len(v)-1))
	truth := simZero(t)
	t.Logf("mean ô_s %.4g V (sd %.3g V, mean u %.3g V), drawn %.4g V", m, sd, su, truth)
	if se := sd / math.Sqrt(float64(len(v))); math.Abs(m-truth) > 3*se {
		t.Errorf("mean ô_s = %g V, the bench's zero %g V: off by %g V, more than 3 standard errors (%g V)", m, truth, m-truth, 3*se)
	}
	if r := sd / su; r < 0.5 || r > 2 {
		t.Errorf("scatter of ô_s %g V against its stated u %g V: ratio %.2f", sd, su, r)
	}
}

// With the zero check the post-trim offset's uncertainty loses the source's
// rectangular offset spec (5 ppm of 100 mV through the gain of 200: 57.7 µV
// standard, JCGM 100 §4.3.7) and gains the check's own Type A term (a few µV,
// JCGM 100 §4.2.3): u must fall by most of what that spec term contributes.
func TestZeroCheckShrinksThePostOffsetUncertainty(t *testing.T) {
	_, with := runDemo(t, demoFile(t, "brx200-sequence.yaml"), "BRX-00001")
	_, without := runDemo(t, withoutZero(t), "BRX-00001")
	a, b := resultOf(t, without, "post_offset").Unc, resultOf(t, with, "post_offset").Unc
	t.Logf("U(post_offset): %.4g V without the zero check, %.4g V with it (u %.4g → %.4g V)", a.Expanded, b.Expanded, a.Std, b.Std)
	spec := 200 * 5e-6 * 0.1 / math.Sqrt(3)
	z := with.Zeros[0].Unc.Std * 200
	want := math.Sqrt(a.Std*a.Std - spec*spec + z*z) // the other rows unchanged
	if math.Abs(b.Std-want) > 0.02*want {
		t.Errorf("u(post_offset) with the check = %.4g V, want √(u² − spec² + u_zero²) = %.4g V", b.Std, want)
	}
	for _, f := range without.Fits {
		if f.SourceZero != "" {
			t.Errorf("without a zero check fit %q says it applied %q", f.Step, f.SourceZero)
		}
	}
}

// A mistake in a zero check's keys is reported at its place, with the file's
// line and column: an unknown key, an unknown result, too few readings.
func TestZeroCheckKeysReportedAtTheirPlace(t *testing.T) {
	text := demoFile(t, "brx200-sequence.yaml")
	for _, c := range []struct {
		from, to, at, want string
		col                int
	}{
		{"    readings: 8                  # in each", "    readngs: 8\n    readings: 8                  # in each", "readngs", `unknown field "readngs"`, 5},
		{"      source_zero: station_zero", "      source_zero: station_zero\n      offset: zz", "offset: zz", `unknown zero_check result "offset"`, 15},
		{"    readings: 8                  # in each", "    readings: 1                  # in each", "readings: 1 ", "expected at least 2 readings in each state", 15},
	} {
		bad := strings.Replace(text, c.from, c.to, 1)
		_, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(bad), demoReader(t, nil))
		at := fmt.Sprintf("brx200-sequence.yaml:%d:%d: ", lineOf(t, bad, c.at), c.col)
		if err == nil || !strings.Contains(err.Error(), at+c.want) {
			t.Errorf("%s: want %q, got %v", c.at, at+c.want, err)
		}
	}
}

// Over the wire the zero check behaves as on the in-process bench: the generic
// SCPI source driver's output off (OUTP OFF) leaves the served DUT's input at a
// true zero, and at a programmed 0 with the output on the input is the source's
// offset plus the wiring's thermal EMF (0.4 µV + 0.25 µV). Hand-worked on the
// quiet bench (no noise): the card's gain 200·(1 − 2500 ppm) = 199.5 V/V makes
// the output differ by 129.675 µV, read to the meter's 1 µV, so ô_s =
// 129.675 µV/200 = 0.648 µV within 1 µV/200 = 5 nV; the source is left off at 0.
func TestZeroCheckOverTheWire(t *testing.T) {
	if testing.Short() {
		t.Skip("real-time run")
	}
	specs := simtest.QuietSpecs()
	specs[0].Settings["offset"], specs[0].Settings["thermal_emf"] = "0.4uV", "0.25uV"
	srv := simtest.ServeSpecs(t, specs, serve.Options{Transport: "tcp"})
	st, seq := wireFiles(t, srv, "")
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	defer cancel()
	e, err := sequencer.Open(ctx, sequencer.Config{Station: st, Sequence: seq, Operator: "test", Software: "test"})
	if err != nil {
		t.Fatal(err)
	}
	defer e.Close()
	rec := e.Run(ctx, "BRX-000126")
	if rec.Verdict == sequencer.Fault || len(rec.Zeros) != 1 {
		t.Fatalf("verdict %s (%s), %d zero checks", rec.Verdict, rec.Fault, len(rec.Zeros))
	}
	z := rec.Zeros[0]
	near(t, "ô_s over the wire", z.Offset, 129.675e-6/200, 5.1e-9)
	if on, lvl := srv.Bench().Source().State(); on || lvl != 0 {
		t.Errorf("source left on=%v at %g V", on, lvl)
	}
}

// A limit file may judge the station's zero like any result: a toleranced limit
// on station_zero (in µV at the input, ±1 µV: the source's 5 ppm of 100 mV plus
// a few hundred nV of thermal EMF) passes on the demo bench, with the check's
// own uncertainty, and fails on a bench whose wiring has 3 µV of thermal EMF.
func TestStationZeroJudgedByALimit(t *testing.T) {
	limitText := demoFile(t, "brx200-limits.yaml") + `
  - name: station zero
    description: What the station delivers at a programmed 0, at the input.
    unit: uV
    uses: [station_zero]
    tolerance: {lower: -1, upper: 1}
`
	for _, c := range []struct {
		station string
		pass    bool
	}{
		{demoFile(t, "brx200-station.yaml"), true},
		{strings.Replace(pinnedSource(t), "thermal_emf: 0.25uV", "thermal_emf: 3uV", 1), false},
	} {
		st, err := sequencer.ParseStation("brx200-station.yaml", []byte(c.station))
		if err != nil {
			t.Fatal(err)
		}
		seq, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(demoFile(t, "brx200-sequence.yaml")),
			demoReader(t, map[string]string{"brx200-limits.yaml": limitText}))
		if err != nil {
			t.Fatal(err)
		}
		e, err := sequencer.Open(context.Background(), sequencer.Config{Station: st, Sequence: seq, Operator: "test", Software: "test"})
		if err != nil {
			t.Fatal(err)
		}
		rec := e.Run(context.Background(), "BRX-00001")
		e.Close()
		found := false
		for _, o := range rec.Outcomes {
			if o.Name == "station zero" {
				found = true
				if o.Pass != c.pass {
					t.Errorf("station zero %g V judged pass=%v, want %v (%s)", resultOf(t, rec, "station_zero").Value, o.Pass, c.pass, o.Reason)
				}
			}
		}
		if !found {
			t.Error("no outcome for the station-zero limit")
		}
	}
}

// shorted_output is a reading of the unit's output, so its uncertainty carries
// the meter's spec at that reading (30 ppm of 2.5 V + 4 ppm of 10 V, rectangular:
// ≥ 45 µV standard, JCGM 100 §4.3.7), not the scatter alone.
func TestShortedOutputCarriesTheMeterSpec(t *testing.T) {
	text := strings.Replace(demoFile(t, "brx200-sequence.yaml"), "      source_zero: station_zero",
		"      source_zero: station_zero\n      shorted_output: shorted_output", 1)
	_, rec := runDemo(t, text, "BRX-00001")
	r := resultOf(t, rec, "shorted_output")
	spec := (30e-6*math.Abs(r.Value) + 4e-6*10) / math.Sqrt(3)
	if !r.Valid || r.Unc.Std < spec || r.Unc.Std > 1.2*spec {
		t.Errorf("shorted_output %g V, u %g V: want u just above the meter spec's %g V", r.Value, r.Unc.Std, spec)
	}
}

// An error the meter queues while the check reads at a programmed 0 (its second
// READ?) stops the run as a station fault that names the check's state, with the
// source output off and at 0 V, and nothing judged.
func TestZeroCheckFaultLeavesTheSourceOff(t *testing.T) {
	if testing.Short() {
		t.Skip("real-time run")
	}
	srv, e, ctx := wireEngine(t, "")
	srv.SetFault("meter", serve.Fault{ErrorAfter: "READ?", ErrorAt: 2, ErrorEntry: `-230,"Data corrupt or stale"`})
	rec := e.Run(ctx, "BRX-000127")
	if rec.Verdict != sequencer.Fault || !strings.Contains(rec.Fault, "station zero at a programmed 0 (source output on)") {
		t.Fatalf("verdict %s, fault %q: want a FAULT naming the check's state", rec.Verdict, rec.Fault)
	}
	if len(rec.Outcomes) != 0 || len(rec.Sweeps) != 0 {
		t.Errorf("after a fault in the zero check: %d outcomes, %d sweeps", len(rec.Outcomes), len(rec.Sweeps))
	}
	if on, lvl := srv.Bench().Source().State(); on || lvl != 0 {
		t.Errorf("source left on=%v at %g V", on, lvl)
	}
}

// A check read through a unit too noisy to resolve the zero does not move the
// trim by its noise: the fits do not correct their levels by it. But the spec it
// would have replaced does not bound the wiring's thermal EMFs, which the check
// also sees, so the fits' source-offset row keeps what the check could not rule
// out: the spec, the uncorrected zero and the check's own u in quadrature (JCGM
// 100 §5.1.2; an uncorrected known offset budgeted with its uncertainty is common
// practice), with Welch–Satterthwaite dof (JCGM 100 G.4.1).
func TestNoisyZeroCheckIsBudgetedNotApplied(t *testing.T) {
	_, rec := runDemo(t, demoFile(t, "brx200-sequence.yaml"), "BRX-00022")
	z := rec.Zeros[0]
	if want := 5e-6 * 0.1 / math.Sqrt(3); math.Abs(z.SpecU-want) > 1e-15 || z.Unc.Std <= want || z.Applied {
		t.Fatalf("zero check u %g V against the spec's %g V (want %g), applied=%v: want a check worse than the spec, not applied",
			z.Unc.Std, z.SpecU, want, z.Applied)
	}
	wantU, wantDOF := uncertainty.Combine([]uncertainty.Component{{U: z.SpecU, DOF: math.Inf(1)}, {U: math.Abs(z.Offset), DOF: math.Inf(1)}, {U: z.Unc.Std, DOF: z.Unc.DOF}})
	post := resultOf(t, rec, "post_offset")
	found := false
	for _, r := range post.Budget {
		if r.Name == uncertainty.NameSourceOffset {
			found = true
			if math.Abs(r.InputU-wantU) > 1e-12*wantU || math.Abs(r.DOF-wantDOF) > 1e-9*wantDOF || r.Kind != uncertainty.KindAB {
				t.Errorf("source offset row %+v, want u %g V with %g dof, Type A+B", r, wantU, wantDOF)
			}
		}
	}
	if !found {
		t.Error("post_offset has no source offset row")
	}
	// The levels are not corrected: the fit's stimulus is the programmed one.
	f := fitOf(t, rec, "verify fit")
	if p := pointAt(t, rec, "verify", 0); math.Abs(f.Intercept-(p.Mean-f.Residuals[5])) > 1e-12 {
		t.Errorf("the fit moved its levels: intercept %g, mean at 0 − residual %g", f.Intercept, p.Mean-f.Residuals[5])
	}
	_, ok := runDemo(t, demoFile(t, "brx200-sequence.yaml"), "BRX-00001")
	if !ok.Zeros[0].Applied {
		t.Errorf("BRX-00001's check (u %g V) was not applied", ok.Zeros[0].Unc.Std)
	}
}
