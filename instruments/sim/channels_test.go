package sim_test

import (
	"context"
	"math"
	"strings"
	"testing"
	"time"

	"trimline/instruments"
	"trimline/instruments/sim"
)

// quietCurrentDUT is quietDUT for a current-output card: its output-referred values
// are in A.
var quietCurrentDUT = map[string]string{"output": "current", "offset": "12uA", "gain_error": "-2500 ppm",
	"noise": "0A", "crossover_step": "0uV", "dnl": "0", "defect": "none"}

// quietCurrentMeter is quietMeter with the current function's errors off too.
var quietCurrentMeter = with(quietMeter, "current_noise", "0A", "current_gain_error", "0", "current_offset", "0A")

// switchBench opens source, meter, dut and sim://switch on one bench.
func switchBench(t *testing.T, meter, dut map[string]string) *sim.Bench {
	t.Helper()
	b, err := sim.NewBench([]instruments.Spec{
		{Role: "source", Address: "sim://source", Settings: quietSource},
		{Role: "meter", Address: "sim://meter", Settings: meter},
		{Role: "dut", Address: "sim://dut", Settings: dut},
		{Role: "mux", Kind: instruments.KindSwitch, Address: "sim://switch"},
	})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { b.Close() })
	return b
}

// gainQuiet is the closed-loop gain of a quiet card of nominal gain g:
// ClosedLoopGain(1e7, 1/g)·(1 − 2500 ppm).
func gainQuiet(g float64) float64 { return sim.ClosedLoopGain(1e7, 1/g) * (1 - 2500e-6) }

func TestSwitchRoutesOneChannel(t *testing.T) {
	ctx := context.Background()
	b := switchBench(t, quietMeter, with(quietDUT, "channels", "3", "output", "reported",
		"cmd_read", "MEAS? {channel}", "offset", "3.1mV"))
	load(t, b, "MX-1")
	d, sw := b.DUT(), b.Switch()
	drive(t, b, 5e-3, 50*time.Millisecond)

	// Released at power-up: every input shorted. y = 2.5 V + 3.1 mV = 2.5031 V,
	// counts = round(2.5031 / 312.5 µV) = round(8009.92) = 8010 (hand-worked).
	for _, ch := range []string{"1", "2", "3"} {
		ask(t, d, "MEAS? "+ch, "8010")
	}
	if err := sw.Route(ctx, "2"); err != nil {
		t.Fatal(err)
	}
	b.Clock().Sleep(ctx, 50*time.Millisecond)
	// Channel 2 sees 5 mV: y = 2.5031 + 5 mV·G, G = ClosedLoopGain(1e7, 1/200)·0.9975
	// = 199.496 V/V, y = 3.50058 V, counts = round(11201.86) = 11202.
	y := 2.5031 + 5e-3*gainQuiet(200)
	near(t, "channel 2 output", y, 3.50058, 1e-5)
	ask(t, d, "MEAS? 1", "8010")
	ask(t, d, "MEAS? 2", "11202")
	ask(t, d, "MEAS? 3", "8010")
	ask(t, d, "MEAS? 4", "ERR channel out of range")
	ask(t, d, "MEAS?", "ERR unknown command \"MEAS?\"")
	if got := read1(t, b); got != 0 { // a reported card's output carries no voltage the meter reads
		t.Errorf("meter on a reported card reads %g V, want 0", got)
	}

	if err := sw.Route(ctx, "4"); err == nil || !strings.Contains(err.Error(), "1 to 3") {
		t.Errorf("route to channel 4 of 3: err = %v", err)
	}
	if err := sw.Route(ctx, "02"); err == nil {
		t.Error("route \"02\": no error")
	}
	if got := sw.Routed(); got != "2" {
		t.Errorf("after refused routes, routed %q, want 2", got)
	}
	if err := sw.Release(ctx); err != nil {
		t.Fatal(err)
	}
	b.Clock().Sleep(ctx, 50*time.Millisecond)
	ask(t, d, "MEAS? 2", "8010")
}

func TestSwitchWiresMeterToRoutedChannel(t *testing.T) {
	ctx := context.Background()
	b := switchBench(t, quietMeter, with(quietDUT, "channels", "2"))
	load(t, b, "MX-2")
	drive(t, b, 5e-3, 50*time.Millisecond)
	if got := read1(t, b); got != 0 {
		t.Errorf("released switch: meter reads %g V, want 0 (quiet meter)", got)
	}
	if err := b.Switch().Route(ctx, "1"); err != nil {
		t.Fatal(err)
	}
	b.Clock().Sleep(ctx, 50*time.Millisecond)
	near(t, "channel 1 through the switch", read1(t, b), 2.5031+5e-3*gainQuiet(200), 1e-6)
	// The trim registers are per channel: moving channel 1's offset by −100 codes
	// (−1.22 mV) leaves channel 2 where it was.
	command(t, b.DUT(), "TRIM OFS 1948")
	near(t, "channel 1 after −100 offset codes", read1(t, b), 2.5031+5e-3*gainQuiet(200)-1.22e-3, 1e-6)
	if err := b.Switch().Route(ctx, "2"); err != nil {
		t.Fatal(err)
	}
	b.Clock().Sleep(ctx, 50*time.Millisecond)
	ask(t, b.DUT(), "TRIM OFS?", "2048") // without {channel}: the routed channel
	near(t, "channel 2", read1(t, b), 2.5031+5e-3*gainQuiet(200), 1e-6)
}

func TestCurrentLoopReadInFuncCurrent(t *testing.T) {
	ctx := context.Background()
	b := bench(t, quietSource, quietCurrentMeter, quietCurrentDUT)
	load(t, b, "CL-1")
	drive(t, b, 10e-3, 50*time.Millisecond)
	m := b.Meter()
	if got := read1(t, b); got != 0 {
		t.Errorf("current card in FuncVoltage reads %g, want 0 V", got)
	}
	if err := m.SetFunction(ctx, instruments.FuncCurrent); err != nil {
		t.Fatal(err)
	}
	if m.Range() != 0.1 || m.Resolution() != 10e-9 {
		t.Errorf("current range %g A, resolution %g A; want auto = 100 mA, 10 nA", m.Range(), m.Resolution())
	}
	// y = 4 mA + 12 µA + 10 mV·G, G = ClosedLoopGain(1e7, 1/0.8)·0.9975 = 0.798 A/V:
	// 4.012 mA + 7.98 mA = 11.992 mA (hand-worked).
	near(t, "loop current", read1(t, b), 11.992e-3, 20e-9)
	if err := m.Configure(ctx, 20e-3, 1); err != nil {
		t.Fatal(err)
	}
	if m.Range() != 0.1 || m.Resolution() != 10e-9 {
		t.Errorf("range for 20 mA: %g A, resolution %g; want 100 mA, 10 nA", m.Range(), m.Resolution())
	}
	if err := m.Configure(ctx, 0.5e-3, 1); err != nil {
		t.Fatal(err)
	}
	rs, _ := m.Read(ctx, 1)
	if m.Range() != 1e-3 || rs[0].Flag != instruments.FlagOverload {
		t.Errorf("11.99 mA on the %g A range: %+v, want the 1 mA range and overload (above 1.2 mA)", m.Range(), rs[0])
	}
	if err := m.Configure(ctx, 2, 1); err == nil {
		t.Error("a 2 A range was accepted")
	}
	if err := m.Reset(ctx); err != nil || m.Function() != instruments.FuncVoltage || m.Range() != 10 {
		t.Errorf("reset: %v, function %s range %g; want voltage, 10 V", err, m.Function(), m.Range())
	}
}

func TestVoltageCardReadsNoCurrent(t *testing.T) {
	ctx := context.Background()
	b := bench(t, quietSource, with(quietMeter, "current_noise", "5nA"), quietDUT)
	load(t, b, "VC-1")
	drive(t, b, 5e-3, 50*time.Millisecond)
	b.Meter().SetFunction(ctx, instruments.FuncCurrent)
	rs, err := b.Meter().Read(ctx, 50)
	if err != nil {
		t.Fatal(err)
	}
	v := make([]float64, len(rs))
	for i, r := range rs {
		v[i] = r.Value
	}
	if sd := stddev(v); sd < 2e-9 || sd > 9e-9 { // current_noise 5 nA at 1 PLC
		t.Errorf("noise of ≈0 A readings: %g A rms, want ≈ 5 nA", sd)
	}
	for _, x := range v {
		if math.Abs(x) > 1e-6 {
			t.Errorf("a voltage card read %g A in FuncCurrent", x)
		}
	}
}

func TestSupplyCurrent(t *testing.T) {
	ctx := context.Background()
	b := bench(t, quietSource, with(quietCurrentMeter, "probe", "supply"), quietDUT)
	m := b.Meter()
	m.SetFunction(ctx, instruments.FuncCurrent)
	if got := read1(t, b); got != 0 {
		t.Errorf("empty fixture: supply %g A, want 0", got)
	}
	load(t, b, "SC-1")
	u, _ := b.DUT().Unit()
	near(t, "supply current read", read1(t, b), u.SupplyCurrent, 5e-9) // quantised to 10 nA
	m.SetFunction(ctx, instruments.FuncVoltage)
	if got := read1(t, b); got != 0 {
		t.Errorf("probe supply in FuncVoltage reads %g V, want 0 (documented)", got)
	}

	// The spread: σ 3 % of 1.2 mA = 36 µA over the population; with 400 units the
	// mean is within 1.2 mA ± 3·36/√400 = ±5.4 µA and the sample σ within ±20 %.
	s := sim.DefaultDUTSettings()
	var v []float64
	var mean float64
	for i := range 400 {
		p := sim.Params("SC-"+string(rune('A'+i%26))+strings.Repeat("x", i/26), 1, s)
		v = append(v, p.SupplyCurrent)
		mean += p.SupplyCurrent / 400
	}
	near(t, "mean supply current", mean, 1.2e-3, 5.4e-6)
	if sd := stddev(v); sd < 0.8*36e-6 || sd > 1.2*36e-6 {
		t.Errorf("σ of the supply current %g A, want 36 µA ± 20 %%", sd)
	}
}

func TestReportedCountsClampToConverter(t *testing.T) {
	b := bench(t, quietSource, quietMeter, with(quietDUT, "output", "reported", "adc_bits", "8"))
	load(t, b, "RC-1")
	// 2.5031 V is 8010 counts, beyond an 8-bit converter's 127.
	ask(t, b.DUT(), "MEAS?", "127")
	b2 := bench(t, quietSource, quietMeter, with(quietDUT, "output", "reported", "adc_lsb", "1 mV", "offset", "-3.1 mV",
		"output_at_zero", "-2 V", "rail_low", "-5 V", "gain_pivot", "0 V"))
	load(t, b2, "RC-2")
	// y = −2 V − 3.1 mV = −2.0031 V, counts = round(−2003.1) = −2003.
	ask(t, b2.DUT(), "MEAS?", "-2003")
}

// Trim templates with {channel} address each channel's own registers, and NV STORE
// keeps every channel's codes.
func TestTrimTemplatesWithChannel(t *testing.T) {
	b := bench(t, quietSource, quietMeter, with(quietDUT, "channels", "3",
		"cmd_offset_write", "TRIM OFS {channel} {code}", "cmd_offset_read", "TRIM OFS? {channel}",
		"cmd_gain_write", "TRIM:GAIN{channel}={code}", "cmd_gain_read", "TRIM:GAIN{channel}?"))
	load(t, b, "TC-3")
	d := b.DUT()
	ask(t, d, "TRIM OFS 3 100", "OK")
	ask(t, d, "TRIM:GAIN2=4000", "OK")
	ask(t, d, "TRIM OFS? 3", "100")
	ask(t, d, "TRIM OFS? 1", "2048")
	ask(t, d, "TRIM:GAIN2?", "4000")
	ask(t, d, "TRIM:GAIN3?", "2048")
	ask(t, d, "TRIM OFS 4 100", "ERR channel out of range")
	ask(t, d, "TRIM OFS? 0", "ERR channel out of range")
	ask(t, d, "TRIM OFS 3 4096", "ERR code out of range")
	// Only channel 1 is wired without a switch: channel 3's −1948 codes do not show
	// (2.5031 V at zero input).
	drive(t, b, 0, 50*time.Millisecond)
	near(t, "channel 1 with channel 3 trimmed", read1(t, b), 2.5031, 1e-6)
	ask(t, d, "NV STORE", "OK")
	load(t, b, "TC-3")
	ask(t, d, "TRIM OFS? 3", "100")
	ask(t, d, "TRIM:GAIN2?", "4000")
}

// Two meters on one bench: one reads the output, the other (probe: supply) the
// unit's supply current, each with settings and errors of its own.
func TestTwoMeters(t *testing.T) {
	ctx := context.Background()
	b, err := sim.NewBench([]instruments.Spec{
		{Role: "source", Address: "sim://source", Settings: quietSource},
		{Role: "dmm", Address: "sim://meter", Settings: quietMeter},
		{Role: "dut", Address: "sim://dut", Settings: quietDUT},
		{Role: "supply", Address: "sim://meter", Settings: with(quietCurrentMeter, "probe", "supply")},
	})
	if err != nil {
		t.Fatal(err)
	}
	defer b.Close()
	ms := b.Meters()
	if len(ms) != 2 || b.Instrument(1) != ms[0] || b.Instrument(3) != ms[1] || b.Meter() != ms[0] {
		t.Fatalf("meters %v, instruments %v %v", ms, b.Instrument(1), b.Instrument(3))
	}
	load(t, b, "TM-1")
	drive(t, b, 0, 50*time.Millisecond)
	near(t, "output meter", read1(t, b), 2.5031, 1e-6)
	ms[1].SetFunction(ctx, instruments.FuncCurrent)
	rs, err := ms[1].Read(ctx, 1)
	if err != nil {
		t.Fatal(err)
	}
	u, _ := b.DUT().Unit()
	near(t, "supply meter", rs[0].Value, u.SupplyCurrent, 5e-9)
	// Two meters are two instruments: the certificate's traceability names each
	// by its own serial.
	id1, _ := ms[0].Identify(ctx)
	id2, _ := ms[1].Identify(ctx)
	if id1.Serial == id2.Serial || id2.Serial != id1.Serial+"-2" {
		t.Errorf("meter serials %q and %q: want the second to be the first's with -2", id1.Serial, id2.Serial)
	}
	// The second meter's errors are its own stream's: not the first meter's.
	b2 := bench(t, nil, map[string]string{}, nil)
	two, _ := sim.NewBench([]instruments.Spec{{Address: "sim://meter"}, {Role: "m2", Address: "sim://meter"}})
	defer two.Close()
	g1, _ := b2.Meter().Errors()
	g2, _ := two.Meters()[1].Errors()
	if g0, _ := two.Meters()[0].Errors(); g0 != g1 || g2 == g1 {
		t.Errorf("meter gain errors: first %g (lone %g), second %g; want the first as the lone meter's, the second different", g0, g1, g2)
	}
}
