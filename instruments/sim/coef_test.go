package sim_test

import (
	"strings"
	"testing"
	"time"

	"trimline/instruments"
	"trimline/instruments/sim"
)

// Each format and text: a written word reads back as written, and the value it
// stands for is the one named (worked by hand from the format's definition).
func TestCoefficientRoundTrip(t *testing.T) {
	for _, c := range []struct {
		format, text, scale string
		write, read         string
		value               float64
	}{
		{"Q2.14", "hex", "", "4000", "4000", 1},              // 0x4000 = 16384 = 2^14 → 1.0
		{"Q2.14", "hex", "", "0x4800", "4800", 1.125},        // 18432/16384
		{"Q2.14", "decimal", "", "16384", "16384", 1},        // the word in decimal
		{"Q2.14", "decimal", "", "-8192", "-8192", -0.5},     // signed word
		{"float32", "decimal", "", "1.25", "1.25", 1.25},     // shortest float32 text
		{"float32", "hex", "", "3FA00000", "3FA00000", 1.25}, // IEEE 754: sign 0, exp 127, mantissa .01
		{"int16", "decimal", "1e-4", "12500", "12500", 1.25}, // 12500 · 1e-4
		{"int16", "hex", "1e-4", "30d4", "30D4", 1.25},       // 0x30D4 = 12500
	} {
		settings := with(quietDUT, "coef", "gain", "coef_gain_format", c.format, "coef_text", c.text)
		if c.scale != "" {
			settings["coef_gain_scale"] = c.scale
		}
		b := bench(t, quietSource, quietMeter, settings)
		load(t, b, "CF-1")
		d := b.DUT()
		one := map[string]string{"Q2.14 hex": "4000", "Q2.14 decimal": "16384", "float32 decimal": "1",
			"float32 hex": "3F800000", "int16 decimal": "10000", "int16 hex": "2710"}[c.format+" "+c.text]
		ask(t, d, "CAL GAIN?", one) // a fresh unit: no correction, gain 1
		ask(t, d, "CAL GAIN "+c.write, "OK")
		ask(t, d, "CAL GAIN?", c.read)
		ask(t, d, "CAL OFS?", `ERR unknown command "CAL OFS?"`) // coef: gain has no offset
		drive(t, b, 0, 50*time.Millisecond)
		// corrected = value · 2.5031 V: the written value is the one the card applies.
		if got, want := read1(t, b), c.value*2.5031; c.value > 0 && (got-want > 1e-6 || want-got > 1e-6) {
			t.Errorf("%s %s %s: output %g V, want %g V", c.format, c.text, c.write, got, want)
		}
	}
}

// corrected = gain·raw + offset, before the rails, offset converted from its unit.
func TestCorrectionApplied(t *testing.T) {
	b := bench(t, quietSource, quietMeter, with(quietDUT, "coef", "both", "coef_offset_unit", "mV"))
	load(t, b, "CA-1")
	d := b.DUT()
	drive(t, b, 0, 50*time.Millisecond)
	near(t, "uncorrected", read1(t, b), 2.5031, 1e-6)
	ask(t, d, "CAL GAIN 18432", "OK") // Q2.14 decimal: 18432/16384 = 1.125
	ask(t, d, "CAL OFS -300", "OK")   // float32 in mV: −0.3 V
	// 1.125 · 2.5031 V − 0.3 V = 2.8159875 − 0.3 = 2.5159875 V (hand-worked).
	near(t, "corrected", read1(t, b), 2.5159875, 1e-6)
	ask(t, d, "CAL OFS 2000", "OK") // +2 V: 2.8159875 + 2 = 4.816 V, into the upper knee
	if y := read1(t, b); !(y > 4.8 && y < 5) {
		t.Errorf("correction past the knee: %g V, want inside the rail compression 4.8..5 V", y)
	}

	// A current card, offset in mA: 4.012 mA at zero input (quiet), gain 1, +0.5 mA → 4.512 mA.
	ctx := t.Context()
	c := bench(t, quietSource, quietCurrentMeter, with(quietCurrentDUT, "coef", "offset", "coef_offset_unit", "mA",
		"coef_offset_format", "int16", "coef_offset_scale", "0.1 uA"))
	load(t, c, "CA-2")
	c.Meter().SetFunction(ctx, instruments.FuncCurrent)
	drive(t, c, 0, 50*time.Millisecond)
	near(t, "current card uncorrected", read1(t, c), 4.012e-3, 10e-9)
	ask(t, c.DUT(), "CAL OFS 5000", "OK") // 5000 · 0.1 µA = 0.5 mA (the number 0.5 in mA)
	ask(t, c.DUT(), "CAL OFS?", "5000")
	near(t, "current card corrected", read1(t, c), 4.512e-3, 10e-9)

	// A reported card, offset in counts: 8010 counts − 10 = 8000 (round(8009.92 − 10)).
	r := bench(t, quietSource, quietMeter, with(quietDUT, "output", "reported", "coef", "offset",
		"coef_offset_format", "int16", "coef_offset_scale", "1"))
	load(t, r, "CA-3")
	ask(t, r.DUT(), "MEAS?", "8010")
	ask(t, r.DUT(), "CAL OFS -10", "OK")
	ask(t, r.DUT(), "MEAS?", "8000")
}

func TestCoefficientsPerChannelAndStored(t *testing.T) {
	b := bench(t, quietSource, quietMeter, with(quietDUT, "channels", "2", "coef", "both", "coef_text", "hex",
		"cmd_coef_gain_write", "CAL:GAIN {channel},{value}", "cmd_coef_gain_read", "CAL:GAIN? {channel}",
		"cmd_coef_offset_write", "CAL:OFFS {channel},{value}", "cmd_coef_offset_read", "CAL:OFFS? {channel}"))
	load(t, b, "NV-1")
	d := b.DUT()
	ask(t, d, "CAL:GAIN 2,4800", "OK")
	ask(t, d, "CAL:OFFS 2,BF000000", "OK") // float32 −0.5
	ask(t, d, "CAL:GAIN? 1", "4000")
	ask(t, d, "CAL:GAIN? 2", "4800")
	ask(t, d, "CAL:OFFS? 2", "BF000000")
	ask(t, d, "CAL:GAIN 3,4000", "ERR channel out of range")
	load(t, b, "NV-1") // not stored: a fresh start
	ask(t, d, "CAL:GAIN? 2", "4000")
	ask(t, d, "CAL:OFFS? 2", "00000000")
	ask(t, d, "CAL:GAIN 2,4800", "OK")
	ask(t, d, "CAL:OFFS 1,3F000000", "OK")
	ask(t, d, "NV STORE", "OK")
	load(t, b, "NV-1")
	ask(t, d, "CAL:GAIN? 2", "4800")
	ask(t, d, "CAL:OFFS? 1", "3F000000")
	ask(t, d, "CAL:GAIN? 1", "4000")
}

func TestCoefficientOutOfRange(t *testing.T) {
	b := bench(t, quietSource, quietMeter, with(quietDUT, "coef", "both"))
	load(t, b, "OR-1")
	d := b.DUT()
	for _, line := range []string{
		"CAL GAIN 40000", // beyond the 16-bit word of Q2.14 (32767)
		"CAL GAIN 1.5",   // Q2.14 decimal is the integer word
		"CAL GAIN abc",
		"CAL OFS 1e39", // beyond float32
		"CAL OFS x",
	} {
		ask(t, d, line, "ERR value out of range")
	}
	ask(t, d, "CAL GAIN?", "16384") // refused writes leave the registers alone
	ask(t, d, "CAL OFS?", "0")
}

func TestCoefficientSettings(t *testing.T) {
	for _, c := range []struct{ key, val, extra, extraVal string }{
		{"coef_gain_format", "Q1.15", "coef", "gain"},            // cannot hold 1
		{"coef_gain_format", "Q2.x", "coef", "gain"},             // not a format
		{"coef_offset_unit", "mA", "coef", "offset"},             // a voltage card's offset is a voltage
		{"coef_gain_scale", "1 mV", "coef_gain_format", "int16"}, // the gain is a plain factor
		{"rail_low", "3.8 V", "output", "current"},               // a current card's rails are currents
		{"cmd_coef_gain_write", "CAL GAIN", "coef", "gain"},      // no {value}
		{"cmd_read", "MEAS? {value}", "output", "reported"},
		{"channels", "17", "output", "voltage"},
		{"adc_bits", "40", "output", "reported"},
		{"coef_offset_scale", "1 uV", "coef_offset_format", "float32"}, // a scale needs int<bits>
		{"coef_offset_scale", "1 uV", "output", "reported"},            // counts take a plain scale
		{"coef_offset_unit", "furlong", "coef", "offset"},
	} {
		_, err := sim.ParseDUTSettings(map[string]string{c.key: c.val, c.extra: c.extraVal})
		if err == nil || !strings.Contains(err.Error(), c.key) {
			t.Errorf("%s: %q with %s: %q: err = %v, want one naming %s", c.key, c.val, c.extra, c.extraVal, err, c.key)
		}
	}
	if _, err := sim.ParseDUTSettings(map[string]string{"output": "current", "rail_low": "3.8 mA", "rail_high": "21 mA",
		"rail_knee": "0.1 mA", "output_at_zero": "4 mA", "gain": "0.8", "offset_sigma": "12 uA"}); err != nil {
		t.Errorf("a current card in A: %v", err)
	}
}
