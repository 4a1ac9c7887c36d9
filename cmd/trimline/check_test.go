package main

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

// runCLIAt is runCLI with the commands' clock fixed at now.
func runCLIAt(t *testing.T, now time.Time, args ...string) (code int, stdout, stderr string) {
	t.Helper()
	var o, e bytes.Buffer
	code = runEnv(context.Background(), args, &env{stdout: &o, stderr: &e, now: func() time.Time { return now }})
	return code, o.String(), e.String()
}

// trimline check finds, in one pass and each at file:line:col, everything
// production would refuse later; warnings print and leave the exit code 0.
func TestCheckFindsEverythingInOnePass(t *testing.T) {
	dir := t.TempDir()
	now := time.Date(2030, 6, 1, 9, 0, 0, 0, time.UTC)
	station, sequence, err := writeDemoFiles(dir, 1, now.AddDate(-1, 0, 10)) // cal_due: 2030-06-11
	if err != nil {
		t.Fatal(err)
	}
	limitsFile := filepath.Join(dir, "brx200-limits.yaml")
	code, out, _ := runCLIAt(t, now, "check", station, sequence, limitsFile)
	if code != 0 || strings.Count(out, "ok  ") != 3 || strings.Count(out, "warning: the calibration of the") != 2 ||
		!strings.Contains(out, "brx200-station.yaml:18:14: warning: the calibration of the source STD-0117 runs out in 10 days") {
		t.Fatalf("a calibration due in 10 days: want two warnings and exit 0, got exit %d\n%s", code, out)
	}

	edit := func(name string, pairs ...string) string {
		t.Helper()
		return editDemo(t, dir, name, pairs...)
	}
	badStation := edit("brx200-station.yaml",
		"  id: TL1 ", "  id: TL 3 ",
		"cal_due: 2030-06-11", "cal_due: 2030-05-31",
		"key: keys/TL1.key", "key: keys/TL9.key",
		"max_source_voltage: 50 mV", "max_source_voltage: 50 mX",
		"  name: Demo line", "  nmae: Demo line")
	badLimits := edit("brx200-limits.yaml", "product: BRX-200", "product: BRX-300")
	badSequence := edit("brx200-sequence.yaml", "limits: brx200-limits.yaml", "limits: "+filepath.Base(badLimits))
	code, out, _ = runCLIAt(t, now, "check", badStation, badSequence)
	for _, want := range []string{
		`bad-brx200-station.yaml:10:7: id "TL 3" cannot stand in certificate numbers and file names`,
		`bad-brx200-station.yaml:11:3: unknown field "nmae"`,
		`bad-brx200-station.yaml:18:14: the calibration of the source STD-0117 ran out on 2030-05-31`,
		`bad-brx200-station.yaml:34:14: warning: the calibration of the meter DMM-0203 runs out in 10 days`,
		`bad-brx200-station.yaml:58:23: unknown unit "mX"`,
		`bad-brx200-station.yaml:66:8: cannot use the signing key`,
		`bad-brx200-sequence.yaml:11:9: the limit file bad-brx200-limits.yaml is for product "BRX-300"`,
		"1 warning(s)", "6 problem(s)",
	} {
		if !strings.Contains(out, want) {
			t.Errorf("missing %q", want)
		}
	}
	if code != exitUsage || t.Failed() {
		t.Fatalf("exit %d, want 2:\n%s", code, out)
	}

	// A sweep outside the source's rating (the cap raised with it, so only the
	// rating and the cap speak).
	wide := edit("brx200-station.yaml", "voltage: 100 mV", "voltage: 8 mV", "max_source_voltage: 50 mV", "max_source_voltage: 8 mV")
	code, out, _ = runCLIAt(t, now, "check", wide, sequence)
	if code != exitUsage || !strings.Contains(out, "brx200-sequence.yaml:") || !strings.Contains(out, "outside the source's own rating of ±8 mV") {
		t.Fatalf("sweep outside the rating: exit %d\n%s", code, out)
	}
}

// Swapping --station and --sequence says which kind of file was given.
func TestRunSaysWhichKindOfFileWasGiven(t *testing.T) {
	dir := t.TempDir()
	station, sequence, err := writeDemoFiles(dir, 1, testNow())
	if err != nil {
		t.Fatal(err)
	}
	code, _, errOut := runCLI(t, "run", "--station", sequence, "--sequence", station, "--serial", "BRX-00001", "--out", dir)
	if code != exitUsage || !strings.Contains(errOut, "brx200-sequence.yaml:3:1: this is a sequence file (top-level key sequence:), but a station file") ||
		!strings.Contains(errOut, "brx200-station.yaml:9:1: this is a station file (top-level key station:), but a sequence file") {
		t.Fatalf("exit %d, want 2 naming both kinds:\n%s", code, errOut)
	}
}

// The OFX-10 station (roles input, dmm, card) with its meter moved to a real
// address checks clean: the generic driver takes the dmm by its kind, meter.
func TestCheckNamedRolesOnGenericDrivers(t *testing.T) {
	dir := t.TempDir()
	src := filepath.Join("..", "..", "sequencer", "testdata", "ofx10")
	for _, name := range []string{"ofx10-station.yaml", "ofx10-sequence.yaml", "ofx10-limits.yaml"} {
		data, err := os.ReadFile(filepath.Join(src, name))
		if err != nil {
			t.Fatal(err)
		}
		if name == "ofx10-station.yaml" {
			if !bytes.Contains(data, []byte("sim://meter")) {
				t.Fatal("the OFX-10 station has no sim://meter to move")
			}
			data = bytes.Replace(data, []byte("sim://meter"), []byte("tcp://127.0.0.1:5025"), 1)
		}
		if err := os.WriteFile(filepath.Join(dir, name), data, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	now := time.Date(2027, 1, 4, 9, 0, 0, 0, time.UTC)
	code, out, errOut := runCLIAt(t, now, "check", filepath.Join(dir, "ofx10-station.yaml"), filepath.Join(dir, "ofx10-sequence.yaml"))
	if code != 0 || strings.Contains(out+errOut, "generic driver") {
		t.Fatalf("exit %d\n%s\n%s", code, out, errOut)
	}
}

// The GCO-100 (sequencer/testdata/gco100: a gain coefficient and an offset trim
// DAC on one card) checks clean as a folder: its three files load, its roles and
// levels meet the station, and each judged result's TUR is at least 4:1.
func TestCheckCoefficientWithTrimDAC(t *testing.T) {
	dir := filepath.Join("..", "..", "sequencer", "testdata", "gco100")
	now := time.Date(2027, 1, 4, 9, 0, 0, 0, time.UTC)
	code, out, errOut := runCLIAt(t, now, "check", dir)
	if code != 0 || strings.Contains(out, "below the minimum") {
		t.Fatalf("exit %d\n%s\n%s", code, out, errOut)
	}
	for _, want := range []string{"gco100-sequence.yaml (sequence)", "gco100-station.yaml (station)", "gco100-limits.yaml (limits)", "offset after trim", "gain after correction"} {
		if !strings.Contains(out, want) {
			t.Errorf("check's output lacks %q:\n%s", want, out)
		}
	}
}
