package issuing

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"os"

	"trimline/reports/internal/atomicfile"
	"trimline/reports/ledger"
	"trimline/reports/signing"
)

// Errors of Reprint, besides the ledger's (wrapped).
var (
	// ErrNotPublished: the certificate has no document in the ledger yet (a
	// crash before it was recorded); the station's next start publishes it.
	ErrNotPublished = errors.New("certificate not published yet")
	// ErrNotIdentical: the certificate rendered again from the ledger is not,
	// byte for byte, the document the ledger recorded and signed. Nothing is
	// written.
	ErrNotIdentical = errors.New("the certificate rendered again is not the one issued")
)

// Reprinted is what Reprint wrote.
type Reprinted struct {
	Number string
	Path   string // the PDF written
	SHA256 string // its SHA-256, lowercase hex: the ledger's document hash
	Size   int64  // bytes
	// Seal is the seal written beside Path; "" when one was there already or the
	// certificate is unsigned.
	Seal string
}

// Reprint writes certificate number again, from the ledger alone: the record and
// its ledger entry rendered exactly as Repair and the issue render them, to path,
// or where the certificate's newest document was written when path is "". Before
// anything is written the rendered bytes' SHA-256 must be the ledger's document
// hash (the hash the station's PDF signature covers); otherwise it fails with
// ErrNotIdentical. A signed certificate whose seal is missing beside the PDF gets
// it back, made from the ledger (record signature, document signature, chain
// link); no key is needed. An existing PDF at the path is replaced by the issued
// bytes.
//
// Errors (wrapped): ledger.ErrNotFound for a number no run has;
// ledger.ErrVoided for a voided certificate (a void is never published again);
// ErrNotPublished; ErrNotIdentical; ledger.ErrCorrupt for a stored record that
// does not match its hash; file system errors as they are.
func Reprint(ctx context.Context, led *ledger.Ledger, number, path string) (Reprinted, error) {
	return reprint(ctx, led, number, path, true)
}

// reprint is Reprint; with lease false the caller already holds the run's lease
// (the start-up repair).
func reprint(ctx context.Context, led *ledger.Ledger, number, path string, lease bool) (Reprinted, error) {
	fail := func(err error) (Reprinted, error) { return Reprinted{}, fmt.Errorf("reprint %s: %w", number, err) }
	rec, meta, err := led.RunByCertificate(ctx, number)
	if err != nil {
		return fail(err)
	}
	st, err := led.CertificateStatus(ctx, number)
	if err != nil {
		return fail(err)
	}
	if st.Voided {
		return fail(fmt.Errorf("it was voided, and a voided certificate is not published again: %w", ledger.ErrVoided))
	}
	docs, err := led.DocumentsFor(ctx, number)
	if err != nil {
		return fail(err)
	}
	if len(docs) == 0 {
		return fail(fmt.Errorf("the ledger has no document for it yet; the station publishes it at its next start: %w", ErrNotPublished))
	}
	doc := docs[len(docs)-1]
	opt, pdf, err := render(rec, meta)
	if err != nil {
		return fail(err)
	}
	sum := sha256.Sum256(pdf)
	got := hex.EncodeToString(sum[:])
	// A certificate issued in an earlier layout is rendered again in that layout.
	for _, earlier := range earlierLayouts {
		if got == doc.SHA256 && int64(len(pdf)) == doc.Size {
			break
		}
		o, p, err := renderWith(rec, earlier(opt))
		if err != nil {
			return fail(err)
		}
		if s := sha256.Sum256(p); hex.EncodeToString(s[:]) == doc.SHA256 {
			opt, pdf, got = o, p, doc.SHA256
		}
	}
	if got != doc.SHA256 || int64(len(pdf)) != doc.Size {
		// The ledger keeps the record and the document's hash, not its bytes: a
		// release whose certificate layout changed cannot render an older
		// certificate again. Say so, and what still proves the issued one.
		return fail(fmt.Errorf("rendered again it has SHA-256 %s (%d bytes), the issued document %s (%d bytes); nothing written. "+
			"The run was recorded by trimline %s (metrology revision %d): a release whose certificate layout differs cannot render it byte for byte; "+
			"reprint it with that release. The issued PDF still verifies with audit verify, and audit replay re-derives its numbers: %w",
			got, len(pdf), doc.SHA256, doc.Size, rec.Software, rec.Metrology, ErrNotIdentical))
	}
	if path == "" {
		path = doc.Path
	}
	// Hold the run while its files are written, so that a station starting up
	// meanwhile neither repairs it nor removes the temporary files as stale.
	if lease {
		rl, err := claimLease(ctx, led, meta.RunID)
		if err != nil {
			return fail(err)
		}
		if rl == nil {
			return fail(fmt.Errorf("run %s is being published by another process right now; try again when it is done", meta.RunID))
		}
		defer rl.release()
	}
	if err := atomicfile.Write(path, pdf, 0o644); err != nil {
		return fail(err)
	}
	out := Reprinted{Number: number, Path: path, SHA256: got, Size: int64(len(pdf))}
	if doc.KeyID == "" {
		return out, nil
	}
	if _, err := os.Stat(path + ".seal"); err == nil {
		return out, nil
	} else if !errors.Is(err, os.ErrNotExist) {
		return fail(err)
	}
	if err := signing.WriteSeal(path+".seal", sealOf(rec, meta, opt, doc)); err != nil {
		return fail(err)
	}
	out.Seal = path + ".seal"
	return out, nil
}
