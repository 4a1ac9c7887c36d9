// Package audit answers an auditor's questions about what the station issued: is
// this PDF a genuine certificate (against the ledger, or against its seal and the
// station's public key alone), and does a recorded run reproduce when its stored
// readings are replayed with the files that were in force.
package audit

import (
	"context"
	"crypto/ed25519"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"os"

	"trimline/reports/certificate"
	"trimline/reports/ledger"
	"trimline/reports/signing"
	"trimline/sequencer"
)

// Keys are the trusted public keys by key ID, as signing.LoadPublicDir reads them.
type Keys = map[string]ed25519.PublicKey

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

// Verdict is the outcome of verifying a certificate: its kind and the reasons,
// in the order they were checked.
type Verdict struct {
	Kind    string
	Reasons []string
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

// Verifier returns a signature check that accepts only the trusted keys.
func Verifier(keys Keys) func(keyID string, msg, sig []byte) bool {
	return func(keyID string, msg, sig []byte) bool {
		pub, ok := keys[keyID]
		return ok && signing.Verify(pub, msg, sig)
	}
}

// Certificate verifies pdf, the contents of the file at path. With a ledger (led,
// named ledgerName in the reasons) it checks the PDF's hash against the ledger's
// document and its signature, the record's signature, the station's hash chain
// and whether the certificate was voided or superseded by a retest; with led nil it checks the seal beside
// the file (path + ".seal") with the trusted keys alone. The error is the
// ledger's, when it could not be read.
func Certificate(ctx context.Context, led *ledger.Ledger, ledgerName, path string, pdf []byte, keys Keys) (Verdict, error) {
	sum := sha256.Sum256(pdf)
	pdfSHA := hex.EncodeToString(sum[:])
	number, runID, _ := certificate.Metadata(pdf)
	var seal *signing.Seal
	if s, err := signing.ReadSeal(path + ".seal"); err == nil {
		seal = &s
		if number == "" {
			number = s.Number
		}
	}
	if led == nil {
		return sealOnly(path, pdf, seal, keys), nil
	}
	doc, err := led.DocumentBySHA(ctx, pdfSHA)
	if errors.Is(err, ledger.ErrNotFound) {
		if number != "" {
			if _, _, err := led.RunByCertificate(ctx, number); err == nil {
				return verdict(Altered, fmt.Sprintf("the ledger issued %s, but no document of it has this file's SHA-256 %s", number, pdfSHA[:16])), nil
			}
			return verdict(Unknown, fmt.Sprintf("%s is not a certificate of the ledger %s", number, ledgerName)), nil
		}
		return verdict(Unknown, "not a document of the ledger "+ledgerName+" and no certificate number found in it"), nil
	} else if err != nil {
		return Verdict{}, err
	}
	rec, meta, err := led.RunByCertificate(ctx, doc.Number)
	if err != nil {
		return verdict(Altered, "document "+doc.Number+" has no run in the ledger: "+err.Error()), nil
	}
	if runID != "" && runID != meta.RunID {
		return verdict(Altered, "the PDF names run "+runID+" but certificate "+doc.Number+" belongs to run "+meta.RunID), nil
	}
	why := []string{fmt.Sprintf("document %s of run %s (serial %s, verdict %s): SHA-256 matches the ledger", doc.Number, meta.RunID, rec.Serial, rec.Verdict)}
	kind, reason := chainLink(pdf, seal, meta)
	why = append(why, reason)
	if kind != "" {
		return verdict(kind, why...), nil
	}
	if meta.KeyID != "" {
		pub, ok := keys[meta.KeyID]
		if !ok {
			return verdict(Unknown, append(why, "signed by "+meta.KeyID+", which is not among the trusted keys (--keys)")...), nil
		}
		if !signing.Verify(pub, signing.RecordMessage(doc.Number, meta.RunID, meta.RecordSHA256), meta.Signature) {
			return verdict(Altered, append(why, "the record signature does not verify")...), nil
		}
		if !signing.Verify(pub, signing.PDFMessage(doc.Number, pdf), doc.Signature) {
			return verdict(Altered, append(why, "the PDF signature does not verify")...), nil
		}
		why = append(why, "record and PDF signatures verify with "+meta.KeyID)
	} else {
		why = append(why, "unsigned: the station had no key when it was issued")
	}
	rep, err := led.VerifyChain(ctx, rec.Station, ledger.ChainOptions{Verify: Verifier(keys)})
	if err != nil {
		return Verdict{}, err
	}
	if !rep.OK {
		return verdict(Altered, append(why, "the ledger's chain is broken: "+rep.Reason)...), nil
	}
	why = append(why, fmt.Sprintf("station %s chain verifies (%d runs)", rec.Station, rep.Runs))
	st, err := led.CertificateStatus(ctx, doc.Number)
	if err != nil {
		return Verdict{}, err
	}
	if st.Voided {
		return verdict(Voided, append(why, fmt.Sprintf("VOIDED by %s on %s: %s", st.VoidedBy, st.VoidedAt.UTC().Format("2006-01-02 15:04 UTC"), st.VoidReason))...), nil
	}
	if st.Superseded {
		return verdict(Superseded, append(why, fmt.Sprintf("superseded by %s: serial %s was retested on %s (run %s); this certificate is no longer current",
			st.SupersededBy, rec.Serial, st.SupersededAt.UTC().Format("2006-01-02 15:04 UTC"), st.SupersededByRun))...), nil
	}
	return verdict(Genuine, why...), nil
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

// sealOnly verifies a PDF against its seal and the trusted keys, without a ledger.
func sealOnly(path string, pdf []byte, seal *signing.Seal, keys Keys) Verdict {
	if seal == nil {
		return verdict(Unknown, "no ledger and no seal ("+path+".seal) to check it against")
	}
	pub, ok := keys[seal.KeyID]
	if !ok {
		return verdict(Unknown, "sealed with key "+seal.KeyID+", which is not among the trusted keys")
	}
	if err := seal.VerifyPDF(pub, pdf); err != nil {
		kind := Altered
		if errors.Is(err, signing.ErrWrongKey) {
			kind = Unknown
		}
		return verdict(kind, err.Error())
	}
	why := []string{"certificate " + seal.Number + " matches its seal, signed by " + seal.KeyID, "(no ledger checked: the run and the chain were not verified)"}
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
