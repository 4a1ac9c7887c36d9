package sim_test

import (
	"context"
	"errors"
	"reflect"
	"strings"
	"testing"
	"time"

	"trimline/instruments"
	"trimline/instruments/sim"
)

// ask sends line to the DUT and checks the reply line ("ERR …" included).
func ask(t *testing.T, d *sim.DUT, line, want string) {
	t.Helper()
	got, err := d.Query(context.Background(), line)
	var re *sim.ReplyError
	if errors.As(err, &re) {
		got, err = re.Reply, nil
	}
	if err != nil || got != want {
		t.Errorf("%q → %q, %v; want %q", line, got, err, want)
	}
}

func TestTwosComplementHexPort(t *testing.T) {
	b := bench(t, quietSource, quietMeter, with(quietDUT,
		"offset_bits", "16", "offset_coding", "twos_complement",
		"gain_coding", "twos_complement", "code_format", "hex"))
	load(t, b, "TC-1")
	d := b.DUT()
	ask(t, d, "TRIM OFS?", "0000") // no correction at 0, four hex digits for 16 bits
	ask(t, d, "TRIM GAIN?", "000") // three for 12
	drive(t, b, 0, 50*time.Millisecond)
	y0 := read1(t, b)

	// −100 is the 16-bit pattern FF9C: the output moves by −100·12.2 µV = −1.22 mV
	// (hand-worked).
	ask(t, d, "TRIM OFS 0xff9c", "OK")
	ask(t, d, "TRIM OFS?", "FF9C")
	near(t, "output step of −100 codes", read1(t, b)-y0, -1.22e-3, res)
	ask(t, d, "TRIM OFS 7FFF", "OK") // without 0x
	ask(t, d, "TRIM OFS?", "7FFF")
	ask(t, d, "TRIM GAIN 0X800", "OK")
	ask(t, d, "TRIM GAIN?", "800")
	for _, line := range []string{"TRIM OFS 0x10000", "TRIM OFS -1", "TRIM OFS 0x", "TRIM OFS +7", "TRIM GAIN 1000"} {
		ask(t, d, line, "ERR code out of range")
	}
	ask(t, d, "TRIM GAIN?", "800") // refused writes leave the register alone

	u, _ := d.Unit()
	if got := u.OffsetDAC.Correction(0x8000); got != -32768 { // hand-worked: most negative
		t.Errorf("correction of 0x8000 = %g LSB, want -32768", got)
	}
	ask(t, d, "NV STORE", "OK")
	load(t, b, "TC-1")
	ask(t, d, "TRIM OFS?", "7FFF") // stored patterns come back as written
}

func TestTwosComplementDecimalPort(t *testing.T) {
	b := bench(t, nil, nil, with(quietDUT, "gain_coding", "twos_complement"))
	load(t, b, "TC-2")
	d := b.DUT()
	ask(t, d, "TRIM GAIN?", "0")
	ask(t, d, "TRIM OFS?", "2048") // the offset DAC keeps binary-offset coding
	ask(t, d, "TRIM GAIN -2048", "OK")
	ask(t, d, "TRIM GAIN?", "-2048")
	ask(t, d, "TRIM GAIN 2047", "OK")
	ask(t, d, "TRIM GAIN?", "2047")
	ask(t, d, "TRIM GAIN 2048", "ERR code out of range")
	ask(t, d, "TRIM GAIN -2049", "ERR code out of range")
	u, _ := d.Unit()
	// Register −1 is 0xFFF; its correction is −1 LSB on an ideal DAC (hand-worked).
	if got := u.GainDAC.Correction(0xFFF); got != -1 {
		t.Errorf("correction of −1 = %g LSB", got)
	}
}

func TestOffsetOnlyCard(t *testing.T) {
	b := bench(t, quietSource, quietMeter, with(quietDUT, "trim", "offset"))
	load(t, b, "OO-1")
	d := b.DUT()
	for _, line := range []string{"TRIM GAIN 2048", "TRIM GAIN?"} {
		ask(t, d, line, `ERR unknown command "`+line+`"`)
	}
	ask(t, d, "TRIM OFS 2148", "OK")
	ask(t, d, "TRIM OFS?", "2148")
	ask(t, d, "NV STORE", "OK")
	u, _ := d.Unit()
	// The gain code is ignored: 2.5 V + G·x + 3.1 mV + 100·12.2 µV with G from
	// TestHandComputedTransfer (hand-worked).
	for _, g := range []int{0, 2048, 4095} {
		near(t, "offset-only output", u.Output(10e-3, 2148, g), 2.5+1.99496010080+0.0031+1.22e-3, 1e-9)
	}
	// A stuck bit can only sit in the DAC the card has.
	s, _ := sim.ParseDUTSettings(map[string]string{"trim": "gain", "defect": "stuck_bit"})
	for _, sn := range []string{"S1", "S2", "S3", "S4", "S5", "S6"} {
		if p := sim.Params(sn, 1, s); !p.GainDAC.Stuck || p.OffsetDAC.Stuck {
			t.Errorf("gain-only card %s: stuck bit not in the gain DAC", sn)
		}
	}
}

func TestWideDAC(t *testing.T) {
	b := bench(t, nil, nil, map[string]string{"offset_bits": "16", "gain_bits": "14"})
	load(t, b, "W-1")
	d := b.DUT()
	ask(t, d, "TRIM OFS?", "32768")
	ask(t, d, "TRIM GAIN?", "8192")
	ask(t, d, "TRIM OFS 65535", "OK")
	ask(t, d, "TRIM OFS 65536", "ERR code out of range")
	ask(t, d, "TRIM GAIN 16384", "ERR code out of range")

	// The bits the 12-bit card has keep their draws; every other draw is unchanged too.
	narrow := sim.Params("W-1", 1, sim.DefaultDUTSettings())
	ws := sim.DefaultDUTSettings()
	ws.OffsetBits, ws.GainBits = 16, 14
	wide := sim.Params("W-1", 1, ws)
	if wide.GainError != narrow.GainError || wide.InputOffset != narrow.InputOffset ||
		wide.OutputOffset != narrow.OutputOffset || wide.CrossoverStep != narrow.CrossoverStep ||
		wide.Defect != narrow.Defect {
		t.Errorf("a wider DAC changed the unit's other draws:\n%+v\n%+v", wide, narrow)
	}
	if !reflect.DeepEqual(wide.OffsetDAC.BitError[:12], narrow.OffsetDAC.BitError[:12]) ||
		!reflect.DeepEqual(wide.GainDAC.BitError[:12], narrow.GainDAC.BitError[:12]) {
		t.Error("a wider DAC changed the bit errors of the low 12 bits")
	}
	for i := 12; i < 16; i++ {
		if wide.OffsetDAC.BitError[i] == 0 {
			t.Errorf("bit %d of the 16-bit DAC has no error drawn", i)
		}
	}
	if wide.GainDAC.BitError[14] != 0 || wide.GainDAC.BitError[15] != 0 {
		t.Error("the 14-bit DAC has errors beyond its width")
	}
	// A stuck bit is one of the top four of its DAC.
	ws.Defect = sim.DefectStuckBit
	for _, sn := range []string{"S1", "S2", "S3", "S4", "S5", "S6", "S7", "S8"} {
		p := sim.Params(sn, 1, ws)
		dac := p.OffsetDAC
		if !dac.Stuck {
			dac = p.GainDAC
		}
		if dac.StuckBit < dac.Width()-4 || dac.StuckBit >= dac.Width() {
			t.Errorf("%s: stuck bit %d of a %d-bit DAC", sn, dac.StuckBit, dac.Width())
		}
	}
}

func TestInvertingCardWithOwnRails(t *testing.T) {
	m := with(quietDUT, "gain", "-50", "output_at_zero", "0V", "gain_pivot", "1V",
		"rail_low", "-10V", "rail_high", "10V", "open_loop_gain", "0", "gain_error", "0", "offset", "0V")
	s, err := sim.ParseDUTSettings(m)
	if err != nil {
		t.Fatal(err)
	}
	p := sim.Params("INV-1", 1, s)
	// Hand-worked: y0 = 0 V − 50·10 mV = −0.5 V; +1000 gain codes (1 %) about the 1 V
	// pivot: 1 + 1.01·(−0.5 − 1) = −0.515 V.
	near(t, "untrimmed", p.Output(10e-3, 2048, 2048), -0.5, 1e-12)
	near(t, "gain-trimmed", p.Output(10e-3, 2048, 3048), -0.515, 1e-12)
	// Rails at ±10 V with the 0.2 V knee: far beyond, the output sits just inside.
	if y := p.Output(1, 2048, 2048); y > -9.8 || y < -10 {
		t.Errorf("output at 1 V input = %g V, want inside the −10 V knee", y)
	}
	// Finite open-loop gain shrinks an inverting gain's magnitude too: −50·(1 − 50/1e7).
	m["open_loop_gain"] = "1e7"
	s, _ = sim.ParseDUTSettings(m)
	near(t, "gain with A = 1e7", sim.Params("INV-1", 1, s).Gain(), -50*(1-50/(1e7+50.0)), 1e-12) // hand-worked

	// The input-referred offset LSB follows the gain: 12.2 µV/50 = 244 nV.
	s, _ = sim.ParseDUTSettings(map[string]string{"gain": "-50", "offset_trim": "before"})
	near(t, "input-referred LSB", s.OffsetLSB, 244e-9, 1e-18)
}

func TestCommandTemplatesAndLock(t *testing.T) {
	b := bench(t, nil, nil, map[string]string{
		"cmd_serial": "ID:SER?", "cmd_firmware": "ID:FW?", "firmware": "XA-9 0.4",
		"cmd_offset_write": "CAL:OFFS={code}", "cmd_offset_read": "CAL:OFFS?",
		"cmd_gain_write": "CAL GAIN {code} SET", "cmd_gain_read": "CAL GAIN?",
		"cmd_store": "CAL:SAVE", "cmd_unlock": "UNLOCK 5A17",
	})
	ctx := context.Background()
	d := b.DUT()
	load(t, b, "LK-1")
	id, err := d.Identify(ctx)
	if err != nil || id.Serial != "LK-1" || id.Firmware != "XA-9 0.4" {
		t.Errorf("Identify = %+v, %v", id, err)
	}
	ask(t, d, "SN?", `ERR unknown command "SN?"`)
	ask(t, d, "CAL:OFFS=100", "ERR locked")
	ask(t, d, "CAL GAIN 100 SET", "ERR locked")
	ask(t, d, "CAL:SAVE", "ERR locked")
	ask(t, d, "CAL:OFFS?", "2048") // reads need no unlock
	ask(t, d, "UNLOCK 5A17", "OK")
	ask(t, d, "CAL:OFFS=100", "OK")
	ask(t, d, "CAL:OFFS?", "100")
	ask(t, d, "CAL  GAIN 4000  SET", "OK") // spaces between tokens collapse
	ask(t, d, "CAL GAIN?", "4000")
	ask(t, d, "CAL GAIN 1 2 SET", `ERR unknown command "CAL GAIN 1 2 SET"`)
	ask(t, d, "CAL:OFFS=x", "ERR code out of range")
	ask(t, d, "CAL:SAVE", "OK")
	load(t, b, "LK-1") // reloading locks again and brings the stored codes back
	ask(t, d, "CAL:OFFS=7", "ERR locked")
	ask(t, d, "CAL GAIN?", "4000")
	ask(t, d, "LID?", "CLOSED")
}

func TestCardSettingErrors(t *testing.T) {
	for _, c := range []struct {
		settings map[string]string
		key      string
	}{
		{map[string]string{"gain": "0"}, "gain"},
		{map[string]string{"gain": "1 V"}, "gain"},
		{map[string]string{"output_at_zero": "2 A"}, "output_at_zero"},
		{map[string]string{"rail_knee": "0V"}, "rail_knee"},
		{map[string]string{"rail_high": "0.3V"}, "rail_high"},
		{map[string]string{"rail_low": "4.7V"}, "rail_low"},
		{map[string]string{"offset_bits": "25"}, "offset_bits"},
		{map[string]string{"gain_bits": "0"}, "gain_bits"},
		{map[string]string{"gain_bits": "12.5"}, "gain_bits"},
		{map[string]string{"offset_coding": "sign_magnitude"}, "offset_coding"},
		{map[string]string{"code_format": "octal"}, "code_format"},
		{map[string]string{"trim": "none"}, "trim"},
		{map[string]string{"cmd_offset_write": "TRIM OFS"}, "cmd_offset_write"},
		{map[string]string{"cmd_gain_write": "G {code} {code}"}, "cmd_gain_write"},
		{map[string]string{"cmd_serial": "SN? {code}"}, "cmd_serial"},
		{map[string]string{"cmd_store": "NV {cod}"}, "cmd_store"},
		{map[string]string{"cmd_store": "  "}, "cmd_store"},
		{map[string]string{"cmd_serial": "LID?"}, "cmd_serial"},
		{map[string]string{"cmd_gain_read": "TRIM OFS?"}, "cmd_gain_read"},
		{map[string]string{"cmd_unlock": "line\nbreak"}, "cmd_unlock"},
		{map[string]string{"firmware": " "}, "firmware"},
	} {
		_, err := sim.ParseDUTSettings(c.settings)
		var se *instruments.SettingError
		if !errors.As(err, &se) || se.Key != c.key {
			t.Errorf("%v: err = %v, want a SettingError at %s", c.settings, err, c.key)
		}
	}
	// The commands of a DAC the card lacks are not checked.
	if _, err := sim.ParseDUTSettings(map[string]string{"trim": "offset", "cmd_gain_write": "G"}); err != nil {
		t.Errorf("offset-only card with an unused gain template: %v", err)
	}
	// The driver's check reports the same.
	err := sim.Driver{}.CheckSettings(instruments.Spec{Role: "dut", Address: "sim://dut",
		Settings: map[string]string{"offset_coding": "bcd"}})
	var se *instruments.SettingError
	if !errors.As(err, &se) || se.Key != "offset_coding" {
		t.Errorf("CheckSettings: %v", err)
	}
}

// FuzzPort sends arbitrary lines to a hex two's-complement card with a lock: no line
// may panic, every reply is one non-empty line, and the register always reads back
// as a code of its width.
func FuzzPort(f *testing.F) {
	for _, s := range []string{"TRIM OFS 0x7FF", "TRIM OFS ffff", "UNLOCK 5A17", "TRIM GAIN -1",
		"TRIM OFS 0x", "NV STORE", "TRIM OFS  0X1 ", "LID?", "TRIM GAIN 0x800"} {
		f.Add(s)
	}
	b, err := sim.NewBench([]instruments.Spec{{Role: "dut", Address: "sim://dut", Settings: map[string]string{
		"offset_bits": "13", "offset_coding": "twos_complement", "code_format": "hex", "cmd_unlock": "UNLOCK 5A17"}}})
	if err != nil {
		f.Fatal(err)
	}
	d := b.DUT()
	ctx := context.Background()
	if err := d.LoadUnit(ctx, "FZ-1"); err != nil {
		f.Fatal(err)
	}
	f.Fuzz(func(t *testing.T, line string) {
		r, err := d.Query(ctx, line)
		var re *sim.ReplyError
		if errors.As(err, &re) {
			r, err = re.Reply, nil
		}
		if err != nil || r == "" || strings.ContainsAny(r, "\r\n") {
			t.Fatalf("%q → %q, %v", line, r, err)
		}
		if got, err := d.Query(ctx, "TRIM OFS?"); err != nil || len(got) != 4 || strings.Trim(got, "0123456789ABCDEF") != "" || got > "1FFF" {
			t.Fatalf("after %q the offset register reads %q, %v", line, got, err)
		}
	})
}
