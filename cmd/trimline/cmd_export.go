package main

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"

	"trimline/reports/audit"
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
				// The station's public key lives in the keys folder beside the ledger.
				opt.PublicKeyPath = findPub(filepath.Join(led.Dir(), "keys"), d.KeyID)
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
	for _, f := range signing.PublicKeysIn(dir) {
		if signing.KeyID(f.Key) == id {
			return f.Path
		}
	}
	return ""
}

func newImportCmd() *command {
	c := &command{
		UsageLine: "trimline import FILE.zip --ledger DB --keys DIR|--trust FILE",
		Short:     "check a bundle and import it into a ledger for audit",
		Long: `Opens the bundle, checks every member against its hash, and that the record is
signed by a trusted key of its station: --keys DIR (STATION.pub binds a key to a
station) or --trust FILE. No key is trusted by default (exit 2 without either);
the public key inside the bundle counts only when a trust file bound its full
fingerprint to the station. An unsigned run, or one signed by another key, is
refused (exit 1). It then stores the run in the ledger as an imported run: outside
the ledger's own chain and numbering, ready for 'trimline audit replay' (by
certificate number or serial). A bundle imported already, with the same contents,
is reported as "already imported: …" and changes nothing (exit 0).`,
	}
	ledgerPath := c.Flag.String("ledger", "", "ledger `file` to import into (created if missing)")
	keysDir := c.Flag.String("keys", "", "`folder` of trusted public keys: STATION.pub binds a key to a station")
	trustFile := c.Flag.String("trust", "", "trust `file` binding station ids to keys or fingerprints (instead of --keys)")
	actor := c.Flag.String("by", defaultOperator(), "`name` recorded in the audit trail")
	c.Run = func(ctx context.Context, e *env, args []string) error {
		pos := args
		if len(pos) != 1 || *ledgerPath == "" {
			return usagef("usage: trimline import FILE.zip --ledger DB --keys DIR|--trust FILE")
		}
		a := &auditor{keysDir: *keysDir, trustFile: *trustFile}
		if err := a.needTrust("whether the bundle is the station's"); err != nil {
			return err
		}
		t, err := a.trust()
		if err != nil {
			return err
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
		// The key inside the bundle is the sender's word; it counts only when a
		// trust file bound its full fingerprint to the station.
		if b.PublicKey != nil {
			t.Admit(b.PublicKey)
		}
		m := b.Manifest
		if bad := audit.SignedRun(t, m.Station, m.Number, m.RunID, m.RecordSHA256, m.KeyID, m.RecordSignature); bad != "" {
			return rejected(fmt.Errorf("%s: run %s (serial %s) of station %s: %s", pos[0], m.RunID, m.Serial, m.Station, bad))
		}
		pub, _ := t.Key(m.KeyID)
		if err := b.VerifyWith(pub); err != nil {
			return rejected(err)
		}
		b.Verified = append(b.Verified, fmt.Sprintf("signed by %s, a trusted key of station %s (%s)", m.KeyID, m.Station, t.Source))
		led, err := ledger.Open(ctx, *ledgerPath)
		if err != nil {
			return err
		}
		defer led.Close()
		err = bundle.Import(ctx, led, b, *actor)
		if errors.Is(err, ledger.ErrAlreadyImported) {
			// Not a failure: the ledger holds the run as the import would leave it.
			when := ""
			if _, ir, err := led.ImportedRunByID(ctx, m.RunID); err == nil {
				when = fmt.Sprintf(" on %s by %s", ir.ImportedAt.Format("2006-01-02 15:04 UTC"), ir.ImportedBy)
			}
			fmt.Fprintf(e.stdout, "already imported: %s (run %s, serial %s) is in %s, imported%s with the same contents; nothing changed\n",
				m.Number, m.RunID, m.Serial, *ledgerPath, when)
			return nil
		}
		if err != nil {
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
