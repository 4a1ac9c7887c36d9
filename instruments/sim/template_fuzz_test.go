package sim_test

import (
	"strings"
	"testing"

	"trimline/instruments/sim"
)

// FuzzCommandTemplate: any template either fails to compile or matches its own
// instance (placeholders filled with "7" and "3FA0"), giving those values back.
func FuzzCommandTemplate(f *testing.F) {
	for _, s := range []string{"TRIM OFS {code}", "CAL:GAIN {channel},{value}", "MEAS? {channel}",
		"{value}", "A{channel}B{value}C", "X {{value}}", "CAL:OFFS={code}"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, text string) {
		value := sim.ValuePlaceholder
		if strings.Contains(text, sim.CodePlaceholder) {
			value = sim.CodePlaceholder
		}
		compiled, _, _, _ := sim.MatchTemplate(text, value, true, "")
		if !compiled {
			return
		}
		line := strings.NewReplacer(value, "3FA0", sim.ChannelPlaceholder, "7").Replace(text)
		_, v, ch, ok := sim.MatchTemplate(text, value, true, line)
		if !ok {
			t.Fatalf("template %q does not match its instance %q", text, line)
		}
		if v != "3FA0" && !strings.Contains(line, "3FA0") {
			t.Fatalf("template %q: value %q", text, v)
		}
		if strings.Contains(text, sim.ChannelPlaceholder) && ch == "" {
			t.Fatalf("template %q: no channel from %q", text, line)
		}
	})
}
