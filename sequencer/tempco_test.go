package sequencer_test

// The tempco step: temperature coefficients from fits at known temperatures
// (sweeps stamped by the test_soak/test_temp stand-ins of tempco_hooks_test.go),
// hand-worked and against gonum, written through coefDriver's registers.

import (
	"math"
	"strings"
	"testing"
	"time"

	"gonum.org/v1/gonum/stat"

	"trimline/instruments"
	"trimline/sequencer"
)

// tcSeq declares float32 offset_tc (µV/°C) and gain_tc (ppm/°C) coefficients
// and fits a room sweep (25 °C) and a hot one (85 °C).
const tcSeq = `sequence:
  product: BRX-200
  revision: C
  maker: Fenwright Labs
limits: brx200-limits.yaml
ideal: {gain: 200, offset: 2.5 V, full_scale: 4 V}
meter: {range: 10 V, nplc: 1}
coefficients:
  - name: tco
    adjusts: offset_tc
    format: float32
    unit: uV
    write: "CAL TCO {value}"
    read: "CAL TCO?"
  - name: tcg
    adjusts: gain_tc
    format: float32
    unit: ppm
    write: "CAL TCG {value}"
    read: "CAL TCG?"
steps:
  - kind: clear_trim
    name: clear trim
  - kind: test_soak
    name: room soak
    mean_c: 25
    sd_c: 0.2
    n: 4
  - kind: sweep
    name: room
    from: -10 mV
    to: 10 mV
    points: 5
    settle: 20 ms
    readings: 4
  - kind: test_temp
    name: stamp room
    sweep: room
    temp_c: 25
  - kind: fit
    name: room fit
    sweep: room
    results: {offset: raw_offset}
  - kind: test_soak
    name: hot soak
    mean_c: 85
    sd_c: 0.2
    n: 4
  - kind: sweep
    name: hot
    from: -10 mV
    to: 10 mV
    points: 5
    settle: 20 ms
    readings: 4
  - kind: test_temp
    name: stamp hot
    sweep: hot
    temp_c: 85
  - kind: fit
    name: hot fit
    sweep: hot
    results: {offset: hot_offset}
  - kind: tempco
    name: tempco
    fits: [room fit, hot fit]
    results: {offset_tc: tc_offset, gain_tc: tc_gain}
`

// tcWarm adds a warm sweep at 55 °C between room and hot, and fits all three.
func tcWarm(t *testing.T) string {
	warm := `  - kind: test_soak
    name: warm soak
    mean_c: 55
    sd_c: 0.2
    n: 4
  - kind: sweep
    name: warm
    from: -10 mV
    to: 10 mV
    points: 5
    settle: 20 ms
    readings: 4
  - kind: test_temp
    name: stamp warm
    sweep: warm
    temp_c: 55
  - kind: fit
    name: warm fit
    sweep: warm
    results: {offset: warm_offset}
`
	s := replaceAll(t, tcSeq, "  - kind: test_soak\n    name: hot soak\n", warm+"  - kind: test_soak\n    name: hot soak\n")
	return replaceAll(t, s, "fits: [room fit, hot fit]", "fits: [room fit, warm fit, hot fit]")
}

// tcSweep is a recorded sweep on the line y = c + s·x, the readings ±noise about
// it (so the fit has a Type A part).
func tcSweep(name string, c, s, noise float64) sequencer.Sweep {
	sw := sequencer.Sweep{Name: name}
	t0 := time.Date(2026, 1, 1, 0, 0, 0, 0, time.UTC)
	for _, x := range []float64{-10e-3, -5e-3, 0, 5e-3, 10e-3} {
		p := sequencer.Point{Stimulus: x}
		for _, d := range []float64{noise, -noise, noise, -noise} {
			p.Readings = append(p.Readings, instruments.Reading{Value: c + s*x + d, Time: t0})
		}
		sw.Points = append(sw.Points, p)
	}
	return sw
}

// tcReplay replays a record of the given sweeps through seq and returns it.
func tcReplay(t *testing.T, seq string, sweeps ...sequencer.Sweep) *sequencer.Record {
	t.Helper()
	_, cfg := coefBench(t, seq)
	rec := &sequencer.Record{Schema: 2, RunID: "R1", Serial: "BRX-00001", Verdict: sequencer.Pass, Sweeps: sweeps}
	out, err := sequencer.Replay(cfg, rec)
	if err != nil {
		t.Fatal(err)
	}
	return out
}

// Two fits, hand-worked: room (25 °C) intercept 2.5001 V, slope 200 (offset
// 0.1 mV, gain error 0); hot (85 °C) intercept 2.5007 V, slope 200.2 (offset
// 0.7 mV, gain error 0.2/200 = 0.001).
//
//	offset_tc = (0.7 − 0.1) mV / 60 °C = 10 µV/°C
//	gain_tc   = 0.001 / 60 °C = 16.6667 ppm/°C
//
// Uncertainty of a difference quotient b = (y₂ − y₁)/(T₂ − T₁), everything
// uncorrelated: u²(b) = (u²(y₁) + u²(y₂))/ΔT² + b²·(u²(T₁) + u²(T₂))/ΔT², with
// u(yᵢ) from each fit's CovTotal and u(T) = √((0.2/√4)² + (0.5/√3)²) °C (the
// soak's SDC/√n and the chamber uniformity); plus the float32 rounding
// (resolution/√12) of the value written.
func TestTempcoTwoFitsHandWorked(t *testing.T) {
	rec := tcReplay(t, tcSeq, tcSweep("room", 2.5001, 200, 2e-6), tcSweep("hot", 2.5007, 200.2, 2e-6))
	if len(rec.Fits) != 2 {
		t.Fatalf("fits %+v, reasons %v", rec.Fits, rec.Reasons)
	}
	uT := math.Sqrt(0.1*0.1 + 0.5*0.5/3)
	ws := coefWrites(rec, "tempco")
	if len(ws) != 2 || ws[0].Name != "tco" || ws[1].Name != "tcg" {
		t.Fatalf("tempco wrote %+v, want tco and tcg", ws)
	}
	for i, x := range []struct {
		result     string
		value      float64 // SI per °C
		unitSI     float64
		grad       [2]float64 // of the fit's (intercept, slope)
		y1, y2     float64
		wantIdeal  float64 // in the coefficient's unit
		wantAdjust string
	}{
		{"tc_offset", 10e-6, 1e-6, [2]float64{1, 0}, 0.1e-3, 0.7e-3, 10, sequencer.AdjustOffsetTC},
		{"tc_gain", 0.001 / 60, 1e-6, [2]float64{0, 1.0 / 200}, 0, 0.001, 16.666666666666667, sequencer.AdjustGainTC},
	} {
		w := ws[i]
		if w.Adjusts != x.wantAdjust || math.Abs(w.Ideal-x.wantIdeal) > 1e-6*x.wantIdeal {
			t.Errorf("%s: %+v, want ideal %.9g", w.Name, w, x.wantIdeal)
		}
		r := resultOf(t, rec, x.result)
		var u2 float64
		for _, f := range rec.Fits {
			c := f.CovTotal
			g := x.grad
			u2 += g[0]*g[0]*c[0][0] + 2*g[0]*g[1]*c[0][1] + g[1]*g[1]*c[1][1]
		}
		b := (x.y2 - x.y1) / 60
		u2 = u2/3600 + b*b*2*uT*uT/3600
		res := w.Resolution * x.unitSI
		want := math.Sqrt(u2 + res*res/12)
		if !r.Valid || math.Abs(r.Value-x.value) > 1e-6*x.value || math.Abs(r.Unc.Std-want) > 1e-6*want {
			t.Errorf("%s = %.9g ± %.6g, want %.9g ± %.6g", x.result, r.Value, r.Unc.Std, x.value, want)
		}
	}
}

// Three fits: offsets 0.1, 0.5 and 0.7 mV and slopes 200, 200.12 and 200.2
// at 25, 55 and 85 °C, each fit with its own noise (so the weights matter). The slope must be gonum's weighted
// regression (stat.LinearRegression with weights 1/u², u from each fit's
// CovTotal) of offset against temperature.
func TestTempcoThreeFitsAgainstGonum(t *testing.T) {
	rec := tcReplay(t, tcWarm(t), tcSweep("room", 2.5001, 200, 2e-6), tcSweep("warm", 2.5005, 200.12, 5e-6), tcSweep("hot", 2.5007, 200.2, 20e-6))
	if len(rec.Fits) != 3 {
		t.Fatalf("fits %+v, reasons %v", rec.Fits, rec.Reasons)
	}
	temps := map[string]float64{"room": 25, "warm": 55, "hot": 85}
	var x, y, w, yg, wg []float64
	for _, f := range rec.Fits {
		x = append(x, temps[f.Sweep])
		y = append(y, f.Intercept-2.5)
		w = append(w, 1/f.CovTotal[0][0])
		yg = append(yg, f.Slope/200-1)
		wg = append(wg, 1/(f.CovTotal[1][1]/(200*200)))
	}
	_, beta := stat.LinearRegression(x, y, w, false)
	_, betaG := stat.LinearRegression(x, yg, wg, false)
	if r := resultOf(t, rec, "tc_offset"); math.Abs(r.Value-beta) > 1e-6*math.Abs(beta) {
		t.Errorf("tc_offset %.9g, gonum weighted regression %.9g", r.Value, beta)
	}
	if r := resultOf(t, rec, "tc_gain"); math.Abs(r.Value-betaG) > 1e-6*math.Abs(betaG) {
		t.Errorf("tc_gain %.9g, gonum weighted regression %.9g", r.Value, betaG)
	}
	// The weights matter here: the unweighted line through the same points
	// differs.
	if _, flat := stat.LinearRegression(x, y, nil, false); math.Abs(flat-beta) < 1e-5*math.Abs(beta) {
		t.Errorf("weighted %.9g and unweighted %.9g slopes agree: the test does not exercise the weights", beta, flat)
	}
}

// TempcoLine with two points is the difference quotient, and its temperature
// sensitivity is −b/ΔT per temperature (hand-worked: b = 0.6e-3/60 = 1e-5,
// u(y) = 0 so u(b) = |b|/60·√2·u(T) with u(T) = 0.3 → 7.0711e-8).
func TestTempcoLineTwoPoints(t *testing.T) {
	b, u, _, err := sequencer.TempcoLine([]sequencer.TempcoPoint{
		{T: 25, UT: 0.3, Y: 0.1e-3, UY: 0, Source: "a"},
		{T: 85, UT: 0.3, Y: 0.7e-3, UY: 0, Source: "b"},
	})
	if err != nil || math.Abs(b-1e-5) > 1e-15 || math.Abs(u-7.0710678e-8) > 1e-14 {
		t.Errorf("TempcoLine = %g ± %g (%v), want 1e-5 ± 7.0711e-8", b, u, err)
	}
	if _, _, _, err := sequencer.TempcoLine([]sequencer.TempcoPoint{{T: 25, UY: 1}, {T: 25, UY: 1}}); err == nil || !strings.Contains(err.Error(), "different temperatures") {
		t.Errorf("equal temperatures: %v, want an error", err)
	}
}

// On the bench: clear_trim writes 0 to both tc coefficients, tempco writes the
// computed words through the port and reads them back; the record replays.
func TestTempcoOnTheBench(t *testing.T) {
	e, cfg := coefBench(t, tcSeq)
	rec := runReplayed(t, e, cfg, "BRX-00001")
	if rec.Verdict != sequencer.Pass {
		t.Fatalf("verdict %s %v %s", rec.Verdict, rec.Reasons, rec.Fault)
	}
	cl := coefWrites(rec, "clear trim")
	if len(cl) != 2 || cl[0].Text == "" || cl[0].Value != 0 || cl[1].Value != 0 || !cl[0].Match || !cl[1].Match {
		t.Errorf("clear trim wrote %+v, want 0 to tco and tcg, read back", cl)
	}
	ws := coefWrites(rec, "tempco")
	if len(ws) != 2 || !ws[0].Written || !ws[0].Match || !ws[1].Written || !ws[1].Match {
		t.Fatalf("tempco wrote %+v, want both written and read back", ws)
	}
	coefPort.Lock()
	regs := coefPort.regs
	coefPort.Unlock()
	if regs["TCO"] != ws[0].Text || regs["TCG"] != ws[1].Text {
		t.Errorf("the unit holds %v, the record says %q and %q", regs, ws[0].Text, ws[1].Text)
	}
	if ws[0].Unit != "uV/°C" || ws[1].Unit != "ppm/°C" {
		t.Errorf("units %q and %q, want uV/°C and ppm/°C", ws[0].Unit, ws[1].Unit)
	}
	if r := resultOf(t, rec, "tc_offset"); !r.Valid || r.Value != float64(ws[0].Value)*1e-6 {
		t.Errorf("tc_offset %+v, want the written %g µV/°C", r, ws[0].Value)
	}
}

// A read-back that differs fails the unit, as for the coefficients step.
func TestTempcoReadbackMismatchFails(t *testing.T) {
	e, _ := coefBench(t, tcSeq)
	coefPort.Lock()
	coefPort.skew = map[string]string{"TCO": "123"}
	coefPort.Unlock()
	rec := e.Run(t.Context(), "BRX-00002")
	if rec.Verdict != sequencer.Fail || !strings.Contains(strings.Join(rec.Reasons, "\n"), "coefficient tco read back \"123\"") {
		t.Errorf("verdict %s %v %s, want FAIL naming tco's read-back", rec.Verdict, rec.Reasons, rec.Fault)
	}
}

// A sweep whose temperature was never known fails the unit (no fault), saying
// which fit.
func TestTempcoUnknownTemperatureFails(t *testing.T) {
	seq := replaceAll(t, tcSeq, "  - kind: test_temp\n    name: stamp hot\n    sweep: hot\n    temp_c: 85\n", "")
	rec := tcReplay(t, seq, tcSweep("room", 2.5001, 200, 2e-6), tcSweep("hot", 2.5007, 200.2, 2e-6))
	if rec.Verdict != sequencer.Fail || rec.Fault != "" || !strings.Contains(strings.Join(rec.Reasons, "\n"), `no known temperature for fit "hot fit" (sweep "hot")`) {
		t.Errorf("verdict %s %q %q, want FAIL for hot fit's temperature", rec.Verdict, rec.Reasons, rec.Fault)
	}
	if r := resultOf(t, rec, "tc_offset"); r.Valid {
		t.Errorf("tc_offset %+v, want invalid", r)
	}
}

// Load errors are refused at their line.
func TestTempcoLoadErrors(t *testing.T) {
	noSoak := "  - kind: test_soak\n    name: hot soak\n    mean_c: 85\n    sd_c: 0.2\n    n: 4\n"
	for _, c := range []struct {
		old, new string
		at, msg  string
	}{
		{"fits: [room fit, hot fit]", "fits: [room fit]", "fits: [room fit]", "expected two or more fits"},
		{"fits: [room fit, hot fit]", "fits: [room fit, room fit]", "fits: [room fit, room fit]", "as fits[0] is"},
		{noSoak, "", "fits: [room fit, hot fit]", "made at the temperature of soak \"room soak\""},
		{"unit: uV", "unit: uV/degC", "unit: uV/degC", "meaning per °C"},
		{"unit: ppm", "unit: mV", "unit: mV", "expected ppm, ppb or %"},
		{"results: {offset_tc: tc_offset, gain_tc: tc_gain}", "results: {offset_tc: tc_offset, drift: x}", "results: {offset_tc: tc_offset, drift: x}", `unknown tempco result "drift"`},
		{"fits: [room fit, hot fit]", "fits: [room fit, hot]", "fits: [room fit, hot]", "expected a fit step"},
	} {
		seq := replaceAll(t, tcSeq, c.old, c.new)
		_, err := sequencer.ParseSequence("tc.yaml", []byte(seq), demoReader(t, map[string]string{"brx200-limits.yaml": withLimits(t, coefLimits)}))
		wantErrorAt(t, err, "tc.yaml", seq, c.at, c.msg)
	}
	// A fit of a sweep no soak precedes.
	seq := replaceAll(t, tcSeq, "  - kind: test_soak\n    name: room soak\n    mean_c: 25\n    sd_c: 0.2\n    n: 4\n", "")
	_, err := sequencer.ParseSequence("tc.yaml", []byte(seq), demoReader(t, map[string]string{"brx200-limits.yaml": withLimits(t, coefLimits)}))
	wantErrorAt(t, err, "tc.yaml", seq, "fits: [room fit, hot fit]", "which no soak step precedes")
}

// On paper every fit is the ideal line at its stamped temperature: both
// coefficients are 0, with the fits' uncertainty propagated (not zero).
func TestTempcoPredicted(t *testing.T) {
	_, cfg := coefBench(t, tcSeq)
	got := sequencer.PredictUncertainty(cfg.Station, cfg.Sequence)
	o, g := got["tc_offset"], got["tc_gain"]
	if o.V != 0 || g.V != 0 || !(o.Std > 0) || !(g.Std > 0) {
		t.Errorf("predicted tc_offset %+v, tc_gain %+v: want 0 with an uncertainty", o, g)
	}
}

// Replay takes each sweep's temperature from the record (no stamping step):
// the hand-worked 10 µV/°C of TestTempcoTwoFitsHandWorked again.
func TestTempcoReplayTakesRecordedTemperatures(t *testing.T) {
	seq := replaceAll(t, tcSeq, "  - kind: test_temp\n    name: stamp hot\n    sweep: hot\n    temp_c: 85\n", "")
	seq = replaceAll(t, seq, "  - kind: test_temp\n    name: stamp room\n    sweep: room\n    temp_c: 25\n", "")
	room, hot := tcSweep("room", 2.5001, 200, 2e-6), tcSweep("hot", 2.5007, 200.2, 2e-6)
	room.TempC, room.TempKnown = 25, true
	hot.TempC, hot.TempKnown = 85, true
	rec := tcReplay(t, seq, room, hot)
	if r := resultOf(t, rec, "tc_offset"); !r.Valid || math.Abs(r.Value-10e-6) > 1e-11 {
		t.Errorf("tc_offset %+v (reasons %v), want 10 µV/°C", r, rec.Reasons)
	}
	if len(rec.Sweeps) != 2 || rec.Sweeps[1].TempC != 85 || !rec.Sweeps[1].TempKnown {
		t.Errorf("replayed sweeps %+v, want the recorded temperatures kept", rec.Sweeps)
	}
}

// A unit with a gain error: room (25 °C) slope 201 (+0.5 %), hot (85 °C) slope
// 201·1.001 = 201.201, intercepts 2.5001 and 2.5007 V as above. The gain TC is
// relative to the unit's own slope at the reference, the room fit's:
//
//	gain_tc   = (201.201/201 − 1)/60 °C = 0.001/60 = 16.6667 ppm/°C
//
// (dividing by G = 200 would give 0.001005/60 = 16.75 ppm/°C), and the offset
// drift is referred to the trimmed unit, whose slope is G:
//
//	offset_tc = (0.7 − 0.1) mV·(200/201)/60 °C = 9.950249 µV/°C
func TestTempcoRelativeToOwnSlope(t *testing.T) {
	rec := tcReplay(t, tcSeq, tcSweep("room", 2.5001, 201, 2e-6), tcSweep("hot", 2.5007, 201.201, 2e-6))
	ws := coefWrites(rec, "tempco")
	if len(ws) != 2 {
		t.Fatalf("tempco wrote %+v, reasons %v", ws, rec.Reasons)
	}
	for i, want := range []float64{9.950248756, 16.666666667} {
		if math.Abs(ws[i].Ideal-want) > 1e-6*want {
			t.Errorf("%s ideal %.9g, want %.9g", ws[i].Name, ws[i].Ideal, want)
		}
	}
}
