package main

import (
	"context"
	"errors"
	"fmt"
	"os"
	"path/filepath"

	"trimline/reports/issuing"
	"trimline/reports/ledger"
)

func newReprintCmd() *command {
	c := &command{
		UsageLine: "trimline reprint CERT-NUMBER [--ledger DB] [--out FILE]",
		Short:     "write an issued certificate again, byte-identical, from the ledger",
		Long: `Renders the certificate again from the ledger's record of the run, exactly as it
was issued, and writes it back where it was issued (or to --out FILE). Nothing is
written unless the rendered bytes have the SHA-256 of the document the ledger
recorded, the hash the station's signature covers; otherwise the command refuses
(exit 1). A signed certificate whose seal (FILE.pdf.seal) is missing gets it back
from the ledger's signatures; no key is needed. A number the ledger does not know,
a voided certificate or one not published yet is bad input (exit 2).`,
	}
	ledgerPath := c.Flag.String("ledger", filepath.Join("trimline-demo", "ledger.db"), "ledger `file`")
	out := c.Flag.String("out", "", "write the certificate to `file` instead of where it was issued")
	c.Run = func(ctx context.Context, e *env, args []string) error {
		if len(args) != 1 {
			return usagef("name one certificate number")
		}
		if _, err := os.Stat(*ledgerPath); err != nil {
			return badInput(fmt.Errorf("no ledger at %s (give --ledger)", *ledgerPath))
		}
		led, err := ledger.Open(ctx, *ledgerPath)
		if err != nil {
			return err
		}
		defer led.Close()
		r, err := issuing.Reprint(ctx, led, args[0], *out)
		switch {
		case errors.Is(err, ledger.ErrNotFound):
			return badInput(fmt.Errorf("%s: no certificate with that number in %s", args[0], *ledgerPath))
		case errors.Is(err, ledger.ErrVoided), errors.Is(err, issuing.ErrNotPublished):
			return badInput(err)
		case errors.Is(err, issuing.ErrNotIdentical), errors.Is(err, ledger.ErrCorrupt):
			return rejected(err)
		case err != nil:
			return err
		}
		fmt.Fprintf(e.stdout, "%s: certificate %s, %d bytes, SHA-256 %s, identical to the issued document\n", r.Path, r.Number, r.Size, r.SHA256)
		if r.Seal != "" {
			fmt.Fprintf(e.stdout, "%s: seal written again from the ledger's signatures\n", r.Seal)
		}
		return nil
	}
	return c
}
