package main

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"strings"

	"trimline/reports/signing"
	"trimline/sequencer"
)

func newKeysCmd() *command {
	return &command{
		UsageLine: "trimline keys <command> [flags]",
		Short:     "make the station's Ed25519 signing key, or a person's passphrase hash",
		Commands:  []*command{newKeysInitCmd(), newKeysPassphraseCmd()},
	}
}

func newKeysInitCmd() *command {
	c := &command{
		UsageLine: "trimline keys init [--dir DIR] [--name NAME]",
		Short:     "make a new Ed25519 key pair",
		Long: `Writes NAME.key (the private key, mode 0600: the station refuses a key file
that others can read) and NAME.pub (the public key, for auditors) into DIR, never
overwriting an existing key. Point the station file at the private key:

  signing:
    key: keys/TL1.key

Every certificate is then sealed: its record and its PDF are signed, the PDF shows
the record hash and a verification code, and a detached NAME.pdf.seal is written
beside it. Give auditors the .pub file.`,
	}
	dir := c.Flag.String("dir", "keys", "`folder` for the key files")
	name := c.Flag.String("name", "station", "key file `name` (without extension)")
	c.Run = func(ctx context.Context, e *env, args []string) error {
		if len(args) != 0 {
			return usagef("usage: %s", c.UsageLine)
		}
		priv, pub, err := signing.Init(*dir, *name)
		if err != nil {
			return badInput(err)
		}
		k, err := signing.Load(priv)
		if err != nil {
			return err
		}
		pem, _ := os.ReadFile(pub)
		fmt.Fprintf(e.stdout, "private key: %s (keep it on the station; mode 0600)\npublic key:  %s\nkey id:      %s\nfingerprint: %s (for an auditor's trust file)\n\n%s",
			priv, pub, k.ID(), signing.Fingerprint(k.Public), pem)
		return nil
	}
	return c
}

// passphraseInput is where keys passphrase reads the passphrase; tests replace it.
var passphraseInput io.Reader = os.Stdin

func newKeysPassphraseCmd() *command {
	c := &command{
		UsageLine: "trimline keys passphrase < PASSPHRASE",
		Short:     "hash a person's passphrase for the station file",
		Long: fmt.Sprintf(`Reads one line from stdin, the passphrase, and prints its hash: PBKDF2-HMAC-
SHA-256 with %d iterations and a random 16-byte salt. Put the hash under the person in the station file's people:

  people:
    - name: Ada Quillfeather
      may: [operate]
      passphrase: "pbkdf2-sha256$600000$…"

The station keeps only the hash; a console served beyond loopback asks for the
passphrase at sign-in. The same passphrase hashes differently every time.`, sequencer.PassphraseIterations),
	}
	c.Run = func(ctx context.Context, e *env, args []string) error {
		if len(args) != 0 {
			return usagef("usage: %s", c.UsageLine)
		}
		line, err := bufio.NewReader(io.LimitReader(passphraseInput, sequencer.MaxPassphrase+3)).ReadString('\n')
		if err != nil && !errors.Is(err, io.EOF) {
			return badInput(fmt.Errorf("read the passphrase from stdin: %w", err))
		}
		pass := strings.TrimSuffix(strings.TrimSuffix(line, "\n"), "\r")
		if pass == "" {
			return usagef("give the passphrase on stdin, one line: trimline keys passphrase < FILE, or type it and press Enter")
		}
		hash, err := sequencer.HashPassphrase(pass)
		if err != nil {
			return badInput(err)
		}
		fmt.Fprintln(e.stdout, hash)
		fmt.Fprintln(e.stderr, "put it under the person in the station file's people: as  passphrase: \""+hash+"\"")
		return nil
	}
	return c
}
