package main

import (
	"context"
	"io/fs"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"trimline/reports/ledger"
	"trimline/sequencer"
)

// A demo folder made before sequences were step lists (reports/ledger's
// testdata/schema1-demo: one signed run of schema 1, its certificate, the
// first-layout sequence file and the station's keys) keeps working: the ledger
// migrates and audits clean, the old certificate is genuine, the old run
// replays with no difference, and a retest on it is recorded as schema 2.
func TestOldLedgerKeepsWorking(t *testing.T) {
	src, dir := filepath.Join("..", "..", "reports", "ledger", "testdata", "schema1-demo"), t.TempDir()
	err := filepath.WalkDir(src, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(src, p)
		if d.IsDir() {
			return os.MkdirAll(filepath.Join(dir, rel), 0o700)
		}
		b, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		return os.WriteFile(filepath.Join(dir, rel), b, 0o600)
	})
	if err != nil {
		t.Fatal(err)
	}
	db, keys := filepath.Join(dir, "ledger.db"), filepath.Join(dir, "keys")
	cert := filepath.Join(dir, "certificates", "TL1-000001_BRX-00001.pdf")
	for _, c := range []struct {
		args []string
		code int
		want string
	}{
		{[]string{"audit", "ledger", "--ledger", db, "--keys", keys}, exitPass, "chain intact; every query row matches its signed record"},
		{[]string{"audit", "verify", cert, "--keys", keys}, exitPass, "GENUINE"},
		{[]string{"audit", "replay", "BRX-00001", "--ledger", db, "--keys", keys}, exitPass, "BRX-00001 PASS: reproduced exactly"},
		{[]string{"run", "--station", filepath.Join(dir, "brx200-station.yaml"), "--sequence", filepath.Join(dir, "brx200-sequence.yaml"),
			"--serial", "BRX-00001", "--retest", "--out", dir}, exitPass, "1 passed"},
		{[]string{"audit", "ledger", "--ledger", db, "--keys", keys}, exitPass, "2 runs (2 signed, 2 verified, 0 unsigned)"},
		{[]string{"audit", "verify", cert, "--keys", keys}, exitFail, "SUPERSEDED: "}, // genuine, but no longer current
		{[]string{"audit", "replay", "BRX-00001", "--ledger", db, "--keys", keys}, exitPass, "reproduced exactly"},
	} {
		code, out, errOut := runCLI(t, c.args...)
		if code != c.code || !strings.Contains(out, c.want) || strings.Contains(out, "differ") {
			t.Fatalf("trimline %s: exit %d, want %d and %q\nstdout:\n%s\nstderr:\n%s", strings.Join(c.args, " "), code, c.code, c.want, out, errOut)
		}
	}
	l, err := ledger.Open(context.Background(), db)
	if err != nil {
		t.Fatal(err)
	}
	defer l.Close()
	runs, err := l.Runs(context.Background(), "BRX-00001") // newest first
	if err != nil || len(runs) != 2 {
		t.Fatalf("runs of BRX-00001 after the retest: %+v, %v", runs, err)
	}
	retest, err := l.Run(context.Background(), runs[0].RunID)
	if err != nil {
		t.Fatal(err)
	}
	old, err := l.Run(context.Background(), runs[1].RunID)
	if err != nil {
		t.Fatal(err)
	}
	if old.Schema != 1 || retest.Schema != sequencer.RecordSchema || retest.RetestOf != old.RunID || len(retest.Steps) == 0 {
		t.Fatalf("runs of BRX-00001: schema %d, then schema %d retest of %q with %d steps; want 1, then %d retest of %s with its step log",
			old.Schema, retest.Schema, retest.RetestOf, len(retest.Steps), sequencer.RecordSchema, old.RunID)
	}
}
