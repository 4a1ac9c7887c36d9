package sequencer_test

// A current stimulus on the simulated bench: sim://source in current mode
// driving a card whose input is a loop current across a 250 Ω shunt.

import (
	"context"
	"math"
	"strings"
	"testing"

	"trimline/sequencer"
)

// simLoopStation binds sim://source as a current source; dut is the card's
// settings (a YAML flow mapping) and maxVolts the compliance voltage cap.
func simLoopStation(dut, maxVolts string) string {
	return `station:
  id: TL7
  name: Simulated loop-receiver bench

instruments:
  source:
    kind: current_source
    address: sim://source
    asset: CAL-1
    cal_due: 2099-12-31
    accuracy: {of_reading: 20 ppm, of_range: 5 ppm, range: 25 mA}
    settings: {seed: 7, gain_error: 0 ppm, current_offset: 0 A, current_noise: 0 A}
  meter:
    kind: meter
    address: sim://meter
    asset: DMM-1
    cal_due: 2099-12-31
    accuracy: {of_reading: 30 ppm, of_range: 4 ppm, range: 10 V, resolution: 1 uV}
    settings: {noise: 0 V, gain_error: 0 ppm, offset: 0 V}
  dut:
    kind: dut_port
    address: sim://dut
    asset: FIX-1
    settings: ` + dut + `

safety:
  source_rating: {voltage: 30 V, current: 25 mA}
  max_source_voltage: ` + maxVolts + `
  max_source_current: 24 mA
`
}

// The card: input: current across 250 Ω, unity gain, no offset at zero, rails
// wide enough for 5 V, and every imperfection but a 0.2 % gain error and a
// 1 mV offset switched off; tau 0 so each level is settled at once.
const simLoopCard = `{input: current, input_resistance: 250 ohm, gain: 1, output_at_zero: 0 V, rail_low: -1 V, rail_high: 10 V,
      gain_error: 0.2 %, offset: 1 mV, noise: 0 V, tau: 0 s, crossover_step: 0 V, dnl: 0, defect: none, open_loop_gain: 0`

const simLoopSequence = `sequence:
  product: LR-250
  revision: A
limits: limits.yaml
requires: [source, meter, dut]
ideal:
  gain: 250 V/A
  offset: 0 V
meter:
  range: 10 V
steps:
  - kind: sweep
    name: loop
    from: 4 mA
    to: 20 mA
    points: 5
    settle: 1 ms
    readings: 2
  - kind: fit
    sweep: loop
    results: {offset: rx_offset, gain_error: rx_gain_error}
`

// simLoopCounts is the same card reporting its input as a count: 1600 count/mA
// (6400 count per volt across the shunt, an ADC step of 156.25 µV).
const simLoopCounts = `sequence:
  product: LR-250C
  revision: A
limits: limits.yaml
ideal:
  gain: 1600 count/mA
  offset: 0 count
steps:
  - kind: sweep
    name: loop
    from: 4 mA
    to: 20 mA
    points: 5
    settle: 1 ms
    readings: 2
    response: {port: dut, query: "MEAS?", resolution: 1 count}
  - kind: fit
    sweep: loop
    results: {offset: rx_offset, gain_error: rx_gain_error}
`

const simLoopCountLimits = `limit_set:
  name: LR-250C limits
  revision: "1"
  product: LR-250C
decision:
  coverage: 95.45 %
  rule: guarded
  guard_factor: 1
  statements: non-binary
  conditional_pass: review
  min_tur: 1
  tur_policy: warn
limits:
  - name: gain error
    description: Gain error, ±1 %.
    unit: "%"
    uses: [rx_gain_error]
    tolerance: {lower: -1, upper: 1}
`

func simLoopRun(t *testing.T, dut, maxVolts, sequence, limitsFile string) (*sequencer.Engine, *sequencer.Record) {
	t.Helper()
	st, err := sequencer.ParseStation("station.yaml", []byte(simLoopStation(dut+"}", maxVolts)))
	if err != nil {
		t.Fatal(err)
	}
	seq, err := sequencer.ParseSequence("seq.yaml", []byte(sequence), func(string) ([]byte, error) { return []byte(limitsFile), nil })
	if err != nil {
		t.Fatal(err)
	}
	e := openEngine(t, st, seq)
	return e, e.Run(context.Background(), "LR0100")
}

// Volts out: the fitted slope is the card's 250 Ω × 1.002 = 250.5 V/A and the
// intercept its 1 mV, to within the meter's 1 µV resolution (±0.5 µV on a
// 16 mA span: ±3e-5 V/A on the slope). The source ends off, at 0 A, in
// current mode with the station's voltage cap as its compliance.
func TestSimCurrentStimulusVoltsOut(t *testing.T) {
	e, rec := simLoopRun(t, simLoopCard, "12 V", simLoopSequence, receiverLimits)
	if rec.Verdict != sequencer.Pass {
		t.Fatalf("verdict %s, fault %q, reasons %v", rec.Verdict, rec.Fault, rec.Reasons)
	}
	f := rec.Fits[0]
	if math.Abs(f.Slope-250.5) > 1e-3 || math.Abs(f.Intercept-1e-3) > 5e-6 {
		t.Errorf("fit slope %.6g V/A intercept %.6g V, want 250.5 V/A and 1 mV", f.Slope, f.Intercept)
	}
	if r := resultOf(t, rec, "rx_gain_error"); math.Abs(r.Value-0.002) > 5e-6 {
		t.Errorf("gain error %g, want 0.002", r.Value)
	}
	src := simSource(t, e)
	if on, _ := src.State(); on {
		t.Error("source output left on")
	}
	if current, amps, limit := src.CurrentState(); !current || amps != 0 || limit != 12 {
		t.Errorf("source current mode %v at %g A, compliance %g V; want current mode at 0 A, 12 V", current, amps, limit)
	}
}

// The compliance voltage the engine programs is the one the bench obeys: with
// a 4 V cap, 20 mA cannot be driven through 250 Ω (5 V), and the top point
// reads the card's output at 4 V across its input: 1.002·4 V + 1 mV.
func TestSimCurrentStimulusComplianceHolds(t *testing.T) {
	_, rec := simLoopRun(t, simLoopCard, "4 V", simLoopSequence, receiverLimits)
	pts := rec.Sweeps[0].Points
	if len(pts) != 5 {
		t.Fatalf("%d points, want 5 (verdict %s, fault %q)", len(pts), rec.Verdict, rec.Fault)
	}
	if got := pts[4].Mean; math.Abs(got-(1.002*4+1e-3)) > 2e-6 {
		t.Errorf("at 20 mA under a 4 V compliance the card reads %.7g V, want 4.009 V", got)
	}
	if got := pts[2].Mean; math.Abs(got-(1.002*3+1e-3)) > 2e-6 {
		t.Errorf("at 12 mA (3 V across the shunt, inside the limit) the card reads %.7g V, want 3.007 V", got)
	}
}

// Counts out: the card reports round(1.002·I·250 Ω / 156.25 µV + 1 mV / 156.25
// µV); the slope is 1600 count/mA × 1.002 = 1.6032e6 count/A to within the
// ±0.5 count rounding (±31 count/A on the slope).
func TestSimCurrentStimulusCountsOut(t *testing.T) {
	card := strings.Replace(simLoopCard, "{input: current", "{output: reported, adc_lsb: 156.25 uV, input: current", 1)
	_, rec := simLoopRun(t, card, "12 V", simLoopCounts, simLoopCountLimits)
	if rec.Verdict != sequencer.Pass {
		t.Fatalf("verdict %s, fault %q, reasons %v", rec.Verdict, rec.Fault, rec.Reasons)
	}
	if rec.StimulusUnit != "A" || rec.ResponseUnit != "count" {
		t.Errorf("record units %q/%q, want A/count", rec.StimulusUnit, rec.ResponseUnit)
	}
	if f := rec.Fits[0]; math.Abs(f.Slope-1.6032e6) > 100 {
		t.Errorf("fit slope %.7g count/A, want 1.6032e6", f.Slope)
	}
	// At 20 mA: 1.002·5 V/156.25 µV + 1 mV/156.25 µV = 32064 + 6.4 → 32070.
	if got := rec.Sweeps[0].Points[4].Mean; got != 32070 {
		t.Errorf("count at 20 mA %g, want 32070", got)
	}
}
