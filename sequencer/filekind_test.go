package sequencer_test

import (
	"testing"

	"trimline/sequencer"
)

func TestFileKind(t *testing.T) {
	for _, c := range []struct{ file, want string }{
		{"brx200-station.yaml", sequencer.FileStation},
		{"brx200-sequence.yaml", sequencer.FileSequence},
		{"brx200-limits.yaml", sequencer.FileLimits},
	} {
		if got := sequencer.FileKind([]byte(demoFile(t, c.file))); got != c.want {
			t.Errorf("%s: kind %q, want %q", c.file, got, c.want)
		}
	}
	// Broken YAML is told by its top-level key, so its own loader reports the error.
	if got := sequencer.FileKind([]byte("station:\n  id: [unclosed\n")); got != sequencer.FileStation {
		t.Errorf("broken station file: kind %q", got)
	}
	if got := sequencer.FileKind([]byte("colour: blue\n")); got != "" {
		t.Errorf("unknown file: kind %q, want none", got)
	}
}

// A rewired station file loads back with the same station and instruments, each at
// its new address, with the DUT templates given.
func TestStationRewired(t *testing.T) {
	st, _ := demoFiles(t, nil)
	addrs := map[string]string{"source": "tcp://127.0.0.1:5025", "meter": "tcp://127.0.0.1:5026", "dut": "tcp://127.0.0.1:5027"}
	data := st.Rewired(addrs, sequencer.Served{
		Templates: map[string]map[string]string{"dut": {"load_unit": "FIXTURE LOAD {serial}"}, "source": {"arm_watchdog": "OUTP:WATC {seconds}"}},
		Settings:  map[string]map[string]string{"source": {"watchdog": "5 s"}},
	})
	back, err := sequencer.ParseStation("served.yaml", data)
	if err != nil {
		t.Fatalf("rewired file does not load: %v\n%s", err, data)
	}
	if back.ID != st.ID || back.CertificatePrefix != st.CertificatePrefix || back.MaxSourceVolts != st.MaxSourceVolts {
		t.Errorf("station changed: %+v", back)
	}
	for role, addr := range addrs {
		in, ok := back.Instruments[role]
		if !ok || in.Address != addr {
			t.Errorf("%s: address %q, want %q", role, in.Address, addr)
		}
		if in.Asset != st.Instruments[role].Asset || in.Accuracy != st.Instruments[role].Accuracy {
			t.Errorf("%s: asset or accuracy changed", role)
		}
	}
	if got := back.Instruments["dut"].Templates["load_unit"]; got != "FIXTURE LOAD {serial}" {
		t.Errorf("dut load_unit template %q", got)
	}
	if got := back.Instruments["source"].Templates["arm_watchdog"]; got != "OUTP:WATC {seconds}" {
		t.Errorf("source arm_watchdog template %q", got)
	}
	if got := back.Instruments["source"].Settings["watchdog"]; got != "5 s" {
		t.Errorf("source watchdog setting %q", got)
	}
}
