package sim_test

import (
	"context"
	"errors"
	"math"
	"strconv"
	"strings"
	"testing"
	"time"

	"trimline/instruments/sim"
)

const res = 1e-6 // V, meter resolution on the 10 V range (brief: 6½ digits)

func TestHandComputedTransfer(t *testing.T) {
	b := bench(t, quietSource, quietMeter, quietDUT)
	load(t, b, "BRX-000001")
	d := b.DUT()
	settle := 50 * time.Millisecond // 50 τ: e^−50 of a 2 V step is 4e−22 V (hand-worked)

	// G = 1e7/(1 + 1e7/200)·(1 − 2500 ppm) = 199.496010080 V/V (hand-worked);
	// y = 2.5 V + G·x + 3.1 mV.
	for _, c := range []struct{ x, want float64 }{
		{-10e-3, 0.508139899202}, // hand-worked: 2.5 − 1.99496010080 + 0.0031
		{0, 2.5031},              // hand-worked: 2.5 + 0.0031
		{10e-3, 4.498060100798},  // hand-worked: 2.5 + 1.99496010080 + 0.0031
	} {
		drive(t, b, c.x, settle)
		near(t, "untrimmed output", read1(t, b), c.want, res)
	}

	// Offset trim +100 codes moves the output by exactly 100·12.2 µV = 1.22 mV (hand-worked).
	drive(t, b, 0, settle)
	before := read1(t, b)
	command(t, d, "TRIM OFS 2148")
	near(t, "offset step of 100 codes", read1(t, b)-before, 1.22e-3, res)

	// Gain trim +200 codes scales (y − 2.5 V) by 1 + 200·10 ppm = 1.002, then the
	// offset trim adds 1.22 mV (hand-worked).
	command(t, d, "TRIM GAIN 2248")
	for _, c := range []struct{ x, want float64 }{
		{-10e-3, 0.505376179000}, // hand-worked: 2.5 + 1.002·(0.508139899202 − 2.5) + 0.00122
		{0, 2.5043262},           // hand-worked: 2.5 + 1.002·0.0031 + 0.00122
		{10e-3, 4.503276221000},  // hand-worked: 2.5 + 1.002·1.998060100798 + 0.00122
	} {
		drive(t, b, c.x, settle)
		near(t, "trimmed output", read1(t, b), c.want, res)
	}

	// The model agrees with the bench (Output is what tests elsewhere predict with).
	u, _ := d.Unit()
	near(t, "UnitParams.Output", u.Output(10e-3, 2148, 2248), 4.503276221000, 1e-9) // hand-worked above
}

func TestOffsetTrimBefore(t *testing.T) {
	b := bench(t, quietSource, quietMeter, with(quietDUT, "offset_trim", "before", "offset_lsb", "1uV"))
	load(t, b, "BRX-000002")
	drive(t, b, 0, 50*time.Millisecond)
	y0 := read1(t, b)
	command(t, b.DUT(), "TRIM OFS 2049")
	// One input-referred code of 1 µV moves the output by 1 µV·199.496010080 = 199.496 µV
	// (hand-worked); each reading is quantised to 1 µV, so the difference is good to ±1 µV.
	near(t, "output effect of one code", read1(t, b)-y0, 199.496010e-6, res)

	// With the gain trim at +1000 codes the same code moves the output by 1.01× as much
	// (hand-worked: the offset DAC sits inside the gain trim).
	command(t, b.DUT(), "TRIM GAIN 3048")
	command(t, b.DUT(), "TRIM OFS 2048")
	y0 = read1(t, b)
	command(t, b.DUT(), "TRIM OFS 2148")
	near(t, "100 codes under gain trim", read1(t, b)-y0, 100*199.496010e-6*1.01, res) // hand-worked

	// Default LSB before the gain stage is 12.2 µV/200 = 61 nV (hand-worked).
	s, err := sim.ParseDUTSettings(map[string]string{"offset_trim": "before"})
	if err != nil {
		t.Fatal(err)
	}
	near(t, "default input-referred LSB", s.OffsetLSB, 61e-9, 1e-15)
}

func TestSettling(t *testing.T) {
	b := bench(t, quietSource, with(quietMeter, "nplc", "1"), with(quietDUT, "tau", "1ms"))
	load(t, b, "BRX-000003")
	ctx := context.Background()
	drive(t, b, 0, 100*time.Millisecond)
	y0 := read1(t, b)
	if err := b.Source().SetLevel(ctx, 5e-3); err != nil {
		t.Fatal(err)
	}
	// Read at once: the output has not moved yet, so it is off by the whole step.
	yNow := read1(t, b) // this reading's 20 ms aperture (20 τ) also settles the step
	near(t, "output read at the step instant", yNow, y0, res)
	step := read1(t, b) - y0 // ≈ 0.9975 V (hand-worked: 5 mV·199.496)
	near(t, "step size", step, 0.997480050, res)

	// Step back down, wait 10 τ: first-order residual e^−10 = 4.54e−5 of the step
	// (hand-worked), inside the 1e−4 the brief asks for.
	if err := b.Source().SetLevel(ctx, 0); err != nil {
		t.Fatal(err)
	}
	if err := b.Clock().Sleep(ctx, 10*time.Millisecond); err != nil {
		t.Fatal(err)
	}
	resid := read1(t, b) - y0
	if math.Abs(resid) > 1e-4*math.Abs(step) {
		t.Errorf("residual after 10 τ = %g V, more than 1e-4 of the %g V step", resid, step)
	}
	near(t, "residual after 10 τ", resid, step*math.Exp(-10), 2*res) // hand-worked: first order
}

func TestProtocol(t *testing.T) {
	ctx := context.Background()
	b := bench(t, nil, nil, map[string]string{})
	d := b.DUT()

	// Empty fixture: every command is refused.
	for _, line := range []string{"SN?", "FW?", "TRIM OFS 1", "TRIM OFS?", "NV STORE", "BOGUS"} {
		if _, err := d.Query(ctx, line); err == nil || !strings.Contains(err.Error(), "no unit in fixture") {
			t.Errorf("empty fixture, %q: err = %v, want no unit in fixture", line, err)
		}
	}
	if _, err := d.Identify(ctx); err == nil {
		t.Error("Identify with an empty fixture succeeded")
	}
	if err := d.LoadUnit(ctx, "bad serial"); err == nil {
		t.Error("LoadUnit accepted a serial with a space")
	}

	load(t, b, "BRX-000010")
	q := func(line, want string) {
		t.Helper()
		got, err := d.Query(ctx, line)
		if err != nil || got != want {
			t.Errorf("Query(%q) = %q, %v; want %q", line, got, err, want)
		}
	}
	q("SN?", "BRX-000010")
	q("FW?", sim.Firmware)
	q("TRIM OFS?", "2048") // brief: a fresh unit starts at mid-scale
	q("TRIM GAIN?", "2048")
	command(t, d, "TRIM OFS 0")
	command(t, d, "TRIM GAIN 4095\n") // the line terminator is accepted
	q("TRIM OFS?", "0")
	q("TRIM GAIN?", "4095")
	id, err := d.Identify(ctx)
	if err != nil || id.Serial != "BRX-000010" || id.Firmware != sim.Firmware {
		t.Errorf("Identify = %+v, %v", id, err)
	}

	for _, line := range []string{"TRIM OFS 4096", "TRIM OFS -1", "TRIM GAIN 12.5", "TRIM GAIN x"} {
		err := d.Command(ctx, line)
		var re *sim.ReplyError
		if !errors.As(err, &re) || re.Reply != "ERR code out of range" {
			t.Errorf("Command(%q) = %v, want ERR code out of range", line, err)
		}
	}
	q("TRIM OFS?", "0") // a refused write leaves the register alone
	for _, line := range []string{"HELLO", "TRIM", "TRIM OFS", "TRIM OFS? 3", "NV", "sn?"} {
		_, err := d.Query(ctx, line)
		if err == nil || !strings.Contains(err.Error(), `ERR unknown command "`+line+`"`) {
			t.Errorf("Query(%q) = %v, want ERR unknown command", line, err)
		}
	}
	if err := d.Command(ctx, "SN?"); err == nil {
		t.Error(`Command("SN?") succeeded although the reply is not OK`)
	}

	// NV STORE persists per serial across LoadUnit for the bench's lifetime.
	command(t, d, "TRIM OFS 1234")
	command(t, d, "TRIM GAIN 3000")
	command(t, d, "NV STORE")
	command(t, d, "TRIM OFS 7") // not stored
	load(t, b, "BRX-000011")
	q("TRIM OFS?", "2048")
	load(t, b, "BRX-000010")
	q("TRIM OFS?", "1234")
	q("TRIM GAIN?", "3000")
	b2 := bench(t, nil, nil, map[string]string{})
	load(t, b2, "BRX-000010")
	if got, _ := b2.DUT().Query(ctx, "TRIM OFS?"); got != "2048" {
		t.Errorf("a new bench remembered stored codes: %s", got)
	}

	// Cancelled context.
	cctx, cancel := context.WithCancel(ctx)
	cancel()
	if _, err := d.Query(cctx, "SN?"); !errors.Is(err, context.Canceled) {
		t.Errorf("Query with a cancelled ctx = %v", err)
	}
	if err := d.Command(cctx, "TRIM OFS 1"); !errors.Is(err, context.Canceled) {
		t.Errorf("Command with a cancelled ctx = %v", err)
	}
}

func TestStuckBitAndOpen(t *testing.T) {
	ctx := context.Background()
	b := bench(t, quietSource, quietMeter, with(quietDUT, "defect", "stuck_bit"))
	load(t, b, "BRX-000020")
	u, _ := b.DUT().Unit()
	dac, reg := u.OffsetDAC, "OFS"
	if !dac.Stuck {
		dac, reg = u.GainDAC, "GAIN"
	}
	// A code whose stuck bit disagrees with the stuck level.
	code := 2048 ^ 1<<dac.StuckBit
	if (code>>dac.StuckBit&1 == 1) == dac.StuckHigh {
		code = 2048
	}
	command(t, b.DUT(), "TRIM "+reg+" "+strconv.Itoa(code))
	if got, _ := b.DUT().Query(ctx, "TRIM "+reg+"?"); got != strconv.Itoa(code) {
		t.Errorf("register reads %s, want the written %d", got, code)
	}
	if dac.Value(code) == float64(code) {
		t.Errorf("stuck bit %d has no analog effect at code %d", dac.StuckBit, code)
	}

	o := bench(t, quietSource, quietMeter, with(quietDUT, "defect", "open", "noise", "20uV"))
	load(t, o, "BRX-000021")
	drive(t, o, 5e-3, 10*time.Millisecond)
	if y := read1(t, o); math.Abs(y) > 200e-6 { // brief: open output ≈ 0 V + noise (10 σ)
		t.Errorf("open unit reads %g V", y)
	}
}
