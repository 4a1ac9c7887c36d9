package main

import (
	"context"
	"fmt"
	"os"

	"trimline/reports/signing"
)

func newKeysCmd() *command {
	return &command{
		UsageLine: "trimline keys <command> [flags]",
		Short:     "make the station's Ed25519 signing key",
		Commands:  []*command{newKeysInitCmd()},
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
