// Package audit answers an auditor's questions about what the station issued: is
// this PDF a genuine certificate (against the ledger, or against its seal and the
// station's public key alone), and does a recorded run reproduce when its stored
// readings are replayed with the files that were in force.
package audit

import (
	"context"
	"crypto/ed25519"
	"crypto/sha256"
	"encoding/base64"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"os"
	"strings"
	"time"

	"trimline/reports/certificate"
	"trimline/reports/ledger"
	"trimline/reports/signing"
	"trimline/sequencer"
)

// Verdict kinds of a verified certificate.
const (
	Genuine = "genuine"
	Altered = "altered"
	Unknown = "unknown" // not issued by this ledger, or signed by a key not trusted
	Voided  = "voided"
	// Superseded: a genuine certificate that is no longer current, because a
	// certified retest of the same serial replaced it.
	Superseded = "superseded"
)

// NotChecked is the reason every verdict from a seal alone carries: without the
// ledger nothing says whether the certificate was voided or superseded since.
const NotChecked = "NOT CHECKED without the ledger: a seal cannot tell whether the certificate was voided or superseded since (only its ledger knows), nor check the run's record and the station's chain (give --ledger DB)"

// Verdict is the outcome of verifying a certificate: its kind and the reasons,
// in the order they were checked.
type Verdict struct {
	Kind    string
	Reasons []string
	// What the check found the certificate to be, as far as it got: its number,
	// run id and serial ("" when not found, e.g. a file that is no certificate
	// of the ledger), and for a superseded certificate the number of the
	// certificate of the retest that replaced it.
	Number, RunID, Serial string
	SupersededBy          string
	// Simulated is the record's simulated-bench mark (sequencer.SimulatedMark)
	// when the run was made with simulated instruments, so that a genuine
	// document of a simulation is never read as a measurement; "" for a run on
	// real instruments, or where the check did not reach the record (a seal
	// alone does not carry it).
	Simulated string
}

func verdict(kind string, reasons ...string) Verdict { return Verdict{Kind: kind, Reasons: reasons} }

// MaxPDFSize is the largest file ReadPDF reads; a certificate is tens of KB.
const MaxPDFSize = 16 << 20

// ReadPDF reads the file at path for Certificate. A file of more than MaxPDFSize
// bytes is refused with an error that says so, without reading past the bound;
// an os error comes back as it is.
func ReadPDF(path string) ([]byte, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	data, err := io.ReadAll(io.LimitReader(f, MaxPDFSize+1))
	if err != nil {
		return nil, err
	}
	if len(data) > MaxPDFSize {
		return nil, fmt.Errorf("%s: more than %d MiB: not a certificate this station issued", path, MaxPDFSize>>20)
	}
	return data, nil
}

// Verifier returns a signature check that accepts only the trusted keys
// (signing.Trust.Keys).
func Verifier(keys map[string]ed25519.PublicKey) func(keyID string, msg, sig []byte) bool {
	return func(keyID string, msg, sig []byte) bool {
		pub, ok := keys[keyID]
		return ok && signing.Verify(pub, msg, sig)
	}
}

// Certificate verifies pdf, the contents of the file at path, with the keys t
// trusts (no key is trusted by default: t must not be nil). With a ledger (led,
// named ledgerName in the reasons) it checks the PDF's hash against the ledger's
// document and its signature, the record's signature by a key bound to the run's
// station, the station's hash chain, that every run of the station is signed by
// its trusted key (CheckSigners), and whether the certificate was voided or
// superseded by a retest (a void names its approver when signed by one t trusts to
// void, and is flagged otherwise: see VoidApprover); with led nil it checks the seal beside the file (path +
// ".seal") with a trusted station key alone, and says that voids, supersedes and
// the chain were not checked. The error is the ledger's, when it could not be
// read.
func Certificate(ctx context.Context, led *ledger.Ledger, ledgerName, path string, pdf []byte, t *signing.Trust) (Verdict, error) {
	var id Verdict
	v, err := certificateCheck(ctx, led, ledgerName, path, pdf, t, &id)
	v.Number, v.RunID, v.Serial, v.SupersededBy, v.Simulated = id.Number, id.RunID, id.Serial, id.SupersededBy, id.Simulated
	return v, err
}

// certificateCheck is Certificate; it notes in id the certificate's number, run
// id, serial and replacement as it finds them.
func certificateCheck(ctx context.Context, led *ledger.Ledger, ledgerName, path string, pdf []byte, t *signing.Trust, id *Verdict) (Verdict, error) {
	sum := sha256.Sum256(pdf)
	pdfSHA := hex.EncodeToString(sum[:])
	number, runID, _ := certificate.Metadata(pdf)
	var seal *signing.Seal
	if s, err := signing.ReadSeal(path + ".seal"); err == nil {
		seal = &s
		if number == "" {
			number = s.Number
		}
		if s.Number == number {
			id.Serial = s.Serial
		}
	}
	id.Number, id.RunID = number, runID
	if led == nil {
		return sealOnly(path, pdf, seal, t), nil
	}
	doc, err := led.DocumentBySHA(ctx, pdfSHA)
	if errors.Is(err, ledger.ErrNotFound) {
		if number != "" {
			if _, err := led.RunIDOfCertificate(ctx, number); err == nil {
				return verdict(Altered, fmt.Sprintf("the ledger issued %s, but no document of it has this file's SHA-256 %s", number, pdfSHA[:16])), nil
			}
			return verdict(Unknown, fmt.Sprintf("%s is not a certificate of the ledger %s", number, ledgerName)), nil
		}
		return verdict(Unknown, "not a document of the ledger "+ledgerName+" and no certificate number found in it"), nil
	} else if err != nil {
		return Verdict{}, err
	}
	id.Number = doc.Number
	rec, meta, err := led.RunByCertificate(ctx, doc.Number)
	if err != nil {
		return verdict(Altered, "document "+doc.Number+" has no run in the ledger: "+err.Error()), nil
	}
	id.RunID, id.Serial = meta.RunID, rec.Serial
	if runID != "" && runID != meta.RunID {
		return verdict(Altered, "the PDF names run "+runID+" but certificate "+doc.Number+" belongs to run "+meta.RunID), nil
	}
	why := []string{fmt.Sprintf("document %s of run %s (serial %s, verdict %s): SHA-256 matches the ledger", doc.Number, meta.RunID, rec.Serial, rec.Verdict)}
	if sim := rec.Simulated; sim != nil {
		id.Simulated = sim.Mark
		if id.Simulated == "" {
			id.Simulated = sequencer.SimulatedMark
		}
		roles := ""
		if len(sim.Roles) > 0 {
			roles = " (" + strings.Join(sim.Roles, ", ") + ")"
		}
		why = append(why, fmt.Sprintf("%s: the run was made with simulated instruments%s; the document may be genuine, its numbers are no measurement and trace to nothing",
			id.Simulated, roles))
	}
	kind, reason := chainLink(pdf, seal, meta)
	why = append(why, reason)
	if kind != "" {
		return verdict(kind, why...), nil
	}
	// The trust rule: a record of a station is genuine only when signed by a key
	// bound to that station, whatever the ledger says.
	if bad := SignedRun(t, rec.Station, doc.Number, meta.RunID, meta.RecordSHA256, meta.KeyID, meta.Signature); bad != "" {
		kind := Unknown
		if meta.KeyID != "" && t.SignedByStation(rec.Station, meta.KeyID) {
			kind = Altered // the station's own key, but the signature does not verify
		}
		return verdict(kind, append(why, bad)...), nil
	}
	pub, _ := t.Key(meta.KeyID)
	if !signing.Verify(pub, signing.PDFMessage(doc.Number, pdf), doc.Signature) {
		return verdict(Altered, append(why, "the PDF signature does not verify")...), nil
	}
	why = append(why, fmt.Sprintf("record and PDF signatures verify with %s, a trusted key of station %s (%s)", meta.KeyID, rec.Station, t.Source))
	rep, err := led.VerifyChain(ctx, rec.Station, ledger.ChainOptions{Verify: Verifier(t.Keys())})
	if err != nil {
		return Verdict{}, err
	}
	if !rep.OK {
		return verdict(Altered, append(why, "the ledger's chain is broken: "+rep.Reason)...), nil
	}
	unsigned, err := CheckSigners(ctx, led, t, rec.Station)
	if err != nil {
		return Verdict{}, err
	}
	if len(unsigned) > 0 {
		return verdict(Altered, append(why, fmt.Sprintf("the ledger holds %d run(s) of station %s not signed by its trusted key: %s", len(unsigned), rec.Station, listUnsigned(unsigned)))...), nil
	}
	why = append(why, fmt.Sprintf("station %s chain verifies (%d runs, every one signed by its trusted key)", rec.Station, rep.Runs))
	st, err := led.CertificateStatus(ctx, doc.Number)
	if err != nil {
		return Verdict{}, err
	}
	if st.Voided {
		return verdict(Voided, append(why, voidReason(st, t))...), nil
	}
	if st.Superseded {
		id.SupersededBy = st.SupersededBy
		how := "was retested"
		if by, err := led.Run(ctx, st.SupersededByRun); err == nil && by.Disposition != nil && by.Disposition.Of == meta.RunID {
			how = "held for REVIEW, was " + by.Disposition.OnReview() + " by " + by.Disposition.Reviewer
		}
		return verdict(Superseded, append(why, fmt.Sprintf("superseded by %s: serial %s %s on %s (run %s); this certificate is no longer current",
			st.SupersededBy, rec.Serial, how, st.SupersededAt.UTC().Format("2006-01-02 15:04 UTC"), st.SupersededByRun))...), nil
	}
	if rec.Disposition != nil {
		r, err := reviewReason(ctx, led, rec.Disposition)
		if err != nil {
			return Verdict{}, err
		}
		why = append(why, r)
	}
	return verdict(Genuine, why...), nil
}

// reviewReason says how a review decided a unit, as the record signed by the
// station states it, and what the ledger's audit trail holds of it: the
// reviewer's signature over the decision (signing.ReviewMessage) checked with
// the public key recorded beside it. The trail's entry says who decided; the
// record, signed by the station, is what the verdict rests on.
func reviewReason(ctx context.Context, led *ledger.Ledger, dp *sequencer.Disposition) (string, error) {
	s := fmt.Sprintf("%s by %s on %s (%s), replacing the REVIEW certificate %s: %q",
		dp.OnReview(), dp.Reviewer, dp.At.UTC().Format("2006-01-02 15:04 UTC"), dp.Authenticated, dp.OfCertificate, dp.Reason)
	e, ok, err := led.ReviewDecision(ctx, dp.OfCertificate)
	switch {
	case err != nil:
		return "", err
	case !ok:
		return s + "; the audit trail holds no entry of the decision", nil
	case e.Reviewer != dp.Reviewer || e.Decision != dp.Decision || e.Reason != dp.Reason:
		return s + fmt.Sprintf("; the audit trail's entry %d says otherwise: %s by %s: %q", e.Seq, e.Decision, e.Reviewer, e.Reason), nil
	case e.Signature == "":
		return s + fmt.Sprintf("; audit trail entry %d records it, unsigned by the reviewer", e.Seq), nil
	}
	pub, perr := base64.StdEncoding.DecodeString(e.PublicKey)
	sig, serr := base64.StdEncoding.DecodeString(e.Signature)
	at, terr := time.Parse(time.RFC3339Nano, e.SignedAt)
	if perr != nil || serr != nil || terr != nil || len(pub) != ed25519.PublicKeySize || signing.KeyID(pub) != e.KeyID ||
		!signing.Verify(pub, signing.ReviewMessage(dp.OfCertificate, e.Decision, e.Reviewer, e.Reason, at), sig) {
		return s + fmt.Sprintf("; the reviewer's signature in audit trail entry %d does NOT verify", e.Seq), nil
	}
	return s + fmt.Sprintf("; the reviewer's signature in audit trail entry %d verifies with key %s", e.Seq, e.KeyID), nil
}

// VoidApprover returns the approver of approvers who signed st's void, when its
// signature (over signing.VoidMessage, with the name the void was recorded under)
// verifies with the key of an approver who may void.
func VoidApprover(st ledger.Status, approvers *signing.Trust) (signing.Approver, bool) {
	sig := st.VoidSignature
	if !st.Voided || sig.KeyID == "" || approvers == nil {
		return signing.Approver{}, false
	}
	a, ok := approvers.Approver(sig.KeyID)
	if !ok || !a.Can(signing.MayVoid) {
		return signing.Approver{}, false
	}
	raw, err := base64.StdEncoding.DecodeString(sig.Signature)
	if err != nil || !signing.Verify(a.Key, signing.VoidMessage(st.Number, st.VoidedBy, st.VoidReason, sig.At), raw) {
		return signing.Approver{}, false
	}
	return a, true
}

// voidReason says who voided a certificate, and whether an auditor can hold them
// to it.
func voidReason(st ledger.Status, approvers *signing.Trust) string {
	when := st.VoidedAt.UTC().Format("2006-01-02 15:04 UTC")
	if a, ok := VoidApprover(st, approvers); ok {
		as := ""
		if a.Name != st.VoidedBy {
			as = fmt.Sprintf(" (recorded as %s)", st.VoidedBy)
		}
		return fmt.Sprintf("VOIDED by %s%s on %s, signed %s: %s", a.Name, as, when, st.VoidSignature.KeyID, st.VoidReason)
	}
	flag := "unsigned void: recorded without an approver's signature (as every void before voids were signed), so no trusted approver stands behind it"
	switch {
	case st.VoidSignature.KeyID != "" && approvers == nil:
		flag = "signed with key " + st.VoidSignature.KeyID + ", not checked: no approvers given (--keys DIR with approvers/, or --trust FILE)"
	case st.VoidSignature.KeyID != "":
		flag = "void not signed by a trusted approver: key " + st.VoidSignature.KeyID + " is not trusted to void, or its signature does not verify"
	}
	return fmt.Sprintf("VOIDED on %s, recorded as by %s: %s (%s; the certificate is still not current)", when, st.VoidedBy, st.VoidReason, flag)
}

// ErrUntrustedVoid is returned by Void when the key is not that of an approver
// trusted to void certificates.
var ErrUntrustedVoid = errors.New("not the key of an approver trusted to void")

// Void voids certificate number in led for reason, signed with key, which must be
// the key of an approver of approvers who may void (else ErrUntrustedVoid, saying
// so). The void is recorded under the approver's name from their trust entry,
// with the signature over signing.VoidMessage; it returns that approver. Other
// errors are the ledger's (ledger.ErrNotFound, ledger.ErrVoided, ledger.ErrInvalid).
func Void(ctx context.Context, led *ledger.Ledger, number, reason string, key *signing.Key, approvers *signing.Trust) (signing.Approver, error) {
	if key == nil || approvers == nil {
		return signing.Approver{}, fmt.Errorf("void %s: a void is signed by a trusted approver's key: %w", number, ErrUntrustedVoid)
	}
	a, ok := approvers.Approver(key.ID())
	if !ok {
		return signing.Approver{}, fmt.Errorf("void %s: key %s is not an approver's in %s: %w", number, key.ID(), approvers.Source, ErrUntrustedVoid)
	}
	if !a.Can(signing.MayVoid) {
		return signing.Approver{}, fmt.Errorf("void %s: %s (key %s) may not void certificates (%s): %w", number, a.Name, key.ID(), approvers.Source, ErrUntrustedVoid)
	}
	at := time.Now().UTC()
	sig := key.Sign(signing.VoidMessage(number, a.Name, reason, at))
	if err := led.SignedVoid(ctx, number, a.Name, reason, ledger.VoidSignature{At: at, KeyID: key.ID(), Signature: base64.StdEncoding.EncodeToString(sig)}); err != nil {
		return signing.Approver{}, err
	}
	return a, nil
}

// chainLink compares the chain link the certificate carries (in the PDF, or in
// its seal for a PDF without one) with the ledger's link of its run. A ledger
// rebuilt or rewritten after the certificate was issued has another link there:
// the verdict is Altered. kind is "" when they agree (or the certificate carries
// no link, being older than that); reason says which.
func chainLink(pdf []byte, seal *signing.Seal, meta ledger.RunMeta) (kind, reason string) {
	type carried struct{ where, link string }
	var links []carried
	if l := certificate.ChainLink(pdf); l != "" {
		links = append(links, carried{"the certificate", l})
	}
	if seal != nil && seal.ChainHash != "" && seal.Number == meta.Certificate {
		links = append(links, carried{"its seal", seal.ChainHash})
	}
	if len(links) == 0 {
		return "", "the certificate carries no chain link (issued before certificates carried one): not compared with the ledger's"
	}
	for _, c := range links {
		if c.link != meta.ChainHash {
			return Altered, fmt.Sprintf("%s carries chain link %s, but the ledger's run %s has link %s (run %d of its chain): the ledger was rebuilt or rewritten after the certificate was issued",
				c.where, c.link, meta.RunID, meta.ChainHash, meta.ChainSeq)
		}
	}
	return "", fmt.Sprintf("chain link %s (run %d of its chain) matches the ledger's", meta.ChainHash, meta.ChainSeq)
}

// sealOnly verifies a PDF against its seal and the trusted station keys, without
// a ledger.
func sealOnly(path string, pdf []byte, seal *signing.Seal, t *signing.Trust) Verdict {
	if seal == nil {
		return verdict(Unknown, "no ledger and no seal ("+path+".seal) to check it against")
	}
	station := stationOf(t, seal.KeyID)
	pub, ok := t.Key(seal.KeyID)
	if !ok || station == "" {
		return verdict(Unknown, "sealed with key "+seal.KeyID+", which is not a trusted station key ("+t.Source+")")
	}
	if err := seal.VerifyPDF(pub, pdf); err != nil {
		kind := Altered
		if errors.Is(err, signing.ErrWrongKey) {
			kind = Unknown
		}
		return verdict(kind, err.Error())
	}
	why := []string{"certificate " + seal.Number + " matches its seal, signed by " + seal.KeyID + ", a trusted key of station " + station, NotChecked}
	if l := certificate.ChainLink(pdf); l != "" {
		why = append(why, "its chain link "+l+" must be on the station's chain in the ledger (trimline audit verify with the ledger checks it)")
	}
	return verdict(Genuine, why...)
}

// Replay loads the station, sequence and limit files that were in force for rec
// from the ledger, replays rec's stored readings with them and returns every
// difference from what was recorded. A record with nothing measured gives
// sequencer.ErrNotReplayable.
func Replay(ctx context.Context, led *ledger.Ledger, rec *sequencer.Record) ([]string, error) {
	data := map[string][]byte{}
	names := map[string]string{}
	for _, f := range rec.Files {
		b, err := led.Blob(ctx, f.SHA256)
		if err != nil {
			return nil, fmt.Errorf("%s: the %s file %s (%s) is not in the ledger: %w", rec.RunID, f.Kind, f.Name, f.SHA256[:min(12, len(f.SHA256))], err)
		}
		data[f.Kind], names[f.Kind] = b, f.Name
	}
	st, err := sequencer.ParseRecordedStation(names[sequencer.FileStation], data[sequencer.FileStation])
	if err != nil {
		return nil, fmt.Errorf("%s: stored station file: %w", rec.RunID, err)
	}
	seq, err := sequencer.ParseSequence(names[sequencer.FileSequence], data[sequencer.FileSequence], func(string) ([]byte, error) { return data[sequencer.FileLimits], nil })
	if err != nil {
		return nil, fmt.Errorf("%s: stored sequence file: %w", rec.RunID, err)
	}
	again, err := sequencer.Replay(sequencer.Config{Station: st, Sequence: seq}, rec)
	if err != nil {
		return nil, err
	}
	return sequencer.Differences(rec, again), nil
}
