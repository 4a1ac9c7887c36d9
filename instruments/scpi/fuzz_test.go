package scpi_test

import (
	"math"
	"strconv"
	"strings"
	"testing"

	"trimline/instruments"
	"trimline/instruments/scpi"
)

// FuzzParseNumber: ParseNumber never panics; what it accepts is a plain decimal
// number that strconv reads the same, flagged exactly when its magnitude reaches
// the SCPI special values; a valid number survives formatting and parsing again.
func FuzzParseNumber(f *testing.F) {
	f.Fuzz(func(t *testing.T, s string) {
		v, flag, err := scpi.ParseNumber(s)
		if err != nil {
			return
		}
		trimmed := strings.Trim(s, " \t")
		if strings.ContainsAny(trimmed, "xXpPiInN_") || trimmed == "" {
			t.Fatalf("accepted %q", s)
		}
		want, perr := strconv.ParseFloat(trimmed, 64)
		if perr != nil {
			t.Fatalf("accepted %q, which strconv rejects: %v", s, perr)
		}
		switch flag {
		case instruments.FlagNone:
			if v != want || math.IsInf(v, 0) || math.IsNaN(v) || math.Abs(v) >= scpi.OverloadValue {
				t.Fatalf("%q = %v unflagged, want %v below 9.9E37", s, v, want)
			}
			again, f2, err := scpi.ParseNumber(strconv.FormatFloat(v, 'E', -1, 64))
			if err != nil || again != v || f2 != instruments.FlagNone {
				t.Fatalf("%v does not survive formatting: %v, %v, %v", v, again, f2, err)
			}
		case instruments.FlagOverload:
			if math.Abs(want) < scpi.OverloadValue || math.Abs(v) != scpi.OverloadValue || math.Signbit(v) != math.Signbit(want) {
				t.Fatalf("%q flagged overload with value %v", s, v)
			}
		case instruments.FlagNaN:
			if math.Abs(want) != scpi.NaNValue || v != scpi.NaNValue {
				t.Fatalf("%q flagged NaN with value %v", s, v)
			}
		default:
			t.Fatalf("%q: flag %v", s, flag)
		}
	})
}

// FuzzParseIDN: ParseIDN never panics; an accepted identity has four non-empty
// fields of printable ASCII without commas and survives Identity.String.
func FuzzParseIDN(f *testing.F) {
	f.Fuzz(func(t *testing.T, s string) {
		id, err := scpi.ParseIDN(s)
		if err != nil {
			return
		}
		for _, fld := range []string{id.Maker, id.Model, id.Serial, id.Firmware} {
			if fld == "" || strings.ContainsAny(fld, ",;\"") || strings.TrimSpace(fld) != fld {
				t.Fatalf("%q gave field %q", s, fld)
			}
			for _, c := range []byte(fld) {
				if c < 0x20 || c > 0x7e {
					t.Fatalf("%q gave field %q with byte %#x", s, fld, c)
				}
			}
		}
		again, err := scpi.ParseIDN(id.String())
		if err != nil || again != id {
			t.Fatalf("%+v does not survive String: %+v, %v", id, again, err)
		}
	})
}
