package units_test

import (
	"math"
	"strings"
	"testing"

	"trimline/instruments/units"
)

func TestParse(t *testing.T) {
	// Expected SI values are the SI prefix definitions (BIPM SI Brochure, 9th ed.,
	// Table 7: m = 1e-3, µ = 1e-6, k = 1e3) and ppm = 1e-6, % = 1e-2.
	cases := []struct {
		in   string
		v    float64
		dim  units.Dim
		fail string
	}{
		{in: "10mV", v: 10e-3, dim: units.Volt},
		{in: "-2.5 V", v: -2.5, dim: units.Volt},
		{in: "250us", v: 250e-6, dim: units.Second},
		{in: "12.2 uV", v: 12.2e-6, dim: units.Volt},
		{in: "12.2 µV", v: 12.2e-6, dim: units.Volt},
		{in: "10 ppm", v: 10e-6, dim: units.Ratio},
		{in: "0.1 %", v: 1e-3, dim: units.Ratio},
		{in: "5 kHz", v: 5e3, dim: units.Hertz},
		{in: "350 Ω", v: 350, dim: units.Ohm},
		{in: "2e-3 A", v: 2e-3, dim: units.Ampere},
		{in: "+1.5E+1ms", v: 15e-3, dim: units.Second},
		{in: "23 °C", v: 23, dim: units.Celsius},
		{in: "4095 code", v: 4095, dim: units.Count},
		{in: "2 min", v: 120, dim: units.Second},
		{in: "7", v: 7, dim: units.Ratio},
		{in: "10mX", fail: "unknown unit \"mX\""},
		{in: "mV", fail: "expected a number"},
		{in: "", fail: "found nothing"},
		{in: "1.2.3V", fail: "expected a finite number"},
		{in: "10 kppm", fail: "unknown unit"},
		{in: "1e308 GV", fail: "too large"}, // 1e317 V overflows float64 to +Inf
		{in: "-1e308 GA", fail: "too large"},
	}
	for _, c := range cases {
		q, err := units.Parse(c.in)
		if c.fail != "" {
			if err == nil || !strings.Contains(err.Error(), c.fail) {
				t.Errorf("Parse(%q) error %v, want one containing %q", c.in, err, c.fail)
			}
			continue
		}
		if err != nil {
			t.Errorf("Parse(%q): %v", c.in, err)
			continue
		}
		if math.Abs(q.Value-c.v) > 1e-12*math.Abs(c.v) || q.Dim != c.dim {
			t.Errorf("Parse(%q) = %g %v, want %g %v", c.in, q.Value, q.Dim, c.v, c.dim)
		}
	}
}

func TestParseAsNamesTheExpectedDimension(t *testing.T) {
	if _, err := units.ParseAs("20 mV", units.Second); err == nil || !strings.Contains(err.Error(), "expected a time") {
		t.Errorf("want a dimension error, got %v", err)
	}
	if _, err := units.ParseAs("20", units.Volt); err == nil || !strings.Contains(err.Error(), "has no unit") {
		t.Errorf("want a missing-unit error, got %v", err)
	}
}

func TestFormat(t *testing.T) {
	for _, c := range []struct {
		v    float64
		unit string
		want string
	}{
		{12.2e-6, "V", "12.2 µV"}, {-3.1e-3, "V", "-3.1 mV"}, {2.5, "V", "2.5 V"}, {0, "V", "0 V"}, {15, "ppm", "15 ppm"},
	} {
		if got := units.Format(c.v, c.unit, 3); got != c.want {
			t.Errorf("Format(%g, %q) = %q, want %q", c.v, c.unit, got, c.want)
		}
	}
}

func FuzzParse(f *testing.F) {
	for _, s := range []string{"10mV", "-2.5 V", "250us", "12.2 uV", "10 ppm", "0.1 %", "5 kHz", "1e", "-", "µ"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		q, err := units.Parse(s)
		if err == nil && (math.IsNaN(q.Value) || math.IsInf(q.Value, 0)) {
			t.Fatalf("Parse(%q) gave a non-finite value without error", s)
		}
	})
}

// A ratio needs its unit: a bare 30 could be 30 ppm, 30 % or 30 times (it was read
// as 30, i.e. 3 000 000 000 ppm). Only 0 may stand alone.
func TestParseRatioNeedsAUnit(t *testing.T) {
	for _, c := range []struct {
		in   string
		v    float64
		fail string
	}{
		{in: "30 ppm", v: 30e-6}, {in: "0.003 %", v: 3e-5}, {in: "5 ppb", v: 5e-9}, {in: "0", v: 0}, {in: "-20ppm", v: -20e-6},
		{in: "30", fail: "has no unit"}, {in: "1e-5", fail: "has no unit"}, {in: "10 mV", fail: "expected a ratio"},
	} {
		v, err := units.ParseRatio(c.in)
		if c.fail != "" {
			if err == nil || !strings.Contains(err.Error(), c.fail) {
				t.Errorf("ParseRatio(%q) = %g, %v; want an error containing %q", c.in, v, err, c.fail)
			}
			continue
		}
		if err != nil || math.Abs(v-c.v) > 1e-12*math.Abs(c.v) {
			t.Errorf("ParseRatio(%q) = %g, %v; want %g", c.in, v, err, c.v)
		}
	}
}

// A Number is a plain number: written bare, read unscaled, any unit refused
// (ppm and % included: χ²/ν of 1.3 is not 130 %).
func TestNumber(t *testing.T) {
	cases := []struct {
		in   string
		v    float64
		fail string
	}{
		{in: "1.3", v: 1.3},
		{in: " 5 ", v: 5},
		{in: "-2e-3", v: -2e-3},
		{in: "0", v: 0},
		{in: "130 %", fail: "has a unit: expected a plain number"},
		{in: "5 ppm", fail: "has a unit"},
		{in: "5 code", fail: "has a unit"},
		{in: "1.3V", fail: "has a unit"},
		{in: "x", fail: "expected a number"},
	}
	for _, c := range cases {
		v, err := units.ParseAs(c.in, units.Number)
		if c.fail != "" {
			if err == nil || !strings.Contains(err.Error(), c.fail) {
				t.Errorf("ParseAs(%q, Number) error %v, want one containing %q", c.in, err, c.fail)
			}
			continue
		}
		if err != nil || v != c.v {
			t.Errorf("ParseAs(%q, Number) = %g, %v; want %g", c.in, v, err, c.v)
		}
	}
	// A plain number is refused where a unit is needed, and named as such.
	if _, err := units.ParseAs("1.3 %", units.Volt); err == nil {
		t.Error("ParseAs(1.3 %, Volt) accepted a ratio")
	}
	if got := units.Number.String(); got != "plain number (no unit)" {
		t.Errorf("Number.String() = %q", got)
	}

	// Significant digits, hand-worked; trailing zeros kept because they count.
	for _, c := range []struct {
		v    float64
		sig  int
		want string
	}{
		{1.30023, 3, "1.30"},
		{1.3, 3, "1.30"},
		{0.01234, 3, "0.0123"},
		{123.456, 3, "123"},
		{9.996, 3, "10.0"},
		{-2.5, 2, "-2.5"},
		{0, 3, "0.00"},
		{-0.0001, 1, "-0.0001"},
		{1.5e-7, 2, "1.5e-07"},
		{2e12, 3, "2e+12"},
		{math.Inf(1), 3, "+Inf"},
	} {
		if got := units.FormatNumber(c.v, c.sig); got != c.want {
			t.Errorf("FormatNumber(%g, %d) = %q, want %q", c.v, c.sig, got, c.want)
		}
	}
}

// A gain's unit pair fixes the response and the stimulus; the value is in SI
// units of each (hand-worked: 800 mA/V = 0.8 A/V; 0.8 mA/mV = 0.8e-3 A / 1e-3 V
// = 0.8 A/V).
func TestParseRatioUnit(t *testing.T) {
	for _, c := range []struct {
		in       string
		v        float64
		num, den units.Dim
	}{
		{"200", 200, units.Ratio, units.Ratio},
		{"200 V/V", 200, units.Volt, units.Volt},
		{"-1.5 mV/mV", -1.5, units.Volt, units.Volt},
		{"800 mA/V", 0.8, units.Ampere, units.Volt},
		{"0.8 mA/mV", 0.8, units.Ampere, units.Volt},
		{"3200 count/V", 3200, units.Count, units.Volt},
		{"3.2 counts/mV", 3200, units.Count, units.Volt},
		{"2 V/mA", 2000, units.Volt, units.Ampere},
	} {
		got, err := units.ParseRatioUnit(c.in)
		if err != nil {
			t.Errorf("%q: %v", c.in, err)
			continue
		}
		if math.Abs(got.Value-c.v) > 1e-12*math.Abs(c.v) || got.Num != c.num || got.Den != c.den {
			t.Errorf("%q = %+v, want %g %v/%v", c.in, got, c.v, c.num, c.den)
		}
	}
	for _, bad := range []string{"", "V/V", "200 mV", "200 furlong/V", "200 V/fortnight", "NaN V/V"} {
		if _, err := units.ParseRatioUnit(bad); err == nil {
			t.Errorf("%q: no error", bad)
		}
	}
}

func TestCountUnit(t *testing.T) {
	for _, s := range []string{"12 count", "12 counts", "12count"} {
		q, err := units.Parse(s)
		if err != nil || q.Dim != units.Count || q.Value != 12 {
			t.Errorf("%q = %+v, %v; want 12 count", s, q, err)
		}
	}
	if got := units.Format(12, "count", 3); got != "12 count" {
		t.Errorf("Format(12, count) = %q", got)
	}
}

// ParseRatioUnit never panics, and what it accepts is a finite value whose
// dimensions are both plain ratios only for a bare number.
func FuzzParseRatioUnit(f *testing.F) {
	for _, s := range []string{"200", "200 V/V", "800 mA/V", "0.8 mA/mV", "3200 count/V", "1e308 GV/pV", "/", "1 /", "1 V/"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		p, err := units.ParseRatioUnit(s)
		if err != nil {
			return
		}
		if math.IsNaN(p.Value) || math.IsInf(p.Value, 0) {
			t.Errorf("%q = %v: not finite", s, p.Value)
		}
		if (p.Num == units.Ratio) != (p.Den == units.Ratio) && !strings.Contains(s, "/") {
			t.Errorf("%q = %+v: one side bare without a ratio unit", s, p)
		}
	})
}
