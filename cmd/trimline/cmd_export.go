package main

import (
	"bytes"
	"context"
	"fmt"
	"os"
	"path/filepath"
	"strings"

	"trimline/reports/bundle"
	"trimline/reports/ledger"
	"trimline/reports/signing"
)

func newExportCmd() *command {
	c := &command{
		UsageLine: "trimline export CERT-NUMBER|RUN-ID [--ledger DB] [--out FILE.zip]",
		Short:     "write one unit's full record as an archive bundle for an auditor",
		Long: `Writes a zip with the record (its canonical JSON, signed), the station, sequence
and limit files that were in force, every reading as CSV, the certificate PDF and
its seal, and the station's public key. Every member's hash is in the manifest;
'trimline import' checks them all.`,
	}
	ledgerPath := c.Flag.String("ledger", filepath.Join("trimline-demo", "ledger.db"), "ledger `file`")
	out := c.Flag.String("out", "", "bundle `file` (default NUMBER.zip)")
	c.Run = func(ctx context.Context, e *env, args []string) error {
		pos := args
		if len(pos) != 1 {
			return usagef("name one certificate number or run id")
		}
		led, err := ledger.Open(ctx, *ledgerPath)
		if err != nil {
			return err
		}
		defer led.Close()
		var opt bundle.Options
		if docs, err := led.DocumentsFor(ctx, pos[0]); err == nil && len(docs) > 0 {
			d := docs[len(docs)-1]
			opt.PDFPath = d.Path
			if _, err := os.Stat(d.Path + ".seal"); err == nil {
				opt.SealPath = d.Path + ".seal"
			}
			if d.KeyID != "" {
				// The station's public key lives beside the ledger's keys folder.
				if keys, err := signing.LoadPublicDir(filepath.Join(filepath.Dir(*ledgerPath), "keys")); err == nil {
					if _, ok := keys[d.KeyID]; ok {
						opt.PublicKeyPath = findPub(filepath.Join(filepath.Dir(*ledgerPath), "keys"), d.KeyID)
					}
				}
			}
		}
		var buf bytes.Buffer
		m, err := bundle.Export(ctx, led, pos[0], &buf, opt)
		if err != nil {
			return badInput(err)
		}
		path := *out
		if path == "" {
			path = strings.ReplaceAll(pos[0], string(filepath.Separator), "_") + ".zip"
		}
		if err := os.WriteFile(path, buf.Bytes(), 0o644); err != nil {
			return err
		}
		fmt.Fprintf(e.stdout, "%s: run %s, serial %s, %d members, record SHA-256 %s\n", path, m.RunID, m.Serial, len(m.Files), m.RecordSHA256)
		return nil
	}
	return c
}

// findPub returns the .pub file in dir whose key has the given id.
func findPub(dir, id string) string {
	matches, _ := filepath.Glob(filepath.Join(dir, "*.pub"))
	for _, p := range matches {
		if k, err := signing.LoadPublic(p); err == nil && signing.KeyID(k) == id {
			return p
		}
	}
	return ""
}

func newImportCmd() *command {
	c := &command{
		UsageLine: "trimline import FILE.zip --ledger DB [--keys DIR]",
		Short:     "check a bundle and import it into a ledger for audit",
		Long: `Opens the bundle, checks every member against its hash and the record's
signature, and — with --keys — that the signing key is one you trust. It then
stores the run in the ledger as an imported run: outside the ledger's own chain
and numbering, ready for 'trimline audit replay'.`,
	}
	ledgerPath := c.Flag.String("ledger", "", "ledger `file` to import into (created if missing)")
	keysDir := c.Flag.String("keys", "", "`folder` of trusted public keys")
	actor := c.Flag.String("by", defaultOperator(), "`name` recorded in the audit trail")
	c.Run = func(ctx context.Context, e *env, args []string) error {
		pos := args
		if len(pos) != 1 || *ledgerPath == "" {
			return usagef("usage: trimline import FILE.zip --ledger DB [--keys DIR]")
		}
		f, err := os.Open(pos[0])
		if err != nil {
			return badInput(err)
		}
		defer f.Close()
		fi, err := f.Stat()
		if err != nil {
			return badInput(err)
		}
		b, err := bundle.Open(f, fi.Size()) // reads what it needs; bounds the archive and every member
		if err != nil {
			return rejected(err)
		}
		if *keysDir != "" && b.Manifest.KeyID != "" {
			keys, err := signing.LoadPublicDir(*keysDir)
			if err != nil {
				return badInput(err)
			}
			pub, ok := keys[b.Manifest.KeyID]
			if !ok {
				return rejected(fmt.Errorf("signed by %s, which is not among the trusted keys in %s", b.Manifest.KeyID, *keysDir))
			}
			if err := b.VerifyWith(pub); err != nil {
				return rejected(err)
			}
			b.Verified = append(b.Verified, "signed by a trusted key: "+b.Manifest.KeyID)
		}
		led, err := ledger.Open(ctx, *ledgerPath)
		if err != nil {
			return err
		}
		defer led.Close()
		if err := bundle.Import(ctx, led, b, *actor); err != nil {
			return err
		}
		fmt.Fprintf(e.stdout, "imported %s (run %s, serial %s) into %s\n", b.Manifest.Number, b.Manifest.RunID, b.Manifest.Serial, *ledgerPath)
		for _, v := range b.Verified {
			fmt.Fprintf(e.stdout, "  ✓ %s\n", v)
		}
		for _, n := range b.Notes {
			fmt.Fprintf(e.stdout, "  · %s\n", n)
		}
		return nil
	}
	return c
}
