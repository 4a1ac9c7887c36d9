package main

import (
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"trimline/reports/ledger"
	"trimline/reports/ledger/ledgertest"
)

// demoLedger runs the demo with n units in a fresh folder and returns it and the
// run id of the demo's first unit.
func demoLedger(t *testing.T, n string) (dir, runID string) {
	t.Helper()
	dir = t.TempDir()
	if code, out, errOut := runCLI(t, "demo", "--out", dir, "--units", n); code != 0 && code != exitFail {
		t.Fatalf("demo: exit %d\n%s%s", code, out, errOut)
	}
	led, err := ledger.Open(context.Background(), filepath.Join(dir, "ledger.db"))
	if err != nil {
		t.Fatal(err)
	}
	defer led.Close()
	runs, err := led.Runs(context.Background(), "BRX-00001")
	if err != nil || len(runs) != 1 {
		t.Fatalf("runs of BRX-00001: %v %v", runs, err)
	}
	return dir, runs[0].RunID
}

// A reading, a result and a limit outcome changed through SQL (the append-only
// trigger dropped, the row updated, the trigger put back), each in its own ledger:
// the record, its signature and the chain are untouched, and `audit ledger` still
// fails, naming the table, the run and the column. A dropped trigger is named
// with its table.
func TestAuditLedgerFindsAChangedRow(t *testing.T) {
	for _, tc := range []struct {
		table, set, where, column string
	}{
		{"readings", "value_v = value_v + 0.01", "rowid = (SELECT rowid FROM readings WHERE run_id = '%s' ORDER BY rowid LIMIT 1 OFFSET 5)", "value_v"},
		{"results", "value = 1.5", "rowid = (SELECT rowid FROM results WHERE run_id = '%s' AND value IS NOT NULL ORDER BY rowid LIMIT 1)", "value"},
		{"limit_outcomes", "pass = 1 - pass", "rowid = (SELECT rowid FROM limit_outcomes WHERE run_id = '%s' ORDER BY rowid LIMIT 1)", "pass"},
	} {
		t.Run(tc.table, func(t *testing.T) {
			dir, id := demoLedger(t, "2")
			led := filepath.Join(dir, "ledger.db")
			if err := ledgertest.EditRow(led, tc.table, tc.set, strings.ReplaceAll(tc.where, "%s", id)); err != nil {
				t.Fatal(err)
			}
			code, out, errOut := runCLI(t, "audit", "ledger", "--ledger", led)
			want := "BROKEN at table " + tc.table + ", run " + id + ": " + tc.table + ": run " + id + ", "
			if code != exitFail || !strings.Contains(out, want) || !strings.Contains(out, ": "+tc.column+" is ") ||
				!strings.Contains(out, "in the signed record") {
				t.Fatalf("audit ledger after a changed %s row: exit %d, want %d and %q, column %s\n%s%s", tc.table, code, exitFail, want, tc.column, out, errOut)
			}
		})
	}
	t.Run("trigger", func(t *testing.T) {
		dir, _ := demoLedger(t, "1")
		led := filepath.Join(dir, "ledger.db")
		if err := ledgertest.DropTrigger(led, "limit_outcomes_no_delete"); err != nil {
			t.Fatal(err)
		}
		code, out, _ := runCLI(t, "audit", "ledger", "--ledger", led)
		if code != exitFail || !strings.Contains(out, "BROKEN at table limit_outcomes: the append-only trigger limit_outcomes_no_delete of table limit_outcomes is missing") {
			t.Fatalf("audit ledger without a trigger: exit %d\n%s", code, out)
		}
	})
}

// runUnits runs the released demo files of dir on serials, into dir's ledger.
func runUnits(t *testing.T, dir, station, sequence string, serials ...string) {
	t.Helper()
	args := []string{"run", "--station", station, "--sequence", sequence, "--out", dir}
	for _, sn := range serials {
		args = append(args, "--serial", sn)
	}
	if code, out, errOut := runCLI(t, args...); code != 0 && code != exitFail {
		t.Fatalf("run %v: exit %d\n%s%s", serials, code, out, errOut)
	}
}

// Heads saved with --save-heads are found again with --heads after the ledger
// grew; a ledger rebuilt from scratch (same station, same serials, new chains)
// fails --heads, exit 1, naming each chain whose head is gone.
func TestAuditLedgerSavedHeads(t *testing.T) {
	dir := t.TempDir()
	station, sequence := writeReleasedDemo(t, dir, 1)
	runUnits(t, dir, station, sequence, "BRX-10001", "BRX-10002")
	led := filepath.Join(dir, "ledger.db")
	heads := filepath.Join(t.TempDir(), "heads.txt")
	if code, out, errOut := runCLI(t, "audit", "ledger", "--ledger", led, "--save-heads", heads); code != 0 || !strings.Contains(out, "heads saved to "+heads) {
		t.Fatalf("--save-heads: exit %d\n%s%s", code, out, errOut)
	}
	saved, err := os.ReadFile(heads)
	if err != nil || !strings.HasPrefix(string(saved), ledger.HeadsFormat+"\n") || !strings.Contains(string(saved), " 2 station ") ||
		!strings.Contains(string(saved), " audit trail\n") {
		t.Fatalf("heads file:\n%s%v", saved, err)
	}

	runUnits(t, dir, station, sequence, "BRX-10003")
	if code, out, errOut := runCLI(t, "audit", "ledger", "--ledger", led, "--heads", heads); code != 0 || !strings.Contains(out, "all 2 found; the chains have only grown") {
		t.Fatalf("--heads after the ledger grew: exit %d\n%s%s", code, out, errOut)
	}

	again := t.TempDir()
	station2, sequence2 := writeReleasedDemo(t, again, 1)
	runUnits(t, again, station2, sequence2, "BRX-10001", "BRX-10002", "BRX-10003")
	code, out, errOut := runCLI(t, "audit", "ledger", "--ledger", filepath.Join(again, "ledger.db"), "--heads", heads)
	if code != exitFail || !strings.Contains(out, "chain intact") || !strings.Contains(out, "SAVED HEAD NOT FOUND: station ") ||
		!strings.Contains(out, "SAVED HEAD NOT FOUND: audit trail: ") || !strings.Contains(out, "HEADS NOT FOUND in ") {
		t.Fatalf("--heads on a rebuilt ledger: exit %d, want %d\n%s%s", code, exitFail, out, errOut)
	}
	if code, _, _ := runCLI(t, "audit", "ledger", "--ledger", led, "--heads", filepath.Join(t.TempDir(), "none.txt")); code != exitUsage {
		t.Errorf("--heads with no such file: exit %d, want %d", code, exitUsage)
	}
}
