package main

import (
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"trimline/reports/certificate"
	"trimline/reports/ledger"
	"trimline/reports/ledger/ledgertest"
	"trimline/reports/signing"
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
			code, out, errOut := runCLI(t, "audit", "ledger", "--ledger", led, "--keys", filepath.Join(dir, "keys"))
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
		code, out, _ := runCLI(t, "audit", "ledger", "--ledger", led, "--keys", filepath.Join(dir, "keys"))
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
	if code, out, errOut := runCLI(t, "audit", "ledger", "--ledger", led, "--keys", filepath.Join(dir, "keys"), "--save-heads", heads); code != 0 || !strings.Contains(out, "heads saved to "+heads) {
		t.Fatalf("--save-heads: exit %d\n%s%s", code, out, errOut)
	}
	saved, err := os.ReadFile(heads)
	if err != nil || !strings.HasPrefix(string(saved), ledger.HeadsFormat+"\n") || !strings.Contains(string(saved), " 2 station ") ||
		!strings.Contains(string(saved), " audit trail\n") {
		t.Fatalf("heads file:\n%s%v", saved, err)
	}

	runUnits(t, dir, station, sequence, "BRX-10003")
	if code, out, errOut := runCLI(t, "audit", "ledger", "--ledger", led, "--keys", filepath.Join(dir, "keys"), "--heads", heads); code != 0 || !strings.Contains(out, "all 2 found; the chains have only grown") {
		t.Fatalf("--heads after the ledger grew: exit %d\n%s%s", code, out, errOut)
	}

	again := t.TempDir()
	station2, sequence2 := writeReleasedDemo(t, again, 1)
	runUnits(t, again, station2, sequence2, "BRX-10001", "BRX-10002", "BRX-10003")
	// The rebuild is signed with a station key the auditor trusts (the key lives
	// on the station): only the saved heads tell it from the original.
	code, out, errOut := runCLI(t, "audit", "ledger", "--ledger", filepath.Join(again, "ledger.db"), "--keys", filepath.Join(again, "keys"), "--heads", heads)
	if code != exitFail || !strings.Contains(out, "chain intact") || !strings.Contains(out, "SAVED HEAD NOT FOUND: station ") ||
		!strings.Contains(out, "SAVED HEAD NOT FOUND: audit trail: ") || !strings.Contains(out, "HEADS NOT FOUND in ") {
		t.Fatalf("--heads on a rebuilt ledger: exit %d, want %d\n%s%s", code, exitFail, out, errOut)
	}
	if code, _, _ := runCLI(t, "audit", "ledger", "--ledger", led, "--keys", filepath.Join(dir, "keys"), "--heads", filepath.Join(t.TempDir(), "none.txt")); code != exitUsage {
		t.Errorf("--heads with no such file: exit %d, want %d", code, exitUsage)
	}
}

// Every certificate carries its run's chain link, in the PDF and in its seal, and
// audit verify compares it with the ledger's. A forger with the station (and its
// key) who rebuilds the ledger from scratch, the same record signed again and the
// same PDF recorded again, but in a new chain (here a run recorded before it), gets
// a ledger that verifies on its own; the certificate's link is not on its chain,
// so the certificate is reported ALTERED.
func TestAuditVerifyComparesTheChainLink(t *testing.T) {
	dir, id := demoLedger(t, "1")
	ctx := context.Background()
	orig, err := ledger.Open(ctx, filepath.Join(dir, "ledger.db"))
	if err != nil {
		t.Fatal(err)
	}
	rec, meta, err := orig.RunByCertificate(ctx, "TL1-000001")
	orig.Close()
	if err != nil || meta.RunID != id || meta.ChainSeq != 1 || len(meta.ChainHash) != 64 {
		t.Fatalf("the demo's run: %+v %v", meta, err)
	}
	pdfPath := mustGlob(t, filepath.Join(dir, "certificates", "TL1-000001_*.pdf"))[0]
	pdf, err := os.ReadFile(pdfPath)
	if err != nil {
		t.Fatal(err)
	}
	seal, err := signing.ReadSeal(pdfPath + ".seal")
	if err != nil {
		t.Fatal(err)
	}
	if got := certificate.ChainLink(pdf); got != meta.ChainHash || seal.ChainHash != meta.ChainHash || seal.ChainSeq != 1 {
		t.Fatalf("chain link: PDF %q, seal %q %d, ledger %q", got, seal.ChainHash, seal.ChainSeq, meta.ChainHash)
	}
	if code, out, _ := runCLI(t, "audit", "verify", pdfPath, "--keys", filepath.Join(dir, "keys")); code != 0 || !strings.Contains(out, "chain link "+meta.ChainHash+" (run 1 of its chain) matches the ledger's") {
		t.Fatalf("audit verify of the genuine certificate: exit %d\n%s", code, out)
	}

	key, err := signing.Load(filepath.Join(dir, "keys", "TL1.key"))
	if err != nil {
		t.Fatal(err)
	}
	forgedDir := t.TempDir()
	forged := filepath.Join(forgedDir, "ledger.db")
	fl, err := ledger.Open(ctx, forged)
	if err != nil {
		t.Fatal(err)
	}
	sign := ledger.RecordOptions{Prefix: "TL1", Sign: func(number, runID, sum string) (string, []byte, error) {
		return key.ID(), key.Sign(signing.RecordMessage(number, runID, sum)), nil
	}}
	before := *rec
	before.RunID, before.Serial, before.Verdict, before.Fault = "forged-first", "BRX-99999", "FAULT", "meter: timeout"
	if _, err := fl.RecordRunWith(ctx, &before, sign); err != nil {
		t.Fatal(err)
	}
	if cert, err := fl.RecordRunWith(ctx, rec, sign); err != nil || cert != "TL1-000001" {
		t.Fatalf("the record again: %q %v", cert, err)
	}
	if err := fl.AddSignedDocument(ctx, ledger.Document{RunID: id, Number: "TL1-000001", Path: pdfPath, SHA256: seal.PDFSHA256,
		Size: int64(len(pdf)), KeyID: key.ID(), Signature: seal.PDFSignature}); err != nil {
		t.Fatal(err)
	}
	fl.Close()
	keys := filepath.Join(dir, "keys")
	if code, out, _ := runCLI(t, "audit", "ledger", "--ledger", forged, "--keys", keys); code != 0 {
		t.Fatalf("the rebuilt ledger verifies on its own: exit %d\n%s", code, out)
	}
	code, out, _ := runCLI(t, "audit", "verify", "--ledger", forged, "--keys", keys, pdfPath)
	if code != exitFail || !strings.HasPrefix(out, "ALTERED") ||
		!strings.Contains(out, "the certificate carries chain link "+meta.ChainHash+", but the ledger's run "+id+" has link ") ||
		!strings.Contains(out, "(run 2 of its chain): the ledger was rebuilt or rewritten after the certificate was issued") {
		t.Fatalf("audit verify against the rebuilt ledger: exit %d, want %d ALTERED\n%s", code, exitFail, out)
	}
}

// audit ledger --since verifies from saved heads onward: the runs recorded after
// the heads were saved are verified (and counted), those before are trusted
// through the heads; a changed row of a new run is still found; a saved head
// that is not on the chain (a rebuilt ledger, an unknown hash) is refused.
func TestAuditLedgerSince(t *testing.T) {
	dir := t.TempDir()
	station, sequence := writeReleasedDemo(t, dir, 1)
	runUnits(t, dir, station, sequence, "BRX-10001", "BRX-10002")
	led := filepath.Join(dir, "ledger.db")
	keys := filepath.Join(dir, "keys")
	heads := filepath.Join(t.TempDir(), "heads.txt")
	if code, out, errOut := runCLI(t, "audit", "ledger", "--ledger", led, "--keys", keys, "--save-heads", heads); code != 0 {
		t.Fatalf("--save-heads: exit %d\n%s%s", code, out, errOut)
	}
	saved, err := os.ReadFile(heads)
	if err != nil {
		t.Fatal(err)
	}
	stationHash, _, _ := strings.Cut(string(saved[len(ledger.HeadsFormat)+1:]), " ")
	runUnits(t, dir, station, sequence, "BRX-10003", "BRX-10004")

	for _, checkpoint := range []string{heads, stationHash} {
		code, out, errOut := runCLI(t, "audit", "ledger", "--ledger", led, "--keys", keys, "--since", checkpoint)
		if code != 0 || !strings.Contains(out, "2 runs verified after the saved heads, 2 trusted through them (2 signed, 2 verified, 0 unsigned)") ||
			!strings.Contains(out, "runs 1…2 trusted through saved head "+stationHash+"; runs 3…4 verified") || !strings.Contains(out, "chain intact") {
			t.Fatalf("--since %s after two more runs: exit %d\n%s%s", checkpoint, code, out, errOut)
		}
	}

	// A reading of a new run changed through SQL is found.
	l, err := ledger.Open(context.Background(), led)
	if err != nil {
		t.Fatal(err)
	}
	runs, err := l.Runs(context.Background(), "BRX-10004")
	l.Close()
	if err != nil || len(runs) != 1 {
		t.Fatalf("runs of BRX-10004: %v %v", runs, err)
	}
	id := runs[0].RunID
	if err := ledgertest.EditRow(led, "readings", "value_v = value_v + 0.01",
		"rowid = (SELECT rowid FROM readings WHERE run_id = '"+id+"' ORDER BY rowid LIMIT 1 OFFSET 3)"); err != nil {
		t.Fatal(err)
	}
	code, out, errOut := runCLI(t, "audit", "ledger", "--ledger", led, "--keys", keys, "--since", heads)
	if code != exitFail || !strings.Contains(out, "BROKEN at table readings, run "+id+": readings: run "+id+", ") {
		t.Fatalf("--since after a changed reading of a new run: exit %d, want %d\n%s%s", code, exitFail, out, errOut)
	}

	// A ledger rebuilt from scratch does not have the saved heads: refused.
	again := t.TempDir()
	station2, sequence2 := writeReleasedDemo(t, again, 1)
	runUnits(t, again, station2, sequence2, "BRX-10001", "BRX-10002", "BRX-10003")
	code, out, errOut = runCLI(t, "audit", "ledger", "--ledger", filepath.Join(again, "ledger.db"), "--keys", filepath.Join(again, "keys"), "--since", heads)
	if code != exitFail || !strings.Contains(out, "is not on its chain") || strings.Contains(out, "chain intact") {
		t.Fatalf("--since on a rebuilt ledger: exit %d, want %d\n%s%s", code, exitFail, out, errOut)
	}
	code, out, errOut = runCLI(t, "audit", "ledger", "--ledger", filepath.Join(again, "ledger.db"), "--keys", filepath.Join(again, "keys"), "--since", stationHash)
	if code != exitFail || !strings.Contains(out, "SAVED HEAD NOT FOUND: "+stationHash+" is on no chain of ") {
		t.Fatalf("--since HASH on a rebuilt ledger: exit %d, want %d\n%s%s", code, exitFail, out, errOut)
	}
}
