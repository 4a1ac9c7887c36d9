package main

import (
	"context"
	"path/filepath"
	"strings"
	"testing"

	"trimline/reports/ledger"
)

// TestRunRecordsTheLot: run --lot records the lot in every run it makes; a
// lot id with a control character is refused (exit 2) before anything runs.
func TestRunRecordsTheLot(t *testing.T) {
	dir := t.TempDir()
	station, sequence := writeReleasedDemo(t, dir, 8)
	code, _, errOut := runCLI(t, "run", "--station", station, "--sequence", sequence, "--serial", "BRX-00002", "--out", dir, "--lot", "L1\x07")
	if code != exitUsage || !strings.Contains(errOut, "--lot") {
		t.Fatalf("a lot with a control character: exit %d\n%s", code, errOut)
	}
	code, out, errOut := runCLI(t, "run", "--station", station, "--sequence", sequence, "--serial", "BRX-00001", "--out", dir, "--lot", "L2026-48A")
	if code != exitPass {
		t.Fatalf("run --lot: exit %d\n%s%s", code, out, errOut)
	}
	if rec := onlyRecord(t, dir, "BRX-00001"); rec.Lot != "L2026-48A" {
		t.Fatalf("recorded lot %q, want L2026-48A", rec.Lot)
	}
	led, err := ledger.Open(context.Background(), filepath.Join(dir, "ledger.db"))
	if err != nil {
		t.Fatal(err)
	}
	defer led.Close()
	if runs, err := led.Runs(context.Background(), "BRX-00002"); err != nil || len(runs) != 0 {
		t.Fatalf("the refused lot ran BRX-00002: %+v %v", runs, err)
	}
}

// TestConsoleRefusesABadLot: console --lot follows run --lot's rule, refused
// (exit 2) before the console listens or opens anything.
func TestConsoleRefusesABadLot(t *testing.T) {
	dir := t.TempDir()
	station, sequence := writeReleasedDemo(t, dir, 8)
	code, _, errOut := runCLI(t, "console", "--station", station, "--sequence", sequence, "--out", dir, "--lot", " L2026-48A")
	if code != exitUsage || !strings.Contains(errOut, "--lot") || !strings.Contains(errOut, "no spaces") {
		t.Fatalf("console --lot with a leading space: exit %d\n%s", code, errOut)
	}
}
