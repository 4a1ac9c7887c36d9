package main

import (
	"path/filepath"
	"regexp"
	"strings"
	"testing"
)

// Importing a bundle twice says the second time that it is there already (exit 0,
// nothing changed); import speaks to a person, not in function names; and an
// imported run replays by its serial number as by its certificate number.
func TestImportTwiceAndReplayBySerial(t *testing.T) {
	dir := t.TempDir()
	if code, out, errOut := runCLI(t, "demo", "--out", dir, "--units", "2"); code != 0 {
		t.Fatalf("demo: %d\n%s%s", code, out, errOut)
	}
	keys := filepath.Join(dir, "keys")
	zip := filepath.Join(t.TempDir(), "b.zip")
	if code, out, errOut := runCLI(t, "export", "TL1-000002", "--ledger", filepath.Join(dir, "ledger.db"), "--out", zip); code != 0 {
		t.Fatalf("export: %d\n%s%s", code, out, errOut)
	}
	audit := filepath.Join(t.TempDir(), "audit.db")
	code, out, errOut := runCLI(t, "import", zip, "--ledger", audit, "--keys", keys)
	if code != 0 || !strings.HasPrefix(out, "imported TL1-000002") {
		t.Fatalf("first import: %d\n%s%s", code, out, errOut)
	}
	// Words for a person: no Go identifier in parentheses, no method name.
	if ident := regexp.MustCompile(`\([A-Z][A-Za-z]+[A-Z][A-Za-z]*\)`); ident.MatchString(out) || strings.Contains(out, "VerifyWith") {
		t.Errorf("import output names a function:\n%s", out)
	}

	code, out, errOut = runCLI(t, "import", zip, "--ledger", audit, "--keys", keys)
	if code != 0 || !strings.HasPrefix(out, "already imported: TL1-000002") || strings.HasPrefix(out, "imported ") {
		t.Errorf("second import: exit %d, want 0 and \"already imported: TL1-000002 …\"\n%s%s", code, out, errOut)
	}

	for _, what := range []string{"TL1-000002", "BRX-00002"} {
		code, out, errOut := runCLI(t, "audit", "replay", what, "--ledger", audit, "--keys", keys)
		if code != 0 || !strings.Contains(out, "BRX-00002 PASS: reproduced exactly") {
			t.Errorf("replay %s on the importing ledger: exit %d\n%s%s", what, code, out, errOut)
		}
	}
	// A serial neither recorded nor imported is still bad input.
	if code, out, errOut := runCLI(t, "audit", "replay", "BRX-00001", "--ledger", audit, "--keys", keys); code != exitUsage {
		t.Errorf("replay of a serial the ledger does not have: exit %d, want %d\n%s%s", code, exitUsage, out, errOut)
	}
}
