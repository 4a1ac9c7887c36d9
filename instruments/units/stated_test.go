package units_test

import (
	"math"
	"strconv"
	"testing"

	"trimline/instruments/units"
)

// JCGM 100:2008 §7.2.6: U with at most two significant digits; rounding up
// rather than to the nearest digit is allowed (the clause's own example, from
// memory: u = 10.47 mΩ rounded up to 11 mΩ). trimline rounds up.
func TestRoundUTwoSignificantDigitsUp(t *testing.T) {
	cases := []struct {
		U, want float64
		dec     int
		source  string
	}{
		{10.47, 11, 0, "JCGM 100:2008 §7.2.6 example (from memory): 10.47 rounded up to 11"},
		{0.01423, 0.015, 3, "JCGM 100:2008 §7.2.6, rounding up: 0.01423 → 0.015 (to nearest it would be 0.014)"},
		{211.3, 220, -1, "JCGM 100:2008 §7.2.6, rounding up: 211.3 µV → 220 µV (the demo unit's U after trim)"},
		{211.3e-6, 220e-6, 5, "the same in volts: two significant digits do not depend on the unit"},
		{220, 220, -1, "hand-worked: a stated U is left as it is (rounding twice is rounding once)"},
		{219.99999999999997, 220, -1, "hand-worked: float noise of a unit conversion is not a third digit"},
		{9.96, 10, 0, "hand-worked: 9.96 → 10 (two digits: 1.0·10¹)"},
		{99.96, 100, -1, "hand-worked: 99.96 → 100"},
		{0.996, 1.0, 1, "hand-worked: 0.996 → 1.0, written with one decimal"},
		{1.2, 1.2, 1, "hand-worked: two digits already"},
		{1.2000001, 1.3, 1, "hand-worked: up means up, a third digit however small"},
	}
	for _, c := range cases {
		got, dec := units.RoundU(c.U)
		if got != c.want || dec != c.dec {
			t.Errorf("RoundU(%v) = %v, %d; want %v, %d (%s)", c.U, got, dec, c.want, c.dec, c.source)
		}
		if !units.IsStated(got) {
			t.Errorf("IsStated(RoundU(%v) = %v) = false, want true", c.U, got)
		}
	}
	// The contrast the clause allows: to the nearest, 0.01423 would be 0.014;
	// the stated U is the larger one.
	nearest, _ := strconv.ParseFloat(strconv.FormatFloat(0.01423, 'g', 2, 64), 64)
	if up, _ := units.RoundU(0.01423); nearest != 0.014 || !(up > nearest) {
		t.Errorf("0.01423: nearest %v, up %v; want 0.014 < 0.015 (JCGM 100:2008 §7.2.6)", nearest, up)
	}
	if units.IsStated(211.3) {
		t.Error("IsStated(211.3) = true, want false: three significant digits")
	}
}

// JCGM 100:2008 §7.2.6: the value is rounded to the decimal place of U.
func TestFormatValueToTheDecimalOfU(t *testing.T) {
	cases := []struct {
		v, U   float64
		bounds []float64
		want   string
		source string
	}{
		{48.5, 211.3, nil, "50", "JCGM 100:2008 §7.2.6: U = 220 µV → value to tens: 48.5 µV is 50 µV"},
		{-0.279571, 0.0141, nil, "−0.280", "JCGM 100:2008 §7.2.6: U = 0.015 % → three decimals, trailing zero kept"},
		{492.375, 537, []float64{1000, 460}, "490", "JCGM 100:2008 §7.2.6: U = 540 → tens"},
		{584, 220, []float64{-580, 580, -800, 800}, "584", "hand-worked: 580 would sit on the acceptance limit 584 lies outside of"},
		{579.6, 220, []float64{-580, 580}, "579.6", "hand-worked: 580 would sit on the limit 579.6 lies inside of"},
		{-3.2, 8.2, nil, "−3.2", "JCGM 100:2008 §7.2.6: U = 8.2 → one decimal"},
		{-0.04, 8.2, nil, "0.0", "hand-worked: no −0"},
		{12.3456, 0, nil, "12.3456", "without U: six significant digits"},
	}
	for _, c := range cases {
		if got := units.FormatValue(c.v, c.U, c.bounds...); got != c.want {
			t.Errorf("FormatValue(%v, %v, %v) = %q, want %q (%s)", c.v, c.U, c.bounds, got, c.want, c.source)
		}
	}
	for _, c := range []struct {
		U    float64
		want string
	}{{211.3, "220"}, {0.996, "1.0"}, {0.01423, "0.015"}, {8.2, "8.2"}, {1234, "1300"}} {
		if got := units.FormatU(c.U); got != c.want {
			t.Errorf("FormatU(%v) = %q, want %q (JCGM 100:2008 §7.2.6, up)", c.U, got, c.want)
		}
	}
}

// ILAC-G8:09/2019 §4.1: the acceptance limit AL = TL − w with w = r·U; from a
// stated U the limit is written exactly as computed.
func TestFormatLimit(t *testing.T) {
	cases := []struct {
		al, tl, w, U float64
		upper        bool
		want         string
		source       string
	}{
		{800 - 220, 800, 220, 220, true, "580", "ILAC-G8:09/2019 §4.1: 800 − 1·220"},
		{-800 + 220, -800, 220, 220, false, "−580", "ILAC-G8:09/2019 §4.1: −800 + 1·220"},
		{1.8 - 0.015, 1.8, 0.015, 0.015, true, "1.785", "ILAC-G8:09/2019 §4.1: 1.8 − 0.015, float noise dropped"},
		{1.8 - 0.0075, 1.8, 0.0075, 0.015, true, "1.7925", "ILAC-G8:09/2019 §4.1: r = 0.5, w = 0.0075"},
		{0.01 - 0.012, 0.01, 0.012, 0.012, true, "−0.002", "ILAC-G8:09/2019 §4.1: an empty one-sided acceptance"},
		{800 - 211.34, 800, 211.34, 211.34, true, "588.6", "a U that was not stated: inward (588.66 down), one decimal finer than U and at least one"},
		{-800 + 211.34, -800, 211.34, 211.34, false, "−588.6", "the same, lower limit rounded inward (−588.66 up)"},
	}
	for _, c := range cases {
		if got := units.FormatLimit(c.al, c.tl, c.w, c.U, c.upper); got != c.want {
			t.Errorf("FormatLimit(%v, TL %v, w %v, U %v) = %q, want %q (%s)", c.al, c.tl, c.w, c.U, got, c.want, c.source)
		}
	}
}

// ANSI/NCSL Z540.3-2006 §5.3: TUR = (upper − lower)/(2·U95); the worked value
// (tolerance 9.995 … 10.005 V, U95 = 0.0012 V) is 4.17:1.
func TestFormatTUR(t *testing.T) {
	tur := (10.005 - 9.995) / (2 * 0.0012)
	cases := []struct {
		t      float64
		low    bool
		want   string
		source string
	}{
		{tur, false, "4.17:1", "ANSI/NCSL Z540.3-2006 §5.3 worked value: 0.010 V / (2 · 0.0012 V)"},
		{3.8834, true, "3.88:1", "three significant digits"},
		{3.996, true, "3.99:1", "below the minimum 4:1: rounded down, never printed as 4.00:1"},
		{3.996, false, "4.00:1", "not low: to the nearest"},
		{9.996, false, "10.0:1", "hand-worked: three digits after the carry"},
		{129.9, false, "130:1", "three significant digits"},
		{89.69, false, "89.7:1", "three significant digits"},
		{12345, false, "12300:1", "three significant digits"},
		{2e5, false, "≥ 1e5:1", "the digits say nothing more"},
		{0, false, "—", "not defined"},
	}
	for _, c := range cases {
		if got := units.FormatTUR(c.t, c.low); got != c.want {
			t.Errorf("FormatTUR(%v, %v) = %q, want %q (%s)", c.t, c.low, got, c.want, c.source)
		}
	}
}

func TestFormatProbability(t *testing.T) {
	cases := []struct {
		p    float64
		want string
	}{
		{0, "< 0.0001 %"}, {1e-7, "< 0.0001 %"}, {0.0293, "2.9 %"}, {0.717, "72 %"}, {0.02275, "2.3 %"},
		{0.0996, "10 %"}, {0.997, "99.70 %"}, {0.9999999999, "> 99.9999 %"}, {1, "> 99.9999 %"},
		{1.5e-5, "0.0015 %"}, {math.NaN(), "—"},
	}
	for _, c := range cases {
		if got := units.FormatProbability(c.p); got != c.want {
			t.Errorf("FormatProbability(%v) = %q, want %q", c.p, got, c.want)
		}
	}
}
