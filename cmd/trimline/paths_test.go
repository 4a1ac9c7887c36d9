package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// Issue 12, item 2: export failed when run from another folder ("open
// trimline-demo/certificates/…"): the ledger stored each document's path relative
// to the working folder of the run that wrote it. Every path the ledger stores is
// now resolved against the ledger's own folder. The demo runs as a user would,
// from a folder of their own with the default relative --out; export, audit
// verify, audit ledger and run (whose start-up repair looks for each recent
// certificate) then run from an unrelated working folder.
func TestLedgerPathsFromAnotherFolder(t *testing.T) {
	home, elsewhere := t.TempDir(), t.TempDir()
	t.Chdir(home)
	if code, out, errOut := runCLI(t, "demo", "--units", "3"); code != 0 {
		t.Fatalf("demo: exit %d\n%s%s", code, out, errOut)
	}
	demo := filepath.Join(home, "trimline-demo")
	cert := filepath.Join(demo, "certificates", "TL1-000001_BRX-00001.pdf")
	before, err := os.ReadFile(cert)
	if err != nil {
		t.Fatal(err)
	}
	t.Chdir(elsewhere)
	led, keys := filepath.Join(demo, "ledger.db"), filepath.Join(demo, "keys")
	code, out, errOut := runCLI(t, "export", "TL1-000001", "--ledger", led, "--out", "b.zip")
	if code != 0 || !strings.Contains(out, "b.zip: run") {
		t.Fatalf("export from another folder: exit %d\n%s%s", code, out, errOut)
	}
	code, out, errOut = runCLI(t, "import", "b.zip", "--ledger", "audit.db", "--keys", keys)
	if code != 0 || !strings.Contains(out, "imported TL1-000001") {
		t.Fatalf("import of the exported bundle: exit %d\n%s%s", code, out, errOut)
	}
	if code, out, errOut := runCLI(t, "audit", "verify", cert, "--keys", keys); code != 0 || !strings.HasPrefix(out, "GENUINE") {
		t.Fatalf("audit verify from another folder: exit %d\n%s%s", code, out, errOut)
	}
	if code, out, errOut := runCLI(t, "audit", "ledger", "--ledger", led, "--keys", keys); code != 0 || !strings.Contains(out, "chain intact") {
		t.Fatalf("audit ledger from another folder: exit %d\n%s%s", code, out, errOut)
	}
	code, out, errOut = runCLI(t, "run", "--station", filepath.Join(demo, "brx200-station.yaml"),
		"--sequence", filepath.Join(demo, "brx200-sequence.yaml"), "--serial", "BRX-00004")
	if code != 0 || !strings.Contains(out, "TL1-000004") || strings.Contains(errOut, "interrupted run") {
		t.Fatalf("run from another folder: exit %d\n%s%s", code, out, errOut)
	}
	if after, _ := os.ReadFile(cert); string(after) != string(before) {
		t.Error("a certificate was written again")
	}
	if strays, _ := filepath.Glob(filepath.Join(elsewhere, "*", "certificates")); len(strays) > 0 {
		t.Errorf("certificates written under the working folder: %v", strays)
	}
}
