package main

import (
	"context"
	"crypto/ed25519"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"sort"
	"strings"

	"trimline/reports/certificate"
	"trimline/reports/ledger"
	"trimline/reports/signing"
	"trimline/sequencer"
)

func init() { register(newAuditCmd) }

func newAuditCmd() *command {
	c := &command{
		Name:  "audit",
		Usage: "verify FILE.pdf | ledger | replay CERT-NUMBER|SERIAL | void CERT-NUMBER  [--ledger DB] [--keys DIR] [--by NAME] [--reason TEXT]",
		Short: "verify certificates and the ledger, replay recorded runs, void a certificate",
		Long: `verify FILE.pdf    genuine, altered or unknown, with the reason: the PDF's hash
                   against the ledger's document and its signature, the record's
                   signature and the ledger's hash chain, or, without a ledger, the
                   seal beside the PDF (FILE.pdf.seal). Exit 0 only for genuine.
ledger             walks every station's hash chain and the audit trail and
                   reports the first broken link; signatures are checked with the
                   public keys in --keys. Prints the chain heads to keep elsewhere.
replay NUMBER|SN   recomputes fits, trim codes, uncertainties and verdicts from the
                   stored raw readings with the stored files, and lists every
                   difference from what was recorded. Exit 1 when any.
void NUMBER        voids a certificate with --by and --reason; it stays in the
                   ledger and the audit trail.`,
		Flags: newFlags("audit"),
	}
	ledgerPath := c.Flags.String("ledger", "", "ledger `file` (default ledger.db beside the PDF's certificates folder, or ./trimline-demo/ledger.db)")
	keysDir := c.Flags.String("keys", "", "`folder` of trusted public keys (*.pub; default: keys beside the ledger — give your own copy when the files came from elsewhere)")
	by := c.Flags.String("by", "", "`name` of the person voiding")
	reason := c.Flags.String("reason", "", "`reason` for voiding")
	noLedger := c.Flags.Bool("no-ledger", false, "verify from the seal beside the PDF and the trusted keys alone")
	c.Run = func(ctx context.Context, c *command, args []string) error {
		if len(args) == 0 {
			return usageErr("name a subcommand: verify, ledger, replay or void")
		}
		a := &auditor{ledgerPath: *ledgerPath, keysDir: *keysDir, noLedger: *noLedger}
		switch args[0] {
		case "verify":
			if len(args) != 2 {
				return usageErr("usage: trimline audit verify FILE.pdf")
			}
			return a.verify(ctx, args[1])
		case "ledger":
			return a.ledger(ctx)
		case "replay":
			if len(args) != 2 {
				return usageErr("usage: trimline audit replay CERT-NUMBER|SERIAL")
			}
			return a.replay(ctx, args[1])
		case "void":
			if len(args) != 2 || *by == "" || *reason == "" {
				return usageErr("usage: trimline audit void CERT-NUMBER --by NAME --reason TEXT")
			}
			led, err := a.open(ctx, "")
			if err != nil {
				return err
			}
			defer led.Close()
			if err := led.VoidCertificate(ctx, args[1], *by, *reason); err != nil {
				return badInput(err)
			}
			fmt.Fprintf(stdoutW, "%s voided by %s: %s\n", args[1], *by, *reason)
			return nil
		}
		return usageErr("unknown subcommand %q (verify, ledger, replay, void)", args[0])
	}
	return c
}

type auditor struct {
	ledgerPath, keysDir string
	noLedger            bool   // verify from the seal alone
	keysFrom            string // where the trusted keys came from, said with every verdict
}

// open opens the ledger named by --ledger, or the one beside near (a PDF in a
// certificates folder), or the demo's.
func (a *auditor) open(ctx context.Context, near string) (*ledger.Ledger, error) {
	p := a.ledgerPath
	if p == "" && near != "" {
		cand := filepath.Join(filepath.Dir(filepath.Dir(near)), "ledger.db")
		if _, err := os.Stat(cand); err == nil {
			p = cand
		}
	}
	if p == "" {
		p = filepath.Join("trimline-demo", "ledger.db")
	}
	if _, err := os.Stat(p); err != nil {
		return nil, badInput(fmt.Errorf("no ledger at %s (give --ledger)", p))
	}
	a.ledgerPath = p
	led, err := ledger.Open(ctx, p)
	if err != nil {
		return nil, stationErr(err)
	}
	return led, nil
}

func (a *auditor) keys() (map[string]ed25519.PublicKey, error) {
	d := a.keysDir
	if d == "" && a.ledgerPath != "" {
		d = filepath.Join(filepath.Dir(a.ledgerPath), "keys")
	}
	if d == "" {
		return map[string]ed25519.PublicKey{}, nil
	}
	if _, err := os.Stat(d); err != nil {
		return map[string]ed25519.PublicKey{}, nil
	}
	ks, err := signing.LoadPublicDir(d)
	if err != nil {
		return nil, badInput(err)
	}
	a.keysFrom = fmt.Sprintf("trusted keys: %s (%d)", d, len(ks))
	if a.keysDir == "" {
		a.keysFrom += " — the keys beside the ledger; for files that came from elsewhere pass --keys with your own copy of the station's public key"
	}
	return ks, nil
}

// verdict prints the verification outcome; only genuine exits 0.
func (a *auditor) verdictOut(kind, file string, reasons []string) error {
	fmt.Fprintf(stdoutW, "%s: %s\n", strings.ToUpper(kind), file)
	for _, r := range reasons {
		fmt.Fprintf(stdoutW, "  %s\n", r)
	}
	if a.keysFrom != "" {
		fmt.Fprintf(stdoutW, "  (%s)\n", a.keysFrom)
	}
	if kind == "genuine" {
		return nil
	}
	return silent(exitFail)
}

func (a *auditor) verify(ctx context.Context, file string) error {
	pdf, err := os.ReadFile(file)
	if err != nil {
		return badInput(err)
	}
	sum := sha256.Sum256(pdf)
	pdfSHA := hex.EncodeToString(sum[:])
	number, runID, _ := certificate.Metadata(pdf)
	var seal *signing.Seal
	if s, err := signing.ReadSeal(file + ".seal"); err == nil {
		seal = &s
		if number == "" {
			number = s.Number
		}
	}
	explicit := a.ledgerPath != ""
	var led *ledger.Ledger
	lerr := errors.New("no ledger: verifying from the seal alone")
	if !a.noLedger {
		led, lerr = a.open(ctx, file)
	}
	if lerr != nil && explicit && !a.noLedger {
		// A ledger the auditor named must be read; falling back to the seal would
		// hide a voided certificate.
		return lerr
	}
	keys, err := a.keys()
	if err != nil {
		return err
	}
	if lerr != nil {
		// No ledger: the seal and the public key alone.
		if seal == nil {
			return a.verdictOut("unknown", file, []string{"no ledger and no seal (" + file + ".seal) to check it against"})
		}
		pub, ok := keys[seal.KeyID]
		if !ok {
			return a.verdictOut("unknown", file, []string{"sealed with key " + seal.KeyID + ", which is not among the trusted keys"})
		}
		if err := seal.VerifyPDF(pub, pdf); err != nil {
			kind := "altered"
			if errors.Is(err, signing.ErrWrongKey) {
				kind = "unknown"
			}
			return a.verdictOut(kind, file, []string{err.Error()})
		}
		return a.verdictOut("genuine", file, []string{"certificate " + seal.Number + " matches its seal, signed by " + seal.KeyID, "(no ledger checked: the run and the chain were not verified)"})
	}
	defer led.Close()
	doc, err := led.DocumentBySHA(ctx, pdfSHA)
	if errors.Is(err, ledger.ErrNotFound) {
		if number != "" {
			if _, _, err := led.RunByCertificate(ctx, number); err == nil {
				return a.verdictOut("altered", file, []string{fmt.Sprintf("the ledger issued %s, but no document of it has this file's SHA-256 %s", number, pdfSHA[:16])})
			}
			return a.verdictOut("unknown", file, []string{fmt.Sprintf("%s is not a certificate of the ledger %s", number, a.ledgerPath)})
		}
		return a.verdictOut("unknown", file, []string{"not a document of the ledger " + a.ledgerPath + " and no certificate number found in it"})
	} else if err != nil {
		return stationErr(err)
	}
	var why []string
	rec, meta, err := led.RunByCertificate(ctx, doc.Number)
	if err != nil {
		return a.verdictOut("altered", file, []string{"document " + doc.Number + " has no run in the ledger: " + err.Error()})
	}
	if runID != "" && runID != meta.RunID {
		return a.verdictOut("altered", file, []string{"the PDF names run " + runID + " but certificate " + doc.Number + " belongs to run " + meta.RunID})
	}
	why = append(why, fmt.Sprintf("document %s of run %s (serial %s, verdict %s): SHA-256 matches the ledger", doc.Number, meta.RunID, rec.Serial, rec.Verdict))
	if meta.KeyID != "" {
		pub, ok := keys[meta.KeyID]
		if !ok {
			return a.verdictOut("unknown", file, append(why, "signed by "+meta.KeyID+", which is not among the trusted keys (--keys)"))
		}
		if !signing.Verify(pub, signing.RecordMessage(doc.Number, meta.RunID, meta.RecordSHA256), meta.Signature) {
			return a.verdictOut("altered", file, append(why, "the record signature does not verify"))
		}
		if !signing.Verify(pub, signing.PDFMessage(doc.Number, pdf), doc.Signature) {
			return a.verdictOut("altered", file, append(why, "the PDF signature does not verify"))
		}
		why = append(why, "record and PDF signatures verify with "+meta.KeyID)
	} else {
		why = append(why, "unsigned: the station had no key when it was issued")
	}
	rep, err := led.VerifyChain(ctx, rec.Station, ledger.ChainOptions{Verify: verifier(keys)})
	if err != nil {
		return stationErr(err)
	}
	if !rep.OK {
		return a.verdictOut("altered", file, append(why, "the ledger's chain is broken: "+rep.Reason))
	}
	why = append(why, fmt.Sprintf("station %s chain verifies (%d runs)", rec.Station, rep.Runs))
	if st, err := led.CertificateStatus(ctx, doc.Number); err == nil && st.Voided {
		return a.verdictOut("voided", file, append(why, fmt.Sprintf("VOIDED by %s on %s: %s", st.VoidedBy, st.VoidedAt.UTC().Format("2006-01-02 15:04 UTC"), st.VoidReason)))
	}
	return a.verdictOut("genuine", file, why)
}

func verifier(keys map[string]ed25519.PublicKey) func(keyID string, msg, sig []byte) bool {
	return func(keyID string, msg, sig []byte) bool {
		pub, ok := keys[keyID]
		return ok && signing.Verify(pub, msg, sig)
	}
}

func (a *auditor) ledger(ctx context.Context) error {
	led, err := a.open(ctx, "")
	if err != nil {
		return err
	}
	defer led.Close()
	keys, err := a.keys()
	if err != nil {
		return err
	}
	rep, err := led.VerifyChain(ctx, "", ledger.ChainOptions{Verify: verifier(keys)})
	if err != nil {
		return stationErr(err)
	}
	fmt.Fprintf(stdoutW, "ledger %s: %d station chain(s), %d runs (%d signed, %d verified, %d unsigned), %d certificates, %d documents, %d stored files, %d audit entries\n",
		a.ledgerPath, rep.Stations, rep.Runs, rep.Signed, rep.Verified, rep.Unsigned, rep.Certificates, rep.Documents, rep.Blobs, rep.AuditEntries)
	if !rep.OK {
		at := rep.BrokenAt
		if at == "" && rep.BrokenAuditSeq > 0 {
			at = fmt.Sprintf("audit entry %d", rep.BrokenAuditSeq)
		}
		fmt.Fprintf(stdoutW, "BROKEN at %s: %s\n", at, rep.Reason)
		return silent(exitFail)
	}
	fmt.Fprintln(stdoutW, "chain intact. Heads (keep a copy outside the ledger):")
	stations := make([]string, 0, len(rep.Heads))
	for s := range rep.Heads {
		stations = append(stations, s)
	}
	sort.Strings(stations)
	for _, s := range stations {
		fmt.Fprintf(stdoutW, "  station %-8s %s\n", s, rep.Heads[s])
	}
	fmt.Fprintf(stdoutW, "  audit trail      %s\n", rep.AuditHead)
	return nil
}

// replay recomputes one certificate's run, or every run of a serial number.
func (a *auditor) replay(ctx context.Context, what string) error {
	led, err := a.open(ctx, "")
	if err != nil {
		return err
	}
	defer led.Close()
	var recs []*sequencer.Record
	if rec, _, err := led.RunByCertificate(ctx, what); err == nil {
		recs = append(recs, rec)
	} else if rec, _, err := led.ImportedRunByCertificate(ctx, what); err == nil {
		recs = append(recs, rec) // a run imported from another station's bundle
	} else {
		runs, err := led.Runs(ctx, what)
		if err != nil {
			return stationErr(err)
		}
		for i := len(runs) - 1; i >= 0; i-- {
			rec, err := led.Run(ctx, runs[i].RunID)
			if err != nil {
				return stationErr(err)
			}
			recs = append(recs, rec)
		}
	}
	if len(recs) == 0 {
		return badInput(fmt.Errorf("%s is neither a certificate number nor a serial number in %s", what, a.ledgerPath))
	}
	differ := 0
	for _, rec := range recs {
		diffs, err := replayOne(ctx, led, rec)
		switch {
		case errors.Is(err, sequencer.ErrNotReplayable):
			fmt.Fprintf(stdoutW, "%s %s %s: not replayed (%s, nothing measured)\n", rec.RunID, rec.Serial, rec.Verdict, rec.Verdict)
			continue
		case err != nil:
			return err
		}
		if len(diffs) == 0 {
			fmt.Fprintf(stdoutW, "%s %s %s: reproduced exactly\n", rec.RunID, rec.Serial, rec.Verdict)
			continue
		}
		differ++
		fmt.Fprintf(stdoutW, "%s %s %s: %d difference(s)\n", rec.RunID, rec.Serial, rec.Verdict, len(diffs))
		for _, d := range diffs {
			fmt.Fprintf(stdoutW, "  %s\n", d)
		}
	}
	if differ > 0 {
		return silent(exitFail)
	}
	return nil
}

// replayOne loads the files that were in force from the ledger and replays rec.
func replayOne(ctx context.Context, led *ledger.Ledger, rec *sequencer.Record) ([]string, error) {
	data := map[string][]byte{}
	names := map[string]string{}
	for _, f := range rec.Files {
		b, err := led.Blob(ctx, f.SHA256)
		if err != nil {
			return nil, stationErr(fmt.Errorf("%s: the %s file %s (%s) is not in the ledger: %w", rec.RunID, f.Kind, f.Name, f.SHA256[:min(12, len(f.SHA256))], err))
		}
		data[f.Kind], names[f.Kind] = b, f.Name
	}
	st, err := sequencer.ParseStation(names["station"], data["station"])
	if err != nil {
		return nil, stationErr(fmt.Errorf("%s: stored station file: %w", rec.RunID, err))
	}
	seq, err := sequencer.ParseSequence(names["sequence"], data["sequence"], func(string) ([]byte, error) { return data["limits"], nil })
	if err != nil {
		return nil, stationErr(fmt.Errorf("%s: stored sequence file: %w", rec.RunID, err))
	}
	again, err := sequencer.Replay(sequencer.Config{Station: st, Sequence: seq}, rec)
	if err != nil {
		return nil, err
	}
	return sequencer.Differences(rec, again), nil
}
