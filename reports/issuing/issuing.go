// Package issuing records runs in the ledger and publishes their certificates, in
// an order that survives a crash at any moment: the ledger commit (with the
// certificate number and the record signature) comes first, then the PDF is written
// atomically, then the document is recorded with its own signature, then the
// detached seal is written. A crash between the commit and the document leaves a
// certified run without a document, which Repair finds and publishes again,
// byte-identical, at the next start.
//
// Several stations, and several processes of one station, may share a ledger.
// From before a run is stored until its seal is written, the process holds the
// run's lease in the ledger (lease.go), so a start-up's Repair tells a run in
// flight from one a crash abandoned, and only ever repairs its own station's.
package issuing

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"strings"

	"trimline/reports/certificate"
	"trimline/reports/internal/atomicfile"
	"trimline/reports/ledger"
	"trimline/reports/signing"
	"trimline/sequencer"
)

// Issuer records the runs of one station and sequence. It is not safe for
// concurrent use; one batch uses one Issuer.
type Issuer struct {
	Ledger   *ledger.Ledger
	Key      *signing.Key // nil: unsigned certificates
	Station  *sequencer.Station
	Sequence *sequencer.Sequence
	CertDir  string // folder the certificates are written to
	// Engineering: the batch runs unreleased files; its serials are checked
	// against the earlier engineering runs only (CheckRetests).
	Engineering bool
}

// ErrTestedBefore is what CheckRetests' refusals wrap: a serial that already has
// a measured run in the ledger, given without permission to retest it. It is bad
// input (exit 2), found before any instrument is touched.
var ErrTestedBefore = errors.New("serial already tested")

// TestedBeforeError is one refused serial and its newest measured run.
type TestedBeforeError struct {
	Serial      string
	Earlier     ledger.RunSummary // the newest PASS, FAIL or REVIEW run of Serial
	Engineering bool              // counted among the engineering runs
	InBatch     bool              // the serial is given twice in one batch (Earlier is zero)
}

func (e *TestedBeforeError) Error() string {
	if e.InBatch {
		return fmt.Sprintf("serial %s is given twice in this batch: the second run would be a retest; give --retest to run it again", e.Serial)
	}
	kind := "a recorded run"
	if e.Engineering {
		kind = "a recorded engineering run"
	}
	what := "no certificate"
	if e.Earlier.Certificate != "" {
		what = "certificate " + e.Earlier.Certificate
	}
	return fmt.Sprintf("serial %s already has %s: run %s, %s, %s, %s; give --retest to test it again (a certified retest supersedes the earlier certificate)",
		e.Serial, kind, e.Earlier.RunID, e.Earlier.Verdict, what, e.Earlier.Finished.Format("2006-01-02 15:04 UTC"))
}

// Unwrap returns ErrTestedBefore.
func (e *TestedBeforeError) Unwrap() error { return ErrTestedBefore }

// TestedBefore is every serial of a batch that CheckRetests refused, in batch
// order. Its message names the first few in full and counts the rest, so that a
// whole batch run again reads as one refusal, not a screen of them.
type TestedBefore []*TestedBeforeError

// shownInFull is how many refusals TestedBefore's message spells out.
const shownInFull = 3

func (t TestedBefore) Error() string {
	var b strings.Builder
	for i, e := range t {
		if i == shownInFull {
			rest := make([]string, 0, len(t)-i)
			for _, r := range t[i:] {
				rest = append(rest, r.Serial)
			}
			fmt.Fprintf(&b, "\n… and %d more serial(s) tested before: %s", len(rest), strings.Join(rest, ", "))
			break
		}
		if i > 0 {
			b.WriteString("\n")
		}
		b.WriteString(e.Error())
	}
	return b.String()
}

// Unwrap returns each refusal, so errors.Is(err, ErrTestedBefore) holds.
func (t TestedBefore) Unwrap() []error {
	errs := make([]error, len(t))
	for i, e := range t {
		errs[i] = e
	}
	return errs
}

// CheckRetests refuses, before a batch starts, every serial that already has a
// measured run (PASS, FAIL or REVIEW; engineering runs counted among engineering
// runs only) and every serial given twice, unless retest is true. The error is a
// TestedBefore listing every refused serial; nil when all may run. Before that,
// and whatever retest says, a serial whose measured runs have reached the
// sequence's retest.max_attempts is refused with an *AttemptsUsedError
// (attempts.go). A ledger failure is returned as it is.
func (is *Issuer) CheckRetests(ctx context.Context, serials []string, retest bool) error {
	if err := is.attemptsUsed(ctx, serials); err != nil {
		return err
	}
	if retest {
		return nil
	}
	var errs TestedBefore
	seen := map[string]bool{}
	for _, sn := range serials {
		if seen[sn] {
			errs = append(errs, &TestedBeforeError{Serial: sn, Engineering: is.Engineering, InBatch: true})
			continue
		}
		seen[sn] = true
		run, ok, err := is.Ledger.LastMeasuredRun(ctx, sn, is.Engineering)
		if err != nil {
			return err
		}
		if ok {
			errs = append(errs, &TestedBeforeError{Serial: sn, Earlier: run, Engineering: is.Engineering})
		}
	}
	if len(errs) == 0 {
		return nil
	}
	return errs
}

// Record stores rec and, for a certified verdict, publishes its certificate. It
// returns the certificate number ("" for runs that get none).
//
// When the serial already has a measured run (ledger.LastMeasuredRun, among the
// engineering runs for an engineering record) Record links rec to it
// (rec.RetestOf) before it is hashed and signed; the ledger then supersedes that
// run's certificate if rec is certified. CheckRetests decides beforehand whether a
// retest may run at all; Record links whatever ran, so that a serial never holds
// two current certificates.
func (is *Issuer) Record(ctx context.Context, rec *sequencer.Record) (string, error) {
	return is.record(ctx, rec, rec.Operator, nil)
}

// record is Record with actor as the audit trail's actor of the run's entries
// and, for a review decision, the detail of its audit trail entry
// (ledger.RecordOptions.Review).
func (is *Issuer) record(ctx context.Context, rec *sequencer.Record, actor string, review *ledger.ReviewDetail) (string, error) {
	if rec.RetestOf == "" && rec.Serial != "" {
		earlier, ok, err := is.Ledger.LastMeasuredRun(ctx, rec.Serial, rec.Engineering)
		if err != nil {
			return "", err
		}
		if ok {
			rec.RetestOf = earlier.RunID
		}
	}
	var keyID string
	var sig []byte
	st, seq := is.Station, is.Sequence
	opt := ledger.RecordOptions{Prefix: st.CertificatePrefix, Actor: actor, Review: review, Files: map[string][]byte{}}
	for _, f := range []struct {
		ref sequencer.FileRef
		raw []byte
	}{{st.File, st.Raw}, {seq.File, seq.Raw}, {seq.LimitsFile, seq.LimitsRaw}} {
		if f.ref.SHA256 != "" && f.raw != nil {
			opt.Files[f.ref.SHA256] = f.raw
		}
	}
	recSHA, err := ledger.RecordSHA256(rec)
	if err != nil {
		return "", err
	}
	if is.Key != nil {
		opt.Sign = func(number, runID, recordSHA string) (string, []byte, error) {
			keyID, sig = is.Key.ID(), is.Key.Sign(signing.RecordMessage(number, runID, recordSHA))
			return keyID, sig, nil
		}
	}
	// The run is held from before it is stored until its seal is written, so that
	// no other process's Repair takes it for abandoned meanwhile.
	lease, err := is.hold(ctx, rec.RunID)
	if err != nil {
		return "", err
	}
	defer lease.release()
	cert, err := is.Ledger.RecordRunWith(ctx, rec, opt)
	if err != nil || cert == "" {
		return cert, err
	}
	// The run's chain link, as the ledger stored it, goes on the certificate.
	_, meta, err := is.Ledger.RunByCertificate(ctx, cert)
	if err != nil {
		return cert, err
	}
	if meta.RecordSHA256 != recSHA || meta.KeyID != keyID {
		return cert, fmt.Errorf("%s: the ledger's run %s is not the one just recorded", cert, meta.RunID)
	}
	return cert, is.publish(ctx, rec, meta)
}

// certOptions are the certificate options of a recorded run; they depend only on
// the record and its ledger entry, so a regenerated PDF is byte-identical.
func certOptions(rec *sequencer.Record, meta ledger.RunMeta) certificate.Options {
	opt := certificate.Options{Number: meta.Certificate, RecordSHA256: meta.RecordSHA256, KeyID: meta.KeyID,
		ChainLink: meta.ChainHash, ChainSeq: meta.ChainSeq}
	for _, in := range rec.Instruments {
		if in.RoleKind() == sequencer.DUTPort && in.Identity.Maker != "0" {
			opt.Maker = in.Identity.Maker
		}
	}
	if len(meta.Signature) > 0 {
		opt.VerificationCode = signing.VerificationCode(meta.Signature)
	}
	return opt
}

// render renders the certificate of a recorded run from the record and its ledger
// entry alone: its options and its exact bytes. Issue, Repair and Reprint all
// render through it, so a certificate rendered again is byte-identical.
func render(rec *sequencer.Record, meta ledger.RunMeta) (certificate.Options, []byte, error) {
	return renderWith(rec, certOptions(rec, meta))
}

// earlierLayouts turn the options of the current layout into those of a layout
// certificates were issued in before, newest first, so that a certificate issued
// then is rendered again exactly as it was: before certificates printed their run's
// chain link, they carried none.
var earlierLayouts = []func(certificate.Options) certificate.Options{
	func(o certificate.Options) certificate.Options { o.ChainLink, o.ChainSeq = "", 0; return o },
}

// renderWith renders the certificate of rec with opt.
func renderWith(rec *sequencer.Record, opt certificate.Options) (certificate.Options, []byte, error) {
	var buf bytes.Buffer
	if err := certificate.Write(&buf, rec, opt); err != nil {
		return opt, nil, err
	}
	return opt, buf.Bytes(), nil
}

// sealOf is the seal of document doc of a recorded run rendered with opt.
func sealOf(rec *sequencer.Record, meta ledger.RunMeta, opt certificate.Options, doc ledger.Document) signing.Seal {
	return signing.Seal{Format: signing.SealFormat, Number: meta.Certificate, RunID: rec.RunID, Serial: rec.Serial,
		RecordSHA256: meta.RecordSHA256, PDFSHA256: doc.SHA256, KeyID: meta.KeyID, RecordSignature: meta.Signature,
		PDFSignature: doc.Signature, VerificationCode: opt.VerificationCode, Signed: rec.Finished,
		ChainHash: meta.ChainHash, ChainSeq: meta.ChainSeq}
}

// publish writes the certificate, records it as a document and writes its seal.
func (is *Issuer) publish(ctx context.Context, rec *sequencer.Record, meta ledger.RunMeta) error {
	opt, pdf, err := render(rec, meta)
	if err != nil {
		return fmt.Errorf("%s: write certificate: %w", rec.Serial, err)
	}
	path := filepath.Join(is.CertDir, certificate.FileName(rec, opt))
	if err := atomicfile.Write(path, pdf, 0o644); err != nil {
		return fmt.Errorf("%s: write certificate: %w", rec.Serial, err)
	}
	sum := sha256.Sum256(pdf)
	doc := ledger.Document{RunID: rec.RunID, Number: meta.Certificate, Path: path, SHA256: hex.EncodeToString(sum[:]), Size: int64(len(pdf))}
	if is.Key != nil {
		doc.KeyID, doc.Signature = is.Key.ID(), is.Key.Sign(signing.PDFMessage(meta.Certificate, pdf))
	}
	if err := is.Ledger.AddSignedDocument(ctx, doc); err != nil {
		return fmt.Errorf("%s: record certificate: %w", rec.Serial, err)
	}
	if is.Key == nil {
		return nil
	}
	return signing.WriteSeal(path+".seal", sealOf(rec, meta, opt, doc))
}

// recentChecked is how many of the newest certified runs Repair checks for a lost
// PDF or seal file: a crash interrupts only the run in flight, so the newest few
// cover it without a scan of the whole ledger at every start.
const recentChecked = 20

// Repair publishes again the certificates of this station's abandoned runs: every
// certified run of the station (Station.ID) whose document is missing (a crash
// between the ledger commit and the document), and the newest runs whose PDF or
// seal file is gone (a crash after the document row). A run is abandoned when no
// live process holds its lease (see hold): runs another process is publishing,
// of this station or another sharing the ledger, are left to it, and another
// station's runs are never touched. Repair reports how many certificates it
// published. A voided certificate is never published again; an abandoned run of
// this station sealed with a key the Issuer does not hold is an error.
func (is *Issuer) Repair(ctx context.Context) (int, error) {
	led := is.Ledger
	missing, err := led.MissingDocuments(ctx)
	if err != nil {
		return 0, err
	}
	var certs []string
	for _, m := range missing {
		certs = append(certs, m.Certificate)
	}
	runs, err := led.RecentRuns(ctx, recentChecked)
	if err != nil {
		return 0, err
	}
	for _, r := range runs {
		if r.Certificate != "" && r.Station == is.Station.ID && !slices.Contains(certs, r.Certificate) {
			certs = append(certs, r.Certificate)
		}
	}
	n := 0
	for _, cert := range certs {
		done, err := is.repair(ctx, cert)
		if err != nil {
			return n, fmt.Errorf("repair %s: %w", cert, err)
		}
		if done {
			n++
		}
	}
	// What killed processes left held is repaired now (or was never stored):
	// their leases go, so that they do not pile up.
	if _, err := led.DropAbandonedLeases(ctx, held); err != nil {
		return n, err
	}
	return n, nil
}

// repair publishes certificate cert again if it is this station's, abandoned and
// still lacks its document, PDF or seal, and reports whether it did.
func (is *Issuer) repair(ctx context.Context, cert string) (bool, error) {
	if need, err := is.unpublished(ctx, cert); err != nil || !need {
		return false, err
	}
	rec, meta, err := is.Ledger.RunByCertificate(ctx, cert)
	if err != nil {
		return false, err
	}
	if rec.Station != is.Station.ID {
		return false, nil // another station's run: its own station repairs it
	}
	lease, err := is.claim(ctx, rec.RunID)
	if err != nil || lease == nil {
		return false, err // held by a live process, which publishes it
	}
	defer lease.release()
	// Looked at again with the lease held: the holder may have finished between
	// the first look and the claim.
	if need, err := is.unpublished(ctx, cert); err != nil || !need {
		return false, err
	}
	// A certificate whose document is recorded but whose file or seal was lost
	// is written back as it was issued (in a layout Reprint knows), with no new
	// document. One never published, or one whose issued bytes cannot be rendered
	// again (a layout Reprint does not know), is published now as a new document.
	if docs, err := is.Ledger.DocumentsFor(ctx, cert); err != nil {
		return false, err
	} else if len(docs) > 0 {
		if _, err := reprint(ctx, is.Ledger, cert, "", false); !errors.Is(err, ErrNotIdentical) {
			return err == nil, err
		}
	}
	if meta.KeyID != "" && (is.Key == nil || is.Key.ID() != meta.KeyID) {
		return false, fmt.Errorf("it was sealed with key %s, which this station does not hold", meta.KeyID)
	}
	return true, is.publish(ctx, rec, meta)
}

// unpublished reports whether certificate cert, not voided, lacks its document,
// or its newest document's PDF, or (for a signed one) its seal.
func (is *Issuer) unpublished(ctx context.Context, cert string) (bool, error) {
	st, err := is.Ledger.CertificateStatus(ctx, cert)
	if err != nil {
		return false, err
	}
	if st.Voided {
		return false, nil // a voided certificate is not published again
	}
	docs, err := is.Ledger.DocumentsFor(ctx, cert)
	if err != nil {
		return false, err
	}
	if len(docs) == 0 {
		return true, nil
	}
	d := docs[len(docs)-1]
	if _, err := os.Stat(d.Path); err != nil {
		return true, nil
	}
	if _, err := os.Stat(d.Path + ".seal"); d.KeyID != "" && err != nil {
		return true, nil
	}
	return false, nil
}
