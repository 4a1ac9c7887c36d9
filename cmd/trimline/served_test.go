package main

import (
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
)

// The demo run over the wire keeps the station's signing and release settings:
// its certificates are sealed and verify as genuine with the station's key, and the
// station file it serves passes check.
func TestDemoOverTCPIsSigned(t *testing.T) {
	if testing.Short() {
		t.Skip("served bench runs in real time")
	}
	dir := t.TempDir()
	code, out, errOut := runCLI(t, "demo", "--out", dir, "--units", "1", "--transport", "tcp")
	if code != 0 {
		t.Fatalf("demo --transport tcp: exit %d\n%s\n%s", code, out, errOut)
	}
	pdfs, _ := filepath.Glob(filepath.Join(dir, "certificates", "*.pdf"))
	if len(pdfs) != 1 {
		t.Fatalf("%d certificates, want 1\n%s", len(pdfs), out)
	}
	seals, _ := filepath.Glob(filepath.Join(dir, "certificates", "*.pdf.seal"))
	if len(seals) != 1 {
		t.Fatalf("no seal beside %s: the certificate was issued unsigned\n%s", pdfs[0], out)
	}
	code, vout, verr := runCLI(t, "audit", "verify", pdfs[0], "--keys", filepath.Join(dir, "keys"), "--ledger", filepath.Join(dir, "ledger.db"))
	if code != 0 || !strings.HasPrefix(vout, "GENUINE") {
		t.Errorf("audit verify: exit %d\n%s\n%s", code, vout, verr)
	}
	// The served simulator is reached through the real tcp:// driver: its *IDN?
	// maker tells it, and the certificate claims nothing. Its times are the
	// wall clock's, so they carry no simulated-bench label.
	if _, err := exec.LookPath("pdftotext"); err == nil {
		raw, err := exec.Command("pdftotext", pdfs[0], "-").Output()
		if err != nil {
			t.Fatal(err)
		}
		text := strings.Join(strings.Fields(string(raw)), " ")
		for _, want := range []string{"SIMULATED BENCH — NOT A MEASUREMENT", "Nothing on this certificate is traceable to the SI: the source and meter roles were bound to simulated instruments"} {
			if !strings.Contains(text, want) {
				t.Errorf("the certificate of a run over tcp:// against the simulator lacks %q", want)
			}
		}
		if strings.Contains(text, "simulated-bench time") {
			t.Error("a run on the wall clock labels its times as the simulated bench's")
		}
	}
	served := filepath.Join(dir, "brx200-station-tcp.yaml")
	if code, cout, cerr := runCLI(t, "check", served); code != 0 {
		t.Errorf("check %s: exit %d\n%s\n%s", served, code, cout, cerr)
	}
}
