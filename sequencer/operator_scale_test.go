package sequencer

import "testing"

func TestOperatorQuantity(t *testing.T) {
	f := func(v float64) *float64 { return &v }
	for _, c := range []struct {
		name         string
		value        float64
		U            float64
		unit         string
		lower, upper *float64
		v, tol, u    string
		ok           bool
	}{
		{"limit's unit kept", 812.2, 110, "µV", nil, f(60), "810", "≤ 60", "µV", true},
		{"uV written in the file", 164.4, 330, "uV", f(-800), f(800), "160", "±800", "µV", true},
		{"four digits move to mV", -12384.2, 9.9, "µV", f(-800), f(800), "−12.4", "±0.8", "mV", true},
		{"a limit of four digits moves too", 775, 330, "µV", nil, f(1000), "0.78", "≤ 1", "mV", true},
		// Three digits would put 1000.4 µV on the limit of 1000 µV: the
		// certificate's digits show it is above.
		{"kept off the limit", 1000.4, 0.5, "µV", nil, f(1000), "1.0004", "≤ 1", "mV", true},
		{"kept on its side", 999.6, 0.5, "µV", f(-1000), f(1000), "0.9996", "±1", "mV", true},
		{"three digits at most", 12.34567, 0.011, "mA", f(4), f(20), "12.3", "4 … 20", "mA", true},
		{"never finer than stated", 12.34567, 11, "mA", f(4), f(20), "12", "4 … 20", "mA", true},
		{"no U: three digits", 0.0123456, 0, "V", f(-1), f(1), "0.0123", "±1", "V", true},
		{"currents", 2500, 22, "µA", nil, f(3000), "2.5", "≤ 3", "mA", true},
		{"percent takes no prefix", 0.015, 0.002, "%", nil, f(0.01), "", "", "", false},
		{"codes take no prefix", 4095, 0, "code", f(0), f(4095), "", "", "", false},
	} {
		v, tol, u, ok := operatorQuantity(c.value, c.U, c.unit, c.lower, c.upper)
		if v != c.v || tol != c.tol || u != c.u || ok != c.ok {
			t.Errorf("%s: got %q %q %q %v, want %q %q %q %v", c.name, v, tol, u, ok, c.v, c.tol, c.u, c.ok)
		}
	}
}
