package main

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// A deleted certificate comes back, byte-identical, from the ledger: where it was
// issued, with its seal, verifying as genuine; or to another file. An unknown
// number is bad input.
func TestReprintDeletedCertificate(t *testing.T) {
	dir := t.TempDir()
	if code, out, errOut := runCLI(t, "demo", "--out", dir, "--units", "2"); code != 0 {
		t.Fatalf("demo: %d\n%s%s", code, out, errOut)
	}
	db, keys := filepath.Join(dir, "ledger.db"), filepath.Join(dir, "keys")
	pdf := filepath.Join(dir, "certificates", "TL1-000001_BRX-00001.pdf")
	issued, err := os.ReadFile(pdf)
	if err != nil {
		t.Fatal(err)
	}
	issuedSeal, err := os.ReadFile(pdf + ".seal")
	if err != nil {
		t.Fatal(err)
	}
	os.Remove(pdf)
	os.Remove(pdf + ".seal")

	code, out, errOut := runCLI(t, "reprint", "TL1-000001", "--ledger", db)
	if code != 0 {
		t.Fatalf("reprint: exit %d\n%s%s", code, out, errOut)
	}
	again, err := os.ReadFile(pdf)
	if err != nil || !bytes.Equal(again, issued) {
		t.Fatalf("reprinted PDF differs from the issued one (%v)\n%s", err, out)
	}
	if seal, err := os.ReadFile(pdf + ".seal"); err != nil || !bytes.Equal(seal, issuedSeal) {
		t.Errorf("seal not written back as issued (%v)", err)
	}
	if code, vout, verr := runCLI(t, "audit", "verify", pdf, "--keys", keys); code != 0 || !strings.HasPrefix(vout, "GENUINE") {
		t.Errorf("audit verify of the reprint: exit %d\n%s%s", code, vout, verr)
	}

	other := filepath.Join(t.TempDir(), "copy.pdf")
	if code, out, errOut := runCLI(t, "reprint", "TL1-000001", "--ledger", db, "--out", other); code != 0 {
		t.Fatalf("reprint --out: exit %d\n%s%s", code, out, errOut)
	}
	if got, err := os.ReadFile(other); err != nil || !bytes.Equal(got, issued) {
		t.Errorf("reprint --out: file differs from the issued one (%v)", err)
	}

	if code, out, errOut := runCLI(t, "reprint", "TL1-999999", "--ledger", db); code != exitUsage {
		t.Errorf("unknown number: exit %d, want %d\n%s%s", code, exitUsage, out, errOut)
	}
}
