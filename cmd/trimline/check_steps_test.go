package main

import (
	"path/filepath"
	"strings"
	"testing"
	"time"
)

// editDemo writes a copy of the demo file name in dir as "bad-"+name with each
// old string of pairs replaced by the new one, and returns its path.
func editDemo(t *testing.T, dir, name string, pairs ...string) string {
	t.Helper()
	return copyWith(t, filepath.Join(dir, name), filepath.Join(dir, "bad-"+name), pairs...)
}

// expectAll reports each of wants that out lacks.
func expectAll(t *testing.T, out string, wants ...string) {
	t.Helper()
	for _, want := range wants {
		if !strings.Contains(out, want) {
			t.Errorf("missing %q", want)
		}
	}
}

// A sequence with mistakes in five different steps gets all five reported in one
// pass, each at its file:line:col with the line quoted and marked.
func TestCheckReportsEveryStepErrorInOnePass(t *testing.T) {
	dir := t.TempDir()
	if _, _, err := writeDemoFiles(dir, 1, time.Now()); err != nil {
		t.Fatal(err)
	}
	bad := editDemo(t, dir, "brx200-sequence.yaml",
		"    name: pre-trim\n    from: -10 mV", "    name: pre-trim\n    from: -10 mX", // a bad unit in a sweep
		"    name: pre-trim fit\n    sweep: pre-trim", "    name: pre-trim fit\n    sweep: verify", // a fit of a later sweep
		"      gain: gain_code", "      gian: gain_code", // a trim naming an unknown DAC
		"  - kind: store ", "  - kind: stash ", // an unknown kind
		"    name: verify fit\n", "    name: verify fit\n    skip_if: no_such_result > 3\n") // a skip_if over no result
	code, out, _ := runCLI(t, "check", bad)
	expectAll(t, out,
		"bad-brx200-sequence.yaml:57:11: unknown unit \"mX\" in \"-10 mX\"",
		"   57 |     from: -10 mX\n      |           ^",
		"bad-brx200-sequence.yaml:65:12: no earlier sweep step called \"verify\" (earlier ones: \"pre-trim\")",
		"   65 |     sweep: verify\n      |            ^",
		"bad-brx200-sequence.yaml:76:13: no trim DAC \"gian\" in this trim",
		"   76 |       gian: gain_code\n      |             ^",
		"bad-brx200-sequence.yaml:78:11: unknown step kind \"stash\" (expected one of ",
		"   78 |   - kind: stash ",
		"bad-brx200-sequence.yaml:91:14: skip_if \"no_such_result > 3\": unknown name no_such_result",
		"   91 |     skip_if: no_such_result > 3\n      |              ^",
		"5 problem(s)",
	)
	if code != exitUsage || t.Failed() {
		t.Fatalf("exit %d, want 2:\n%s", code, out)
	}
}

// check --steps lists the steps a sequence read; without it the output stays one
// line a file.
func TestCheckStepsListsTheSequence(t *testing.T) {
	dir := t.TempDir()
	_, sequence, err := writeDemoFiles(dir, 1, time.Now())
	if err != nil {
		t.Fatal(err)
	}
	code, out, _ := runCLI(t, "check", sequence)
	if code != 0 || out != "ok  "+sequence+" (sequence)\n" {
		t.Fatalf("check without --steps: exit %d\n%s", code, out)
	}
	code, out, _ = runCLI(t, "check", "--steps", sequence)
	expectAll(t, out,
		"    #  step          kind        stage       roles                                   results\n",
		"    1  identify      identify    as found    dut (dut_port)                          —\n",
		"    3  station zero  zero_check  as found    source (voltage_source), meter (meter)  station_zero\n",
		"    4  pre-trim      sweep       as found    source (voltage_source), meter (meter)  —\n",
		"    5  pre-trim fit  fit         as found    —                                       pre_offset, pre_gain_error, pre_nonlinearity\n",
		"    6  trim          trim        adjustment  dut (dut_port)                          offset_code, gain_code\n",
		"    9  verify fit    fit         as left     —                                       post_offset, post_gain_error, post_nonlinearity, post_max_error, post_noise, trim_offset_change, trim_gain_change\n",
	)
	if code != 0 || t.Failed() {
		t.Fatalf("exit %d:\n%s", code, out)
	}
}

// A second sweep above the station's cap is named by the caps check: the step,
// where it starts in the file, the level and the cap; the first sweep is not.
func TestCheckCapsNamesTheStep(t *testing.T) {
	dir := t.TempDir()
	station, _, err := writeDemoFiles(dir, 1, time.Now())
	if err != nil {
		t.Fatal(err)
	}
	bad := editDemo(t, dir, "brx200-sequence.yaml", "    name: verify\n    from: -10 mV\n    to: 10 mV", "    name: verify\n    from: -10 mV\n    to: 60 mV")
	code, out, _ := runCLI(t, "check", station, bad)
	want := `safety cap: ` + bad + `:81:5: step "verify" reaches 53 mV on the source, above the station cap of 50 mV (` + filepath.Base(station) + ` safety.max_source_voltage)`
	if code != exitUsage || !strings.Contains(out, want+"\n1 problem(s)\n") || strings.Contains(out, `"pre-trim"`) {
		t.Fatalf("exit %d, want 2 and\n%s\ngot:\n%s", code, want, out)
	}
}

// check --steps shows a step repeated per channel once, naming its channels; a
// step of the whole unit, or on one channel, says so.
func TestCheckStepsNamesChannels(t *testing.T) {
	dir := t.TempDir()
	if _, _, err := writeDemoFiles(dir, 1, time.Now()); err != nil {
		t.Fatal(err)
	}
	editDemo(t, dir, "brx200-sequence.yaml",
		"\ndacs:", "\nchannels: {names: [\"A\", \"B\"]}\ndacs:",
		"    name: verify fit\n", "    name: verify fit\n    channels: [\"B\"]\n")
	seq := editDemo(t, dir, "bad-brx200-sequence.yaml", "    name: verify\n", "    name: verify\n    channels: [\"B\"]\n")
	code, out, _ := runCLI(t, "check", "--steps", seq)
	expectAll(t, out,
		"    1  identify                      identify    as found",
		"    3  station zero (channels A, B)  zero_check  as found",
		"    4  pre-trim (channels A, B)      sweep       as found",
		"    7  store                         store       adjustment",
		"    8  verify (channel B)            sweep       as left",
		"    9  verify fit (channel B)        fit         as left",
	)
	if code != 0 || t.Failed() {
		t.Fatalf("exit %d:\n%s", code, out)
	}
}
