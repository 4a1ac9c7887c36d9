package main

import (
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"trimline/sequencer"
)

// keys passphrase hashes one line of stdin for a station file's people:; the
// hash it prints checks the passphrase and nothing else, and no input is refused.
func TestKeysPassphrase(t *testing.T) {
	defer func(r io.Reader) { passphraseInput = r }(passphraseInput)
	passphraseInput = strings.NewReader("line one, bench 4\r\nnext line ignored\n")
	code, out, errOut := runCLI(t, "keys", "passphrase")
	if code != exitPass {
		t.Fatalf("exit %d\n%s%s", code, out, errOut)
	}
	hash := strings.TrimSpace(out)
	p := sequencer.Person{Passphrase: hash}
	if !strings.HasPrefix(hash, "pbkdf2-sha256$600000$") || !p.CheckPassphrase("line one, bench 4") || p.CheckPassphrase("line one, bench 4\r") {
		t.Errorf("hash %q does not check the passphrase", hash)
	}
	if !strings.Contains(errOut, `passphrase: "`+hash+`"`) {
		t.Errorf("no hint where the hash goes:\n%s", errOut)
	}
	passphraseInput = strings.NewReader("")
	if code, _, errOut := runCLI(t, "keys", "passphrase"); code != exitUsage || !strings.Contains(errOut, "stdin") {
		t.Errorf("empty stdin: exit %d\n%s", code, errOut)
	}
}

// The demo makes the key pair of the reviewer its station file names; check
// refuses a person's public key it cannot read, at the person's key: line.
func TestCheckPeopleKeys(t *testing.T) {
	dir := t.TempDir()
	station, _, err := writeDemoFiles(dir, 1, testNow())
	if err != nil {
		t.Fatal(err)
	}
	pub := filepath.Join(dir, "keys", "people", "tobias-wrenhollow.pub")
	if _, err := os.Stat(strings.TrimSuffix(pub, ".pub") + ".key"); err != nil {
		t.Fatalf("the demo made no key for its reviewer: %v", err)
	}
	if code, out, _ := runCLI(t, "check", station); code != exitPass {
		t.Fatalf("check of the demo station: exit %d\n%s", code, out)
	}
	os.WriteFile(pub, []byte("not a key\n"), 0o644)
	code, out, _ := runCLI(t, "check", station)
	if code != exitUsage || !strings.Contains(out, "brx200-station.yaml:") || !strings.Contains(out, "cannot use Tobias Wrenhollow's public key") {
		t.Errorf("check with an unreadable person's key: exit %d\n%s", code, out)
	}
}
