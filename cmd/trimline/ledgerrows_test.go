package main

import (
	"context"
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
