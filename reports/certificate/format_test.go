package certificate

import (
	"math"
	"testing"

	"trimline/limits"
	"trimline/reports/internal/pdfdoc"
	"trimline/sequencer"
)

func TestFmtWithU(t *testing.T) {
	for _, c := range []struct {
		v, U float64
		unit string
		want string
	}{
		{-3.2217, 8.4, "uV", "−3.2 µV ± 8.4 µV"},     // U to two digits, value to the same place
		{-3.22, 8.41, "uV", "−3.2 µV ± 8.5 µV"},      // U rounded up, never down
		{17.89, 2.743, "ppm", "17.9 ppm ± 2.8 ppm"},  //
		{1234.5, 123, "uV", "1230 µV ± 130 µV"},      // U to tens
		{5, 9.96, "uV", "5 µV ± 10 µV"},              // 9.96 rounds up to 10: two digits, not 10.0
		{-0.04, 8.4, "uV", "0.0 µV ± 8.4 µV"},        // no "−0.0"
		{0.81, 0.0003, "%", "0.81000 % ± 0.00030 %"}, // 0.0003 exactly: not rounded up to 0.00031
		{2.5, 1e-6, "V", "2.5000000 V ± 0.0000010 V"},
		{0.5, 0, "uV", "0.5000 µV"}, // U not evaluated: the value alone
		{2101, 0.5, "code", "2101"}, // codes are exact
		{math.NaN(), 1, "uV", "not valid"},
		{1, math.Inf(1), "uV", "1.000 µV"},
		{3.1, 2.472, "", "3.1 ± 2.5"},
	} {
		if got := fmtWithU(c.v, c.U, c.unit); got != c.want {
			t.Errorf("fmtWithU(%g, %g, %q) = %q, want %q", c.v, c.U, c.unit, got, c.want)
		}
	}
}

func TestFmtUncertaintyParts(t *testing.T) {
	for _, c := range []struct{ got, want string }{
		{fmtK(2), "k = 2.00"},
		{fmtK(2.106), "k = 2.11"},
		{fmtK(0), "k not stated"},
		{fmtDOF(math.Inf(1)), "νeff = ∞"},
		{fmtDOF(24.7), "νeff = 24"},
		{fmtDOF(0), ""},
		{fmtDOF(999.9), "νeff = 999"},
		{fmtDOF(96652080), "νeff ≥ 1000"},
		{uncLine(8.4, 2, math.Inf(1), "GUM"), "k = 2.00 · νeff = ∞ · GUM"},
		{uncLine(8.4, 2.11, 24, ""), "k = 2.11 · νeff = 24"},
		{uncLine(0, 0, 0, ""), "U not evaluated"},
		{fmtCoverage(0.9545), "95.45 %"},
		{fmtCoverage(0.95), "95 %"},
		{fmtCoverage(0.99), "99 %"},
		{pdfdoc.Minus("-3.2"), "−3.2"},
		{pdfdoc.Minus("-0.00"), "0.00"},
		{pdfdoc.Minus("-0"), "0"},
		{pdfdoc.Minus("12"), "12"},
	} {
		if c.got != c.want {
			t.Errorf("got %q, want %q", c.got, c.want)
		}
	}
}

func TestFmtIntervals(t *testing.T) {
	p := func(v float64) *float64 { return &v }
	for _, c := range []struct {
		d    limits.Decision
		unit string
		tol  string
		acc  string
	}{
		{limits.Decision{Lower: p(-50), Upper: p(50), AcceptLower: p(-37.000000000000001), AcceptUpper: p(36.99999999999999), U: 13}, "uV",
			"−50 … 50 µV", "−37 … 37 µV"}, // from a stated U (13): TL ∓ w exactly (ILAC-G8:09/2019 §4.1)
		// inward: the lower acceptance limit rounds up, the upper down
		{limits.Decision{Lower: p(-20), Upper: p(20), AcceptLower: p(-17.2567), AcceptUpper: p(17.2567), U: 2.743}, "ppm",
			"−20 … 20 ppm", "−17.25 … 17.25 ppm"},
		{limits.Decision{Upper: p(0.01), AcceptUpper: p(0.008), U: 0.002}, "%", "≤ 0.01 %", "≤ 0.0080 %"}, // to the decimal of U = 0.0020
		{limits.Decision{Lower: p(5), AcceptLower: p(5)}, "uV", "≥ 5 µV", "≥ 5 µV"},
		{limits.Decision{}, "uV", "—", "—"},
		{limits.Decision{Lower: p(16), Upper: p(4079)}, "code", "16 … 4079", "—"},
	} {
		if got := fmtTolerance(&c.d, c.unit); got != c.tol {
			t.Errorf("tolerance %q, want %q", got, c.tol)
		}
		if got := fmtAcceptance(&c.d, c.unit); got != c.acc {
			t.Errorf("acceptance %q, want %q", got, c.acc)
		}
	}
}

func TestUnitScaleAndResultUnit(t *testing.T) {
	for u, want := range map[string]float64{"uV": 1e-6, "mV": 1e-3, "V": 1, "ppm": 1e-6, "%": 0.01, "code": 1, "": 1, "furlong": 0} {
		if got := unitScale(u); math.Abs(got-want) > 1e-15*want {
			t.Errorf("unitScale(%q) = %g, want %g", u, got, want)
		}
	}
	r := sequencer.Result{Name: "post_offset", Value: -2.854e-6, Unit: "V", Valid: true,
		Unc: sequencer.Uncertainty{Std: 6.5e-6, DOF: math.Inf(1), K: 2, Expanded: 13e-6}}
	if got := fmtResultU(r); got != "−3 µV ± 13 µV" {
		t.Errorf("fmtResultU = %q", got)
	}
	r.Value, r.Unc.Expanded = 2.5, 1.2e-3 // a large value with a small U: in volts
	if got := fmtResultU(r); got != "2.5000 V ± 0.0012 V" {
		t.Errorf("fmtResultU = %q", got)
	}
	r = sequencer.Result{Value: 63.13e-6, Unit: "ratio", Valid: true, Unc: sequencer.Uncertainty{Expanded: 0.487e-6, K: 2.32}}
	if got := fmtResultU(r); got != "63.13 ppm ± 0.49 ppm" {
		t.Errorf("fmtResultU = %q", got)
	}
	// A plain number (χ²/ν) is written bare, never scaled to % (hand-worked).
	r = sequencer.Result{Value: 1.3002250281376555, Unit: "number", Valid: true}
	if got := fmtResultU(r); got != "1.30" {
		t.Errorf("fmtResultU(χ²/ν) = %q, want 1.30", got)
	}
	r.Unc.Expanded = 0.0412
	if got := fmtResultU(r); got != "1.300 ± 0.042" {
		t.Errorf("fmtResultU(χ²/ν with U) = %q, want 1.300 ± 0.042", got)
	}
}

func TestStagesAndAmbient(t *testing.T) {
	for _, c := range []struct {
		names []string
		want  stage
	}{
		{[]string{"pre_offset"}, stageFound},
		{[]string{"post_offset", "post_gain_error"}, stageLeft},
		{[]string{"offset_code", "gain_code"}, stageOther},
		{[]string{"pre_offset", "post_offset"}, stageOther},
		{nil, stageOther},
	} {
		if got := stageOf(&sequencer.Record{Schema: 1}, c.names...); got != c.want { // schema 1: stages by the first layout's names
			t.Errorf("stageOf(%v) = %v, want %v", c.names, got, c.want)
		}
	}
	for _, c := range []struct {
		c    sequencer.Conditions
		want string
	}{
		{sequencer.Conditions{}, "Ambient temperature not recorded"},
		{sequencer.Conditions{AmbientC: 23.14, AmbientSource: "entered"}, "Ambient 23.1 °C (entered by the operator)"},
		{sequencer.Conditions{AmbientC: 0, AmbientSource: "sensor"}, "Ambient 0.0 °C (read from the station's sensor)"},
		{sequencer.Conditions{AmbientC: -5.25, AmbientSource: "sensor"}, "Ambient −5.2 °C (read from the station's sensor)"},
		{sequencer.Conditions{AmbientC: 21}, "Ambient 21.0 °C (source not stated)"},
		{sequencer.Conditions{AmbientC: math.NaN(), AmbientSource: "sensor"}, "Ambient temperature not recorded"},
	} {
		if got := ambient(c.c); got != c.want {
			t.Errorf("ambient(%+v) = %q, want %q", c.c, got, c.want)
		}
	}
}
