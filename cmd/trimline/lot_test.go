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
	code, out, errOut := runCLI(t, "run", "--station", station, "--sequence", sequence, "--serial", "BRX-00001", "--out", dir, "--lot", "L2026-48A")
	if code != exitPass {
		t.Fatalf("run --lot: exit %d\n%s%s", code, out, errOut)
	}
	led, err := ledger.Open(context.Background(), filepath.Join(dir, "ledger.db"))
	if err != nil {
		t.Fatal(err)
	}
	defer led.Close()
	runs, err := led.Runs(context.Background(), "BRX-00001")
	if err != nil || len(runs) != 1 {
		t.Fatalf("runs %+v %v", runs, err)
	}
	rec, err := led.Run(context.Background(), runs[0].RunID)
	if err != nil || rec.Lot != "L2026-48A" {
		t.Fatalf("recorded lot %q (%v), want L2026-48A", rec.Lot, err)
	}
	code, _, errOut = runCLI(t, "run", "--station", station, "--sequence", sequence, "--serial", "BRX-00002", "--out", dir, "--lot", "L1\x07")
	if code != exitUsage || !strings.Contains(errOut, "--lot") {
		t.Fatalf("a lot with a control character: exit %d\n%s", code, errOut)
	}
	if runs, _ := led.Runs(context.Background(), "BRX-00002"); len(runs) != 0 {
		t.Fatalf("a refused lot ran BRX-00002: %+v", runs)
	}
}
