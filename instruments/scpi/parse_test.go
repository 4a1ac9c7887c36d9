package scpi_test

import (
	"errors"
	"math"
	"testing"

	"trimline/instruments"
	"trimline/instruments/scpi"
)

func TestParseNumber(t *testing.T) {
	for _, c := range []struct {
		in   string
		v    float64
		flag instruments.Flag
	}{
		{"1", 1, instruments.FlagNone},
		{"+2.503100000E+00", 2.5031, instruments.FlagNone},
		{"-1.5e-3", -1.5e-3, instruments.FlagNone},
		{" 42 ", 42, instruments.FlagNone},
		{".5", 0.5, instruments.FlagNone},
		{"5.", 5, instruments.FlagNone},
		{"0", 0, instruments.FlagNone},
		{"1E-400", 0, instruments.FlagNone}, // underflows to zero: still a number
		{"9.9E37", scpi.OverloadValue, instruments.FlagOverload},
		{"+9.90000000E+37", scpi.OverloadValue, instruments.FlagOverload},
		{"-9.9E37", -scpi.OverloadValue, instruments.FlagOverload},
		{"1e38", scpi.OverloadValue, instruments.FlagOverload},
		{"9.91E37", scpi.NaNValue, instruments.FlagNaN},
		{"+9.910000E+37", scpi.NaNValue, instruments.FlagNaN},
		{"-9.91E37", scpi.NaNValue, instruments.FlagNaN},
	} {
		v, f, err := scpi.ParseNumber(c.in)
		if err != nil || f != c.flag || v != c.v {
			t.Errorf("ParseNumber(%q) = %v, %v, %v; want %v, %v", c.in, v, f, err, c.v, c.flag)
		}
	}
	for _, in := range []string{"", " ", "+", "-", ".", "e5", "1e", "1e+", "1.2.3", "--1", "1-", "0x10", "0x1p3",
		"inf", "+Inf", "NaN", "1_000", "1,5", "12V", "1.0 V", "1\r", "\t", "1e999", "-1e309", "１"} {
		if v, f, err := scpi.ParseNumber(in); err == nil || !errors.Is(err, scpi.ErrMalformed) {
			t.Errorf("ParseNumber(%q) = %v, %v, %v; want ErrMalformed", in, v, f, err)
		}
	}
}

func TestParseNumbers(t *testing.T) {
	v, f, err := scpi.ParseNumbers("+1.0E+00,-9.9E37, 3")
	if err != nil || len(v) != 3 || v[0] != 1 || f[1] != instruments.FlagOverload || v[2] != 3 || f[2] != instruments.FlagNone {
		t.Fatalf("ParseNumbers = %v, %v, %v", v, f, err)
	}
	for _, in := range []string{"", "1,", ",1", "1,,2", "1;2"} {
		if _, _, err := scpi.ParseNumbers(in); !errors.Is(err, scpi.ErrMalformed) {
			t.Errorf("ParseNumbers(%q) = %v, want ErrMalformed", in, err)
		}
	}
}

func TestParseIDN(t *testing.T) {
	id, err := scpi.ParseIDN("Trimline Sim,DV-65,DV000001,1.0")
	if err != nil || id != (instruments.Identity{Maker: "Trimline Sim", Model: "DV-65", Serial: "DV000001", Firmware: "1.0"}) {
		t.Fatalf("ParseIDN = %+v, %v", id, err)
	}
	id, err = scpi.ParseIDN(" Maker , Model ,0, 0")
	if err != nil || id.Maker != "Maker" || id.Serial != "0" || id.Firmware != "0" {
		t.Fatalf("ParseIDN with spaces and zeros = %+v, %v", id, err)
	}
	for _, in := range []string{"", "a,b,c", "a,b,c,d,e", "a,,c,d", "a,b,c, ", "a,b;x,c,d", "a,b,c,d\x00", "a,b,c,\"d\"", "Måker,b,c,d", "a\tb,c,d,e"} {
		if _, err := scpi.ParseIDN(in); !errors.Is(err, scpi.ErrMalformed) {
			t.Errorf("ParseIDN(%q) = %v, want ErrMalformed", in, err)
		}
	}
}

func TestParseErrorEntry(t *testing.T) {
	for _, c := range []struct {
		in   string
		code int
		text string
	}{
		{`0,"No error"`, 0, "No error"},
		{`+0,"No error"`, 0, "No error"},
		{`-113,"Undefined header"`, -113, "Undefined header"},
		{` -222 , "Data out of range;SOUR:VOLT 5" `, -222, "Data out of range;SOUR:VOLT 5"},
		{`201,"Says ""hi"""`, 201, `Says "hi"`},
		{`-100,""`, -100, ""},
	} {
		code, text, err := scpi.ParseErrorEntry(c.in)
		if err != nil || code != c.code || text != c.text {
			t.Errorf("ParseErrorEntry(%q) = %d, %q, %v", c.in, code, text, err)
		}
	}
	for _, in := range []string{"", "0", `0,No error`, `x,"y"`, `1.5,"y"`, `1e2,"y"`, `-113,"a"b"`, `-113,"open`} {
		if _, _, err := scpi.ParseErrorEntry(in); !errors.Is(err, scpi.ErrMalformed) {
			t.Errorf("ParseErrorEntry(%q) = %v, want ErrMalformed", in, err)
		}
	}
}

func TestIdempotent(t *testing.T) {
	for line, want := range map[string]bool{
		"*IDN?": true, "SOUR:VOLT?": true, "source:voltage:level?": true, "READ?": true, "OUTP?": true,
		"SOUR:VOLT? MAX": true, "TRIM OFS?": true, "SN?": true, "*OPC?": true, "FETC?": true,
		"SYST:ERR?": false, "system:error:next?": false, "SYSTem:ERRor?": false, "*ESR?": false, "*TST?": false,
		"MEAS:VOLT:DC?": false, "STAT:OPER?": false, "CAL:ZERO?": false, "calibration?": false,
		"SOUR:VOLT 1": false, "OUTP ON": false, "*RST": false, "TRIM OFS 2048": false, "NV STORE": false,
		"SOUR:VOLT 1;SOUR:VOLT?": false, "": false,
	} {
		if got := scpi.IsIdempotent(line); got != want {
			t.Errorf("IsIdempotent(%q) = %v, want %v", line, got, want)
		}
	}
	if got := scpi.Canonical(":sense:voltage:dc:nplcycles 10"); got != "SENS:VOLT:DC:NPLC" {
		t.Errorf("Canonical = %q", got)
	}
	if got := scpi.Canonical("OUTPut2:STATe?"); got != "OUTP2:STAT?" {
		t.Errorf("Canonical = %q", got)
	}
}

func TestSpecialValuesAreNotNumbers(t *testing.T) {
	// A flagged value must never pass as a usable reading.
	for _, in := range []string{"9.9E37", "-9.9E37", "9.91E37"} {
		v, f, _ := scpi.ParseNumber(in)
		r := instruments.Reading{Value: v, Flag: f}
		if r.Valid() || math.IsNaN(v) || math.IsInf(v, 0) {
			t.Errorf("%s: reading %+v: must be flagged, and its value JSON-safe", in, r)
		}
	}
}
