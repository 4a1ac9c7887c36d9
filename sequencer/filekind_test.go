package sequencer_test

import (
	"path/filepath"
	"strings"
	"testing"
	"time"

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
	data, err := st.Rewired(addrs, sequencer.Served{
		Templates: map[string]map[string]string{"dut": {"load_unit": "FIXTURE LOAD {serial}"}, "source": {"arm_watchdog": "OUTP:WATC {seconds}"}},
		Settings:  map[string]map[string]string{"source": {"watchdog": "5 s"}},
	})
	if err != nil {
		t.Fatal(err)
	}
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

// A rewired station file keeps every setting of the original but the instruments'
// addresses and the simulator's settings: signing, release, safety, interlock, step
// deadline, timeouts. Its paths are absolute, resolved as the original's were, so
// the copy works from another folder.
func TestStationRewiredKeepsEverySetting(t *testing.T) {
	raw := demoFile(t, "brx200-station.yaml")
	raw = strings.Replace(raw, "    asset: DMM-0203\n", "    asset: DMM-0203\n    timeout: 3 s\n", 1)
	raw += "step_deadline: 45 s\ninterlock: {role: dut, query: \"LID?\", closed: \"CLOSED\"}\n"
	orig := filepath.Join(t.TempDir(), "line", "station.yaml")
	st, err := sequencer.ParseStation(orig, []byte(raw))
	if err != nil {
		t.Fatal(err)
	}
	addrs := map[string]string{"source": "tcp://127.0.0.1:5025", "meter": "tcp://127.0.0.1:5026", "dut": "tcp://127.0.0.1:5027"}
	data, err := st.Rewired(addrs, sequencer.Served{Templates: map[string]map[string]string{"dut": {"load_unit": "FIXTURE LOAD {serial}"}}})
	if err != nil {
		t.Fatal(err)
	}
	elsewhere := filepath.Join(t.TempDir(), "somewhere", "else", "served.yaml")
	back, err := sequencer.ParseStation(elsewhere, data)
	if err != nil {
		t.Fatalf("rewired file does not load: %v\n%s", err, data)
	}
	abs := func(p string) string {
		a, err := filepath.Abs(p)
		if err != nil {
			t.Fatal(err)
		}
		return a
	}
	for _, c := range []struct{ what, got, want string }{
		{"signing key", back.SigningKey, abs(st.SigningKey)},
		{"release keys", back.ReleaseKeys, abs(st.ReleaseKeys)},
		{"output folder", back.OutputFolder, abs(st.OutputFolder)},
	} {
		if c.want == "" || filepath.Clean(c.got) != filepath.Clean(c.want) {
			t.Errorf("%s: %q, want %q\n%s", c.what, c.got, c.want, data)
		}
	}
	if !back.RequireRelease || back.StepDeadline != st.StepDeadline || back.StepDeadline == 0 ||
		back.SourceRating != st.SourceRating || back.MaxSourceVolts != st.MaxSourceVolts || back.MaxSourceAmps != st.MaxSourceAmps {
		t.Errorf("settings changed: require_release %v, step deadline %v, rating %+v, caps %g V %g A\n%s",
			back.RequireRelease, back.StepDeadline, back.SourceRating, back.MaxSourceVolts, back.MaxSourceAmps, data)
	}
	if back.Interlock == nil || *back.Interlock != *st.Interlock {
		t.Errorf("interlock %+v, want %+v", back.Interlock, st.Interlock)
	}
	if got := back.Instruments["meter"].Timeout; got != 3*time.Second {
		t.Errorf("meter timeout %v, want 3s", got)
	}
	if _, ok := back.Instruments["dut"].Settings["seed"]; ok {
		t.Errorf("the simulator's seed setting was kept:\n%s", data)
	}
	if back.Instruments["dut"].Address != addrs["dut"] {
		t.Errorf("dut address %q", back.Instruments["dut"].Address)
	}
}
