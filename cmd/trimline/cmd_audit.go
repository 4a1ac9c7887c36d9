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
	"trimline/reports/ledger"
	"trimline/reports/signing"
	"trimline/sequencer"
)

func newAuditCmd() *command {
	return &command{
		UsageLine: "trimline audit <command> [flags] [args]",
		Short:     "verify certificates and the ledger, replay recorded runs, void a certificate",
		Commands:  []*command{newAuditVerifyCmd(), newAuditLedgerCmd(), newAuditReplayCmd(), newAuditVoidCmd()},
	}
}

func newAuditVerifyCmd() *command {
	c := &command{
		UsageLine: "trimline audit verify FILE.pdf [--ledger DB] [--keys DIR] [--no-ledger]",
		Short:     "tell whether a certificate PDF is genuine, altered or unknown",
		Long: `Says genuine, altered, unknown, voided or superseded, with the reason: the PDF's
hash against the ledger's document and its signature, the record's signature and
the ledger's hash chain, or, without a ledger, the seal beside the PDF
(FILE.pdf.seal). Superseded is an authentic certificate that is no longer current:
a certified retest of the same serial replaced it ("superseded by NUMBER"). Exit 0
only for genuine (current); 1 for altered, unknown, voided and superseded.`,
	}
	a := newAuditor(c)
	c.Flag.BoolVar(&a.noLedger, "no-ledger", false, "verify from the seal beside the PDF and the trusted keys alone")
	c.Run = func(ctx context.Context, e *env, args []string) error {
		if len(args) != 1 {
			return usagef("usage: trimline audit verify FILE.pdf")
		}
		return a.verify(ctx, e, args[0])
	}
	return c
}

func newAuditLedgerCmd() *command {
	c := &command{
		UsageLine: "trimline audit ledger [--ledger DB] [--keys DIR] [--save-heads FILE] [--heads FILE]",
		Short:     "verify every station's hash chain, the audit trail and every query row",
		Long: `Walks every station's hash chain and the audit trail, compares every row of the
tables people query (readings, results, limit outcomes, fits, trims, files,
instruments, units) with the signed record it came from, and reports the first broken link
or difference with its table, run and column; signatures are checked with the
public keys in --keys. Prints the chain heads to keep elsewhere.

--save-heads FILE writes the heads to FILE (one line per chain: HASH SEQ CHAIN);
keep it outside the station. --heads FILE checks heads saved earlier: each must
still be on its chain at its position, i.e. the chain has only grown since; a
ledger rebuilt or rewritten since fails and the chain is named. Exit 1 when the
chain is broken or a saved head is not found.`,
	}
	a := newAuditor(c)
	saveHeads := c.Flag.String("save-heads", "", "write the chain heads to `file`, to keep outside the ledger")
	heads := c.Flag.String("heads", "", "check the chain heads saved earlier in `file` (by --save-heads)")
	c.Run = func(ctx context.Context, e *env, args []string) error {
		if len(args) != 0 {
			return usagef("usage: %s", c.UsageLine)
		}
		return a.ledger(ctx, e, *heads, *saveHeads)
	}
	return c
}

func newAuditReplayCmd() *command {
	c := &command{
		UsageLine: "trimline audit replay CERT-NUMBER|SERIAL [--ledger DB]",
		Short:     "recompute recorded runs from their raw readings",
		Long: `Recomputes fits, trim codes, uncertainties and verdicts from the stored raw
readings with the stored files, and lists every difference from what was recorded.
Exit 1 when any.`,
	}
	a := newAuditor(c)
	c.Run = func(ctx context.Context, e *env, args []string) error {
		if len(args) != 1 {
			return usagef("usage: trimline audit replay CERT-NUMBER|SERIAL")
		}
		return a.replay(ctx, e, args[0])
	}
	return c
}

func newAuditVoidCmd() *command {
	c := &command{
		UsageLine: "trimline audit void CERT-NUMBER --by NAME --reason TEXT [--ledger DB]",
		Short:     "void a certificate",
		Long:      `Voids a certificate with --by and --reason; it stays in the ledger and the audit trail.`,
	}
	a := newAuditor(c)
	by := c.Flag.String("by", "", "`name` of the person voiding")
	reason := c.Flag.String("reason", "", "`reason` for voiding")
	c.Run = func(ctx context.Context, e *env, args []string) error {
		if len(args) != 1 || *by == "" || *reason == "" {
			return usagef("usage: trimline audit void CERT-NUMBER --by NAME --reason TEXT")
		}
		led, err := a.open(ctx, "")
		if err != nil {
			return err
		}
		defer led.Close()
		if err := led.VoidCertificate(ctx, args[0], *by, *reason); err != nil {
			return badInput(err)
		}
		fmt.Fprintf(e.stdout, "%s voided by %s: %s\n", args[0], *by, *reason)
		return nil
	}
	return c
}

// auditor holds what the audit subcommands share: where the ledger and the
// trusted keys are.
type auditor struct {
	ledgerPath, keysDir string
	noLedger            bool   // verify from the seal alone
	keysFrom            string // where the trusted keys came from, said with every verdict
}

// newAuditor adds the --ledger and --keys flags every audit subcommand takes.
func newAuditor(c *command) *auditor {
	a := &auditor{}
	c.Flag.StringVar(&a.ledgerPath, "ledger", "", "ledger `file` (default ledger.db beside the PDF's certificates folder, or ./trimline-demo/ledger.db)")
	c.Flag.StringVar(&a.keysDir, "keys", "", "`folder` of trusted public keys (*.pub; default: keys beside the ledger — give your own copy when the files came from elsewhere)")
	return a
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
	return ledger.Open(ctx, p)
}

func (a *auditor) keys() (audit.Keys, error) {
	d := a.keysDir
	if d == "" && a.ledgerPath != "" {
		d = filepath.Join(filepath.Dir(a.ledgerPath), "keys")
	}
	if d == "" {
		return audit.Keys{}, nil
	}
	if _, err := os.Stat(d); err != nil {
		return audit.Keys{}, nil
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

// errNotGenuine is a certificate that did not verify as genuine.
var errNotGenuine = errors.New("not genuine")

// verdictOut prints the verification outcome; only genuine succeeds.
func (a *auditor) verdictOut(e *env, file string, v audit.Verdict) error {
	fmt.Fprintf(e.stdout, "%s: %s\n", strings.ToUpper(v.Kind), file)
	for _, r := range v.Reasons {
		fmt.Fprintf(e.stdout, "  %s\n", r)
	}
	if a.keysFrom != "" {
		fmt.Fprintf(e.stdout, "  (%s)\n", a.keysFrom)
	}
	if v.Kind == audit.Genuine {
		return nil
	}
	return report(rejected(fmt.Errorf("%s: %w", v.Kind, errNotGenuine)))
}

func (a *auditor) verify(ctx context.Context, e *env, file string) error {
	pdf, err := audit.ReadPDF(file)
	if err != nil {
		return badInput(err)
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
	if led != nil {
		defer led.Close()
	}
	keys, err := a.keys()
	if err != nil {
		return err
	}
	v, err := audit.Certificate(ctx, led, a.ledgerPath, file, pdf, keys)
	if err != nil {
		return err
	}
	return a.verdictOut(e, file, v)
}

func (a *auditor) ledger(ctx context.Context, e *env, headsFile, saveHeads string) error {
	var saved []ledger.Head
	if headsFile != "" {
		f, err := os.Open(headsFile)
		if err != nil {
			return badInput(err)
		}
		saved, err = ledger.ParseHeads(f)
		f.Close()
		if err != nil {
			return badInput(fmt.Errorf("%s: %w", headsFile, err))
		}
	}
	led, err := a.open(ctx, "")
	if err != nil {
		return err
	}
	defer led.Close()
	keys, err := a.keys()
	if err != nil {
		return err
	}
	rep, err := led.VerifyChain(ctx, "", ledger.ChainOptions{Verify: audit.Verifier(keys)})
	if err != nil {
		return err
	}
	w := e.stdout
	fmt.Fprintf(w, "ledger %s: %d station chain(s), %d runs (%d signed, %d verified, %d unsigned), %d certificates, %d documents, %d stored files, %d audit entries\n",
		a.ledgerPath, rep.Stations, rep.Runs, rep.Signed, rep.Verified, rep.Unsigned, rep.Certificates, rep.Documents, rep.Blobs, rep.AuditEntries)
	if !rep.OK {
		at := brokenAt(rep)
		fmt.Fprintf(w, "BROKEN at %s: %s\n", at, rep.Reason)
		return report(rejected(fmt.Errorf("chain broken at %s: %s", at, rep.Reason)))
	}
	fmt.Fprintln(w, "chain intact; every query row matches its signed record. Heads (keep a copy outside the ledger, e.g. with --save-heads):")
	for _, h := range rep.HeadList() {
		fmt.Fprintf(w, "  %-20s %s (%d)\n", h.Chain(), h.Hash, h.Seq)
	}
	if saveHeads != "" {
		var buf bytes.Buffer
		if err := ledger.FormatHeads(&buf, rep.HeadList()); err != nil {
			return err
		}
		if err := os.WriteFile(saveHeads, buf.Bytes(), 0o644); err != nil {
			return err
		}
		fmt.Fprintf(w, "heads saved to %s\n", saveHeads)
	}
	if saved == nil {
		return nil
	}
	checks, err := led.CheckHeads(ctx, saved)
	if err != nil {
		return err
	}
	var lost []string
	for _, c := range checks {
		if c.Found {
			fmt.Fprintf(w, "  saved head found: %s at %d (now %d)\n", c.Chain(), c.Seq, c.Now)
			continue
		}
		fmt.Fprintf(w, "  SAVED HEAD NOT FOUND: %s\n", c.Why)
		lost = append(lost, c.Chain())
	}
	if len(lost) > 0 {
		fmt.Fprintf(w, "HEADS NOT FOUND in %s: %s; the ledger was rebuilt or rewritten since %s was saved\n", a.ledgerPath, strings.Join(lost, ", "), headsFile)
		return report(rejected(fmt.Errorf("saved heads of %s not found: the ledger was rebuilt or rewritten", strings.Join(lost, ", "))))
	}
	fmt.Fprintf(w, "saved heads %s: all %d found; the chains have only grown since\n", headsFile, len(checks))
	return nil
}

// brokenAt says where a chain broke: the table, the run and the audit trail
// entry, those that are known, or "the ledger".
func brokenAt(rep ledger.ChainReport) string {
	var at []string
	if rep.BrokenTable != "" {
		at = append(at, "table "+rep.BrokenTable)
	}
	if rep.BrokenAt != "" {
		at = append(at, "run "+rep.BrokenAt)
	}
	if rep.BrokenAuditSeq > 0 {
		at = append(at, fmt.Sprintf("audit entry %d", rep.BrokenAuditSeq))
	}
	if len(at) == 0 {
		return "the ledger"
	}
	return strings.Join(at, ", ")
}

// replay recomputes one certificate's run, or every run of a serial number.
func (a *auditor) replay(ctx context.Context, e *env, what string) error {
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
			return err
		}
		for i := len(runs) - 1; i >= 0; i-- {
			rec, err := led.Run(ctx, runs[i].RunID)
			if err != nil {
				return err
			}
			recs = append(recs, rec)
		}
	}
	if len(recs) == 0 {
		return badInput(fmt.Errorf("%s is neither a certificate number nor a serial number in %s", what, a.ledgerPath))
	}
	w := e.stdout
	differ := 0
	for _, rec := range recs {
		diffs, err := audit.Replay(ctx, led, rec)
		switch {
		case errors.Is(err, sequencer.ErrNotReplayable):
			fmt.Fprintf(w, "%s %s %s: not replayed (%s, nothing measured)\n", rec.RunID, rec.Serial, rec.Verdict, rec.Verdict)
			continue
		case err != nil:
			return err
		}
		if len(diffs) == 0 {
			fmt.Fprintf(w, "%s %s %s: reproduced exactly\n", rec.RunID, rec.Serial, rec.Verdict)
			continue
		}
		differ++
		fmt.Fprintf(w, "%s %s %s: %d difference(s)\n", rec.RunID, rec.Serial, rec.Verdict, len(diffs))
		for _, d := range diffs {
			fmt.Fprintf(w, "  %s\n", d)
		}
	}
	if differ > 0 {
		return report(rejected(fmt.Errorf("%d run(s) differ from what was recorded", differ)))
	}
	return nil
}
