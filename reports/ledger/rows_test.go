package ledger_test

import (
	"fmt"
	"strings"
	"testing"

	"trimline/reports/ledger"
	"trimline/reports/ledger/ledgertest"
	"trimline/sequencer"
)

// rowsLedger records three signed runs, the middle one the target, and returns
// the file's path, closed.
func rowsLedger(t *testing.T) string {
	t.Helper()
	signer := newSigner("station-key")
	l, path := openLedger(t)
	for i, v := range []sequencer.Verdict{sequencer.Pass, sequencer.Fail, sequencer.Pass} {
		rec := makeRecord(fmt.Sprintf("run-%d", i), fmt.Sprintf("SN-%d", i), v, recordShape{sweeps: 2, points: 4, readings: 3})
		if _, err := l.RecordRunWith(ctx, rec, ledger.RecordOptions{Prefix: "TL1", Sign: signer.sign("station-key")}); err != nil {
			t.Fatal(err)
		}
	}
	if rep, err := l.VerifyChain(ctx, ""); err != nil || !rep.OK {
		t.Fatalf("untouched ledger: %+v %v", rep, err)
	}
	l.Close()
	return path
}

// A value changed in readings, results or limit_outcomes through SQL (the
// append-only trigger dropped, the row updated, the trigger put back) leaves the
// record, its hash, signature and chain intact; VerifyChain finds it by comparing
// the rows with the signed record, and names the table, the run, the row and the
// column with both values. Source of expectations: hand-worked (makeRecord's
// values; 2.5 is not any of them).
func TestVerifyChainComparesRowsWithTheRecord(t *testing.T) {
	for _, tc := range []struct {
		table, set, where string
		column            string
		want              []string // in the reason
	}{
		{"readings", "value_v = 2.5", "run_id = 'run-1' AND sweep = 'verify' AND point_index = 3 AND reading_index = 2", "value_v",
			[]string{"readings: run run-1, sweep verify point 3 reading 2: value_v is 2.5 in the table, 4.499999033333333 in the signed record"}},
		{"results", "value = 2.5e-6", "run_id = 'run-1' AND name = 'post_offset'", "value",
			[]string{"results: run run-1, result post_offset: value is 2.5e-06 in the table, 3.1e-06 in the signed record"}},
		{"limit_outcomes", "pass = 1", "run_id = 'run-1' AND name = 'gain'", "pass",
			[]string{"limit_outcomes: run run-1, limit gain: pass is 1 in the table, 0 in the signed record"}},
		{"limit_outcomes", "zone = 'pass'", "run_id = 'run-1' AND name = 'gain'", "zone",
			[]string{`zone is "pass" in the table, "fail" in the signed record`}},
		{"fits", "slope = 2", "run_id = 'run-1' AND sweep = 'pre-trim'", "slope", []string{"fits: run run-1, fit of sweep pre-trim: slope is 2 in the table, 2.000013"}},
		{"trims", "code = 2100", "run_id = 'run-1' AND dac = 'offset'", "code", []string{"trims: run run-1, trim DAC offset: code is 2100 in the table, 2101"}},
		{"files", "sha256 = 'x'", "run_id = 'run-1' AND kind = 'limits'", "sha256", []string{"files: run run-1, limits file amp10-limits.yaml: sha256"}},
		{"instruments", "cal_due = '2030-01-01'", "run_id = 'run-1' AND role = 'meter'", "cal_due", []string{"instruments: run run-1, instrument meter: cal_due"}},
		{"runs", "ambient_c = 30", "run_id = 'run-1'", "ambient_c", []string{"runs: run run-1: ambient_c is 30 in the table, 23.1 in the signed record"}},
	} {
		t.Run(tc.table+"."+tc.column, func(t *testing.T) {
			path := rowsLedger(t)
			if err := ledgertest.EditRow(path, tc.table, tc.set, tc.where); err != nil {
				t.Fatal(err)
			}
			l, err := ledger.Open(ctx, path)
			if err != nil {
				t.Fatal(err)
			}
			defer l.Close()
			rep, err := l.VerifyChain(ctx, "")
			if err != nil {
				t.Fatal(err)
			}
			if rep.OK || rep.BrokenTable != tc.table || rep.BrokenColumn != tc.column || rep.BrokenAt != "run-1" || rep.Station != "EOL-2" {
				t.Fatalf("VerifyChain after the change: OK %v, table %q, column %q, run %q, station %q: %s",
					rep.OK, rep.BrokenTable, rep.BrokenColumn, rep.BrokenAt, rep.Station, rep.Reason)
			}
			for _, w := range tc.want {
				if !strings.Contains(rep.Reason, w) {
					t.Errorf("reason %q\nlacks %q", rep.Reason, w)
				}
			}
			// The station's own check finds it too.
			if rep, err := l.VerifyChain(ctx, "EOL-2"); err != nil || rep.OK || rep.BrokenTable != tc.table {
				t.Errorf("VerifyChain(EOL-2): %+v %v", rep, err)
			}
		})
	}
}

// A row added to or removed from a run's rows, or left behind by a run that is not
// in the ledger, is a difference too.
func TestVerifyChainFindsMissingAndExtraRows(t *testing.T) {
	for _, tc := range []struct {
		name, q, want string
	}{
		{"extra", `INSERT INTO results (run_id, name, value, unit, valid, note) VALUES ('run-1', 'post_offset', 1, 'V', 1, '')`,
			"results: run run-1: row "},
		{"orphan", `INSERT INTO readings (run_id, sweep, point_index, reading_index, stimulus_v, value_v, flag, taken_at) VALUES ('run-9', 'verify', 0, 0, 0, 0, 'ok', '')`,
			"readings: row 73 belongs to run run-9, which is not in the ledger"},
		{"missing", `DELETE FROM trims WHERE run_id = 'run-2' AND dac = 'gain'`,
			"trims: run run-2, trim DAC gain: no row; the signed record has 2, the table 1"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			path := rowsLedger(t)
			db := rawDB(t, path)
			db.SetMaxOpenConns(1)
			for _, q := range []string{`PRAGMA foreign_keys = OFF`, `DROP TRIGGER trims_no_delete`, tc.q,
				`CREATE TRIGGER trims_no_delete BEFORE DELETE ON trims BEGIN SELECT RAISE(ABORT, 'ledger: trims are append-only'); END`} {
				if _, err := db.Exec(q); err != nil {
					t.Fatalf("%s: %v", q, err)
				}
			}
			db.Close()
			l, err := ledger.Open(ctx, path)
			if err != nil {
				t.Fatal(err)
			}
			defer l.Close()
			rep, err := l.VerifyChain(ctx, "")
			if err != nil || rep.OK || !strings.Contains(rep.Reason, tc.want) {
				t.Fatalf("VerifyChain: %+v %v\nwant a reason with %q", rep, err, tc.want)
			}
		})
	}
}

// A dropped append-only trigger is reported with the table it guarded.
func TestVerifyChainNamesTheTableOfAMissingTrigger(t *testing.T) {
	path := rowsLedger(t)
	if err := ledgertest.DropTrigger(path, "readings_no_update"); err != nil {
		t.Fatal(err)
	}
	l, err := ledger.Open(ctx, path)
	if err != nil {
		t.Fatal(err)
	}
	defer l.Close()
	rep, err := l.VerifyChain(ctx, "")
	if err != nil || rep.OK || rep.BrokenTable != "readings" || !strings.Contains(rep.Reason, "the append-only trigger readings_no_update of table readings is missing") {
		t.Fatalf("VerifyChain without readings_no_update: %+v %v", rep, err)
	}
}

// The units table, which every run updates, is what the runs of each serial
// give, in the order they were stored: a changed product or date is found, a
// unit without runs too.
func TestVerifyChainChecksUnits(t *testing.T) {
	for _, tc := range []struct{ q, want string }{
		{`UPDATE units SET product = 'AMP-20' WHERE serial = 'SN-1'`, `units: unit SN-1: product is "AMP-20" in the table, "AMP-10" from its signed runs`},
		{`UPDATE units SET last_seen = '2030-01-01T00:00:00.000000000Z' WHERE serial = 'SN-2'`, `units: unit SN-2: last_seen is "2030-01-01T00:00:00.000000000Z"`},
		{`INSERT INTO units VALUES ('SN-X', 'AMP-10', '', '')`, "units: unit SN-X has no run in the ledger"},
	} {
		path := rowsLedger(t)
		db := rawDB(t, path)
		if _, err := db.Exec(tc.q); err != nil {
			t.Fatal(err)
		}
		db.Close()
		l, err := ledger.Open(ctx, path)
		if err != nil {
			t.Fatal(err)
		}
		rep, err := l.VerifyChain(ctx, "")
		l.Close()
		if err != nil || rep.OK || rep.BrokenTable != "units" || !strings.Contains(rep.Reason, tc.want) {
			t.Errorf("after %s: %+v %v\nwant %q", tc.q, rep, err, tc.want)
		}
	}
}
