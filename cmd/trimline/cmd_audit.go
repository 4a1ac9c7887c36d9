package main

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
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
		UsageLine: "trimline audit verify FILE.pdf --keys DIR|--trust FILE [--ledger DB] [--no-ledger] [--json]",
		Short:     "tell whether a certificate PDF is genuine, altered or unknown",
		Long: `Says genuine, altered, unknown, voided or superseded, with the reason: the PDF's
hash against the ledger's document and its signature, the record's signature by a
trusted key of the run's station, the ledger's hash chain and that every run of
that station is signed by its trusted key. Superseded is an authentic certificate
that is no longer current: a certified retest of the same serial replaced it
("superseded by NUMBER").

No key is trusted by default: give --keys DIR (STATION.pub binds a key to a
station) or --trust FILE, your own copy, kept away from the station. Without
either the command cannot decide and exits 2.

The ledger is --ledger, else ledger.db in the folder above the certificate's own
(the station's output folder, which holds certificates/ and ledger.db); when there
is none the command refuses (exit 2). --no-ledger checks the seal beside the PDF
(FILE.pdf.seal) alone, and says that voids, supersedes and the chain were not
checked. Exit 0 only for genuine (current); 1 for altered, unknown, voided and
superseded.`,
	}
	a := newAuditor(c)
	c.Flag.BoolVar(&a.noLedger, "no-ledger", false, "verify from the seal beside the PDF and the trusted keys alone")
	a.json = jsonFlag(c, "the verdict")
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
		UsageLine: "trimline audit ledger --keys DIR|--trust FILE [--ledger DB] [--save-heads FILE] [--heads FILE] [--since CHECKPOINT]",
		Short:     "verify every station's hash chain, the audit trail and every query row",
		Long: `Walks every station's hash chain and the audit trail, compares every row of the
tables people query (readings, results, limit outcomes, fits, trims, files,
instruments, units) with the signed record it came from, and reports the first
broken link or difference with its table, run and column. Signatures are checked
with the trusted keys (--keys DIR or --trust FILE; no key is trusted by default,
exit 2 without). Every run of a station must be signed by a key bound to that
station: the runs that are not (unsigned, or signed by another key) are listed, as
is a station with no trusted key. Prints the chain heads to keep elsewhere.

--save-heads FILE writes the heads to FILE (one line per chain: HASH SEQ CHAIN);
keep it outside the station. --heads FILE checks heads saved earlier: each must
still be on its chain at its position, i.e. the chain has only grown since; a
ledger rebuilt or rewritten since fails and the chain is named. Exit 1 when the
chain is broken, a run is not signed by its station's trusted key, or a saved head
is not found.

--since CHECKPOINT verifies from heads saved earlier onward: CHECKPOINT is a
heads file written by --save-heads, or one head's hash. Each saved head must be on
its chain at its position; the runs after it are verified fully (links,
signatures, records and rows, the trust rule), the runs up to it are trusted
through it and not read again ("runs 1…N trusted through saved head H"). The audit
trail, stored files, certificate numbers, documents and units are checked in full.
A saved head not on its chain fails (exit 1).`,
	}
	a := newAuditor(c)
	saveHeads := c.Flag.String("save-heads", "", "write the chain heads to `file`, to keep outside the ledger")
	heads := c.Flag.String("heads", "", "check the chain heads saved earlier in `file` (by --save-heads)")
	since := c.Flag.String("since", "", "verify from the heads saved in `checkpoint` (a --save-heads file, or one head's hash) onward")
	c.Run = func(ctx context.Context, e *env, args []string) error {
		if len(args) != 0 {
			return usagef("usage: %s", c.UsageLine)
		}
		return a.ledger(ctx, e, *heads, *saveHeads, *since)
	}
	return c
}

func newAuditReplayCmd() *command {
	c := &command{
		UsageLine: "trimline audit replay CERT-NUMBER|SERIAL --keys DIR|--trust FILE [--ledger DB]",
		Short:     "recompute recorded runs from their raw readings",
		Long: `Recomputes fits, trim codes, uncertainties and verdicts from the stored raw
readings with the stored files, and lists every difference from what was recorded.
A serial number replays every run of it, the ledger's own and those imported from
bundles. A run not signed by a trusted key of its station (--keys DIR or --trust FILE; no
key is trusted by default, exit 2 without) is not replayed: anyone could have
written its readings. Exit 1 when any run differs or is not signed.`,
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
		UsageLine: "trimline audit void CERT-NUMBER --key APPROVER.key --reason TEXT (--trust FILE | --keys DIR) [--ledger DB]",
		Short:     "void a certificate, signed by a trusted approver",
		Long: `Voids a certificate for --reason, signed with the approver's private key (--key).
The key must be that of an approver trusted to void: named with may: [void] in the
trust file (--trust), or in the approvers/ folder of --keys. A key no trust names
is refused. The name recorded is the approver's, as the trust names them; --by, if
given, must agree with it. The certificate stays in the ledger and the audit trail;
'trimline audit verify' says VOIDED and who signed the void.`,
	}
	a := newAuditor(c)
	by := c.Flag.String("by", "", "printed `name` of the approver; must agree with their trust entry (the name recorded comes from there)")
	reason := c.Flag.String("reason", "", "`reason` for voiding")
	keyPath := c.Flag.String("key", "", "the approver's private key `file` that signs the void")
	c.Run = func(ctx context.Context, e *env, args []string) error {
		if len(args) != 1 || *reason == "" || *keyPath == "" {
			return usagef("usage: %s", c.UsageLine)
		}
		if err := a.needTrust("who may void " + args[0]); err != nil {
			return err
		}
		approvers, err := a.trust()
		if err != nil {
			return err
		}
		key, err := signing.Load(*keyPath)
		if err != nil {
			return badInput(err)
		}
		if ap, ok := approvers.Approver(key.ID()); ok && *by != "" && *by != ap.Name {
			return usagef("--by %q: the key %s is %s's (%s); the name recorded is the trust entry's", *by, key.ID(), ap.Name, approvers.Source)
		}
		led, err := a.open(ctx, "")
		if err != nil {
			return err
		}
		defer led.Close()
		ap, err := audit.Void(ctx, led, args[0], *reason, key, approvers)
		if err != nil {
			return badInput(err)
		}
		fmt.Fprintf(e.stdout, "%s voided by %s (signed %s): %s\n", args[0], ap.Name, key.ID(), *reason)
		return nil
	}
	return c
}

// auditor holds what the audit subcommands share: where the ledger and the
// trusted keys are.
type auditor struct {
	ledgerPath, keysDir, trustFile string
	noLedger                       bool           // verify from the seal alone
	json                           *bool          // verify: the verdict as JSON (nil: no such flag)
	trusted                        *signing.Trust // loaded by trust
}

// newAuditor adds the --ledger, --keys and --trust flags every audit subcommand
// takes.
func newAuditor(c *command) *auditor {
	a := &auditor{}
	c.Flag.StringVar(&a.ledgerPath, "ledger", "", "ledger `file` (default ledger.db above the PDF's certificates folder, or ./trimline-demo/ledger.db)")
	c.Flag.StringVar(&a.keysDir, "keys", "", "`folder` of trusted public keys: STATION.pub binds a key to a station (no key is trusted by default)")
	c.Flag.StringVar(&a.trustFile, "trust", "", "trust `file` binding station ids to keys or fingerprints (instead of --keys)")
	return a
}

// open opens the ledger named by --ledger, or the one beside near's certificates
// folder (a PDF's), or without near the demo's. Near a PDF without --ledger, it
// never guesses further: no ledger there is bad input.
func (a *auditor) open(ctx context.Context, near string) (*ledger.Ledger, error) {
	p := a.ledgerPath
	if p == "" && near != "" {
		// The station writes OUT/certificates/NAME.pdf and OUT/ledger.db; the
		// absolute path finds it from inside certificates/ too.
		abs, err := filepath.Abs(near)
		if err != nil {
			return nil, badInput(err)
		}
		cand := filepath.Join(filepath.Dir(filepath.Dir(abs)), "ledger.db")
		if _, err := os.Stat(cand); err != nil {
			return nil, badInput(fmt.Errorf("no ledger for %s: none at %s, in the folder above the certificate's own; give --ledger DB, or --no-ledger to check the seal alone (whether it was voided or superseded, and the chain, are then not checked)", near, cand))
		}
		p = cand
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

// needTrust refuses to go on without --keys or --trust: no key is trusted by
// default, not even one beside the ledger.
func (a *auditor) needTrust(what string) error {
	switch {
	case a.keysDir != "" && a.trustFile != "":
		return usagef("give --keys DIR or --trust FILE, not both")
	case a.keysDir == "" && a.trustFile == "":
		return fmt.Errorf("cannot decide %s: %w", what, signing.ErrNoTrust)
	}
	return nil
}

// trust loads the trusted keys (--keys or --trust) and offers the public keys
// found beside the ledger, which count only when a trust file bound their full
// fingerprint (signing.Trust.Admit).
func (a *auditor) trust() (*signing.Trust, error) {
	if err := a.needTrust("anything"); err != nil {
		return nil, err
	}
	var t *signing.Trust
	var err error
	if a.keysDir != "" {
		t, err = signing.TrustDir(a.keysDir)
	} else {
		t, err = signing.LoadTrust(a.trustFile)
	}
	if err != nil {
		return nil, badInput(err)
	}
	if a.ledgerPath != "" {
		admitDir(t, filepath.Join(filepath.Dir(a.ledgerPath), "keys"))
	}
	a.trusted = t
	return t, nil
}

// admitDir offers every *.pub in dir to t.Admit; a file that is not a key is
// skipped (nothing there is trusted on its own).
func admitDir(t *signing.Trust, dir string) {
	for _, f := range signing.PublicKeysIn(dir) {
		t.Admit(f.Key)
	}
}

// trustedLine says which keys were trusted, printed with every verdict.
func trustedLine(t *signing.Trust) string {
	if t == nil {
		return ""
	}
	st := t.Stations()
	if len(st) == 0 {
		return fmt.Sprintf("trusted keys: %s, binding no station", t.Source)
	}
	return fmt.Sprintf("trusted keys: %s, for station(s) %s", t.Source, strings.Join(st, ", "))
}

// errNotGenuine is a certificate that did not verify as genuine.
var errNotGenuine = errors.New("not genuine")

// verdictOut prints the verification outcome; only genuine succeeds.
func (a *auditor) verdictOut(e *env, file string, v audit.Verdict) error {
	if a.json != nil && *a.json {
		var source string
		var stations []string
		if a.trusted != nil {
			source, stations = a.trusted.Source, a.trusted.Stations()
		}
		writeJSON(e.stdout, newVerificationOut(file, v, a.noLedger, a.ledgerPath, source, stations))
	} else {
		a.verdictText(e, file, v)
	}
	if v.Kind == audit.Genuine {
		return nil
	}
	return report(rejected(fmt.Errorf("%s: %w", v.Kind, errNotGenuine)))
}

// verdictText prints the verification outcome for a person.
func (a *auditor) verdictText(e *env, file string, v audit.Verdict) {
	head := strings.ToUpper(v.Kind)
	if v.Simulated != "" {
		head += " — " + v.Simulated
	}
	if a.noLedger {
		head += " (by its seal alone; voids, supersedes and the chain not checked)"
	}
	fmt.Fprintf(e.stdout, "%s: %s\n", head, file)
	for _, r := range v.Reasons {
		fmt.Fprintf(e.stdout, "  %s\n", r)
	}
	if l := trustedLine(a.trusted); l != "" {
		fmt.Fprintf(e.stdout, "  (%s)\n", l)
	}
}

func (a *auditor) verify(ctx context.Context, e *env, file string) error {
	if err := a.needTrust("whether " + file + " is genuine"); err != nil {
		return err
	}
	pdf, err := audit.ReadPDF(file)
	if err != nil {
		return badInput(err)
	}
	var led *ledger.Ledger
	if !a.noLedger {
		// Never a silent fall back to the seal: that would hide a voided or
		// superseded certificate.
		if led, err = a.open(ctx, file); err != nil {
			return err
		}
		defer led.Close()
	} else if a.ledgerPath != "" {
		return usagef("give --ledger DB or --no-ledger, not both")
	}
	t, err := a.trust()
	if err != nil {
		return err
	}
	v, err := audit.Certificate(ctx, led, a.ledgerPath, file, pdf, t)
	if err != nil {
		return err
	}
	return a.verdictOut(e, file, v)
}

func (a *auditor) ledger(ctx context.Context, e *env, headsFile, saveHeads, sinceArg string) error {
	if err := a.needTrust("whether the ledger's runs are the station's"); err != nil {
		return err
	}
	var saved []ledger.Head
	if headsFile != "" {
		var err error
		if saved, err = readHeads(headsFile); err != nil {
			return err
		}
	}
	led, err := a.open(ctx, "")
	if err != nil {
		return err
	}
	defer led.Close()
	t, err := a.trust()
	if err != nil {
		return err
	}
	w := e.stdout
	var since []ledger.Head
	if sinceArg != "" {
		if since, err = a.checkpoint(ctx, w, led, sinceArg); err != nil {
			return err
		}
	}
	rep, err := led.VerifyChain(ctx, "", ledger.ChainOptions{Verify: audit.Verifier(t.Keys()), Since: since})
	if err != nil {
		return err
	}
	unsigned, err := audit.CheckSignersSince(ctx, led, t, "", since)
	if err != nil {
		return err
	}
	runs := fmt.Sprintf("%d runs", rep.Runs)
	if since != nil {
		runs = fmt.Sprintf("%d runs verified after the saved heads, %d trusted through them", rep.Runs, rep.TrustedRuns)
	}
	fmt.Fprintf(w, "ledger %s: %d station chain(s), %s (%d signed, %d verified, %d unsigned), %d certificates, %d documents, %d stored files, %d audit entries\n",
		a.ledgerPath, rep.Stations, runs, rep.Signed, rep.Verified, rep.Unsigned, rep.Certificates, rep.Documents, rep.Blobs, rep.AuditEntries)
	if rep.OK {
		for _, h := range since {
			if h.Station != "" {
				fmt.Fprintf(w, "  station %s: runs 1…%d trusted through saved head %s; runs %d…%d verified\n", h.Station, h.Seq, h.Hash, h.Seq+1, rep.HeadSeqs[h.Station])
			} else {
				fmt.Fprintf(w, "  audit trail: saved head %s found at entry %d; the whole trail verified\n", h.Hash, h.Seq)
			}
		}
	}
	if !rep.OK {
		at := brokenAt(rep)
		fmt.Fprintf(w, "BROKEN at %s: %s\n", at, rep.Reason)
		printUnsigned(w, t, unsigned)
		return report(rejected(fmt.Errorf("chain broken at %s: %s", at, rep.Reason)))
	}
	if len(unsigned) > 0 {
		printUnsigned(w, t, unsigned)
		return report(rejected(fmt.Errorf("%d run(s) or station(s) not signed by a trusted station key", len(unsigned))))
	}
	fmt.Fprintf(w, "chain intact; every query row matches its signed record; every run signed by its station's trusted key (%s). Heads (keep a copy outside the ledger, e.g. with --save-heads):\n", trustedLine(t))
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

// readHeads reads a heads file written by --save-heads.
func readHeads(path string) ([]ledger.Head, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, badInput(err)
	}
	defer f.Close()
	heads, err := ledger.ParseHeads(f)
	if err != nil {
		return nil, badInput(fmt.Errorf("%s: %w", path, err))
	}
	return heads, nil
}

// checkpoint reads --since: a heads file, or else one head's hash, looked up in
// led. A hash on no chain of led fails as a saved head not found (exit 1).
func (a *auditor) checkpoint(ctx context.Context, w io.Writer, led *ledger.Ledger, arg string) ([]ledger.Head, error) {
	if _, err := os.Stat(arg); err == nil || !ledger.IsHeadHash(arg) {
		return readHeads(arg)
	}
	h, err := led.FindHead(ctx, arg)
	if errors.Is(err, ledger.ErrNotFound) {
		fmt.Fprintf(w, "SAVED HEAD NOT FOUND: %s is on no chain of %s; the ledger was rebuilt or rewritten, or the head is another ledger's\n", arg, a.ledgerPath)
		return nil, report(rejected(fmt.Errorf("saved head %s not found: the ledger was rebuilt or rewritten", arg)))
	}
	if err != nil {
		return nil, err
	}
	return []ledger.Head{h}, nil
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

// replayed is a stored run with what its signature covers.
type replayed struct {
	rec                      *sequencer.Record
	number, recordSHA, keyID string
	sig                      []byte
}

// replay recomputes one certificate's run, or every run of a serial number,
// after holding each to the trust rule.
func (a *auditor) replay(ctx context.Context, e *env, what string) error {
	if err := a.needTrust("whether the stored runs are the station's"); err != nil {
		return err
	}
	led, err := a.open(ctx, "")
	if err != nil {
		return err
	}
	defer led.Close()
	t, err := a.trust()
	if err != nil {
		return err
	}
	var runs []replayed
	if rec, m, err := led.RunByCertificate(ctx, what); err == nil {
		runs = append(runs, replayed{rec, m.Certificate, m.RecordSHA256, m.KeyID, m.Signature})
	} else if rec, ir, err := led.ImportedRunByCertificate(ctx, what); err == nil {
		// a run imported from another station's bundle
		runs = append(runs, replayed{rec, ir.Number, ir.RecordSHA256, ir.KeyID, ir.Signature})
	} else {
		list, err := led.Runs(ctx, what)
		if err != nil {
			return err
		}
		for i := len(list) - 1; i >= 0; i-- {
			rec, m, err := led.RunByID(ctx, list[i].RunID)
			if err != nil {
				return err
			}
			runs = append(runs, replayed{rec, m.Certificate, m.RecordSHA256, m.KeyID, m.Signature})
		}
		// and the serial's runs imported from other stations' bundles
		imported, err := led.ImportedRunsOf(ctx, what)
		if err != nil {
			return err
		}
		for i := len(imported) - 1; i >= 0; i-- {
			rec, ir, err := led.ImportedRunByID(ctx, imported[i].RunID)
			if err != nil {
				return err
			}
			runs = append(runs, replayed{rec, ir.Number, ir.RecordSHA256, ir.KeyID, ir.Signature})
		}
	}
	if len(runs) == 0 {
		return badInput(fmt.Errorf("%s is neither a certificate number nor a serial number in %s", what, a.ledgerPath))
	}
	w := e.stdout
	differ, untrusted := 0, 0
	for _, r := range runs {
		rec := r.rec
		if bad := audit.SignedRun(t, rec.Station, r.number, rec.RunID, r.recordSHA, r.keyID, r.sig); bad != "" {
			untrusted++
			fmt.Fprintf(w, "%s %s %s: NOT REPLAYED, not signed by its station's trusted key: %s\n", rec.RunID, rec.Serial, rec.Verdict, bad)
			continue
		}
		verdict := string(rec.Verdict)
		if dp := rec.Disposition; dp != nil {
			verdict += " (" + dp.OnReview() + " by " + dp.Reviewer + ", held as " + dp.OfCertificate + ")"
		}
		diffs, err := audit.Replay(ctx, led, rec)
		switch {
		case errors.Is(err, sequencer.ErrNotReplayable):
			fmt.Fprintf(w, "%s %s %s: not replayed (%s, nothing measured)\n", rec.RunID, rec.Serial, rec.Verdict, rec.Verdict)
			continue
		case err != nil:
			return err
		}
		if len(diffs) == 0 {
			fmt.Fprintf(w, "%s %s %s: reproduced exactly\n", rec.RunID, rec.Serial, verdict)
			continue
		}
		differ++
		fmt.Fprintf(w, "%s %s %s: %d difference(s)\n", rec.RunID, rec.Serial, verdict, len(diffs))
		for _, d := range diffs {
			fmt.Fprintf(w, "  %s\n", d)
		}
	}
	fmt.Fprintf(w, "(%s)\n", trustedLine(t))
	switch {
	case untrusted > 0:
		return report(rejected(fmt.Errorf("%d run(s) not signed by their station's trusted key, %d differ from what was recorded", untrusted, differ)))
	case differ > 0:
		return report(rejected(fmt.Errorf("%d run(s) differ from what was recorded", differ)))
	}
	return nil
}

// printUnsigned lists the runs the trust rule refuses, one a line.
func printUnsigned(w io.Writer, t *signing.Trust, unsigned []audit.Unsigned) {
	if len(unsigned) == 0 {
		return
	}
	fmt.Fprintf(w, "NOT SIGNED by the station's trusted key (%s): %d\n", trustedLine(t), len(unsigned))
	for _, u := range unsigned {
		fmt.Fprintf(w, "  %s\n", u)
	}
}
