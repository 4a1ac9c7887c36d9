package main

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"trimline/reports/ledger"
)

// A serial the sequence's rule refuses is bad input (exit 2) with a message that
// names it and the rule: no instrument is opened (an unreachable source would be a
// station fault otherwise), nothing is recorded and no certificate is written.
func TestRunRefusesBadSerials(t *testing.T) {
	dir := t.TempDir()
	station, sequence := writeReleasedDemo(t, dir, 1)
	data, _ := os.ReadFile(station)
	unreachable := filepath.Join(dir, "unreachable.yaml")
	os.WriteFile(unreachable, bytes.Replace(data, []byte("address: sim://source"), []byte("address: tcp://127.0.0.1:1"), 1), 0o644)
	for _, c := range []struct{ serial, rule string }{
		{"", "required"},
		{"-", `"-" is not a serial number`},
		{"BRX 00001", "whitespace"},
		{"BRX-0000\a", "control characters"},
		{"../BRX-00001", "path separators"},
		{"BRX-00001" + strings.Repeat("9", 60), "at most 64"},
		{"SN-17", "does not match the BRX-200 serial pattern BRX-[0-9]{5}"},
	} {
		for _, st := range []string{station, unreachable} {
			code, stdout, errOut := runCLI(t, "run", "--station", st, "--sequence", sequence, "--serial", "BRX-00001", "--serial", c.serial, "--out", dir)
			named := strings.TrimSuffix(strconv.Quote(c.serial[:min(len(c.serial), 64)]), `"`) // long ones are cut
			if code != exitUsage || !strings.Contains(errOut, named) || !strings.Contains(errOut, c.rule) {
				t.Errorf("%s, serial %q: exit %d, want 2 naming the serial and %q\n%s%s", filepath.Base(st), c.serial, code, c.rule, stdout, errOut)
			}
			if strings.Contains(stdout+errOut, "FAULT") {
				t.Errorf("serial %q: reported as a station fault:\n%s%s", c.serial, stdout, errOut)
			}
		}
	}
	// The demo applies the same rule: a hundred thousand units overflow BRX-nnnnn.
	code, _, errOut := runCLI(t, "demo", "--out", dir, "--units", "100000")
	if code != exitUsage || !strings.Contains(errOut, `"BRX-100000"`) {
		t.Errorf("demo --units 100000: exit %d\n%s", code, errOut)
	}
	led, err := ledger.Open(context.Background(), filepath.Join(dir, "ledger.db"))
	if err != nil {
		t.Fatal(err)
	}
	defer led.Close()
	if runs, err := led.Runs(context.Background(), ""); err != nil || len(runs) != 0 {
		t.Errorf("runs recorded: %+v %v", runs, err)
	}
	if pdfs, _ := filepath.Glob(filepath.Join(dir, "certificates", "*")); len(pdfs) != 0 {
		t.Errorf("certificates written: %v", pdfs)
	}
}
