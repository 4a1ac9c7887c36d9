package main

import (
	"io"
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
