package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// trimline check recognises every file a demo folder holds: the inputs and what
// it can load are "ok", the rest say which command checks them, and none is a
// problem.
func TestCheckRecognisesEveryFileOfADemoFolder(t *testing.T) {
	dir := t.TempDir()
	if code, out, errOut := runCLI(t, "demo", "--out", dir, "--units", "1"); code != 0 {
		t.Fatalf("demo: exit %d\n%s\n%s", code, out, errOut)
	}
	var all []string
	filepath.WalkDir(dir, func(p string, d os.DirEntry, err error) error {
		if err == nil && d.Type().IsRegular() {
			all = append(all, p)
		}
		return nil
	})
	code, out, errOut := runCLI(t, append([]string{"check"}, all...)...)
	if code != 0 || strings.Contains(out, "problem") {
		t.Fatalf("check of every demo file: exit %d\n%s\n%s", code, out, errOut)
	}
	for _, p := range all {
		if !strings.Contains(out, "ok  "+p+" (") && !strings.Contains(out, "--  "+p+" (") {
			t.Errorf("no line for %s", p)
		}
	}
	expectAll(t, out,
		"(trust file: binds station(s) TL1;",
		"(seal: certificate TL1-000001 (BRX-00001), signed by ed25519:",
		"(private key: key ed25519:",
		"(public key: key ed25519:",
		"(ledger (SQLite)): not an input; check its chain and signatures with: trimline audit ledger --ledger ",
		"(certificate or report (PDF)): not an input; verify a certificate with: trimline audit verify ",
		"(run log (JSON lines)): not an input",
	)
	if t.Failed() {
		t.Fatalf("output:\n%s", out)
	}

	// The folder itself stands for its files; a trust file others may write is a
	// problem, as it is to every command that trusts it.
	code, folderOut, _ := runCLI(t, "check", dir)
	if code != 0 || strings.Count(folderOut, "\n") != strings.Count(out, "\n") {
		t.Fatalf("check %s: exit %d\n%s", dir, code, folderOut)
	}
	trust := filepath.Join(dir, "keys", "trust.yaml")
	if err := os.Chmod(trust, 0o666); err != nil {
		t.Fatal(err)
	}
	code, out, _ = runCLI(t, "check", trust)
	if code != exitUsage || !strings.Contains(out, trust+": trust file: ") || !strings.Contains(out, "group or others may write it") {
		t.Fatalf("a trust file others may write: exit %d\n%s", code, out)
	}
}
