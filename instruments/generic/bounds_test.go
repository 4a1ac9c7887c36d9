package generic_test

import (
	"errors"
	"strings"
	"testing"

	"trimline/instruments"
	"trimline/instruments/generic"
)

// The durations the generic driver's settings set are bounded: a timeout over a
// minute is a hung instrument, and the line frequency, which sizes the read
// timeout, must be a mains frequency (10 Hz to 1 kHz).
func TestSettingsBounded(t *testing.T) {
	for _, c := range []struct{ key, val, want string }{
		{"timeout", "1h", "at most 1m0s"},
		{"timeout", "1e9 s", "at most 1m0s"},
		{"line_frequency", "1e-9 Hz", "10 to 1000 Hz"},
		{"line_frequency", "1 MHz", "10 to 1000 Hz"},
	} {
		spec := instruments.Spec{Role: "meter", Address: "tcp://127.0.0.1:5025", Settings: map[string]string{c.key: c.val}}
		err := generic.Driver{}.CheckSettings(spec)
		var se *instruments.SettingError
		if !errors.As(err, &se) || se.Key != c.key || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: %s: %v, want a SettingError saying %q", c.key, c.val, err, c.want)
		}
	}
	for _, v := range []string{"60 s", "50 Hz"} {
		key := map[bool]string{true: "timeout", false: "line_frequency"}[strings.HasSuffix(v, "s")]
		spec := instruments.Spec{Role: "meter", Address: "tcp://127.0.0.1:5025", Settings: map[string]string{key: v}}
		if err := (generic.Driver{}).CheckSettings(spec); err != nil {
			t.Errorf("%s: %s: %v", key, v, err)
		}
	}
}
