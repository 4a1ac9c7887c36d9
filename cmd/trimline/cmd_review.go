package main

import (
	"context"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"text/tabwriter"

	"trimline/reports/issuing"
	"trimline/reports/ledger"
	"trimline/reports/signing"
	"trimline/sequencer"
)

func newReviewCmd() *command {
	return &command{
		UsageLine: "trimline review <command> [flags] [args]",
		Short:     "list the units held for REVIEW; accept or reject one, reissuing its certificate",
		Commands:  []*command{newReviewListCmd(), newReviewDecideCmd(sequencer.DecisionAccept), newReviewDecideCmd(sequencer.DecisionReject)},
	}
}

// reviewFlags are the flags the review subcommands share: the station and
// where its output (ledger and certificates) is.
type reviewFlags struct {
	station, sequence, out string
}

func (f *reviewFlags) add(c *command, sequence bool) {
	c.Flag.StringVar(&f.station, "station", "", "station `file`")
	if sequence {
		c.Flag.StringVar(&f.sequence, "sequence", "", "sequence `file` the unit was tested with (its files go with the decision's record)")
	}
	c.Flag.StringVar(&f.out, "out", "", "the station's output `folder`, holding ledger.db and certificates/ (default: the station file's output_folder, else trimline-out)")
}

// ledgerOf opens the ledger of the station st in the output folder (f.out, else
// the station file's), refusing one that is not there: a review decides on
// runs already recorded.
func (f *reviewFlags) ledgerOf(ctx context.Context, st *sequencer.Station) (*ledger.Ledger, string, error) {
	out := f.out
	if out == "" {
		out = st.OutputFolder
	}
	if out == "" {
		out = "trimline-out"
	}
	path := filepath.Join(out, "ledger.db")
	if _, err := os.Stat(path); err != nil {
		return nil, "", badInput(fmt.Errorf("no ledger at %s: give the station's output folder (--out DIR)", path))
	}
	led, err := ledger.Open(ctx, path)
	if err != nil {
		return nil, "", fmt.Errorf("open ledger: %w", err)
	}
	return led, out, nil
}

func newReviewListCmd() *command {
	c := &command{
		UsageLine: "trimline review list --station F [--out DIR]",
		Short:     "list the units of the station held for REVIEW, oldest first",
		Long: `Lists the units of the station waiting for a reviewer's decision: the runs held
for REVIEW whose certificate is still current (not superseded by a retest or a
decision, not voided), oldest first, with the first reason each was held for.
Engineering runs are not listed: they never ship.`,
	}
	var f reviewFlags
	f.add(c, false)
	c.Run = func(ctx context.Context, e *env, args []string) error {
		if len(args) != 0 || f.station == "" {
			return usagef("usage: %s", c.UsageLine)
		}
		st, err := sequencer.LoadStation(f.station)
		if err != nil {
			return badInput(err)
		}
		led, _, err := f.ledgerOf(ctx, st)
		if err != nil {
			return err
		}
		defer led.Close()
		queue, err := led.ReviewQueue(ctx, st.ID)
		if err != nil {
			return err
		}
		if len(queue) == 0 {
			fmt.Fprintf(e.stdout, "no unit of station %s is held for review\n", st.ID)
			return nil
		}
		fmt.Fprintf(e.stdout, "%d unit(s) of station %s held for review, oldest first:\n", len(queue), st.ID)
		w := tabwriter.NewWriter(e.stdout, 0, 0, 2, ' ', 0)
		fmt.Fprintln(w, "  CERTIFICATE\tSERIAL\tPRODUCT\tTESTED\tHELD FOR")
		for _, r := range queue {
			why := ""
			if rec, err := led.Run(ctx, r.RunID); err != nil {
				return err
			} else if len(rec.Reasons) > 0 {
				why = rec.Reasons[0]
				if len(rec.Reasons) > 1 {
					why += fmt.Sprintf(" (+%d more)", len(rec.Reasons)-1)
				}
			}
			fmt.Fprintf(w, "  %s\t%s\t%s\t%s\t%s\n", r.Certificate, r.Serial, r.Product, r.Finished.UTC().Format("2006-01-02 15:04 UTC"), why)
		}
		return w.Flush()
	}
	return c
}

func newReviewDecideCmd(decision string) *command {
	verdict := map[string]string{sequencer.DecisionAccept: "PASS", sequencer.DecisionReject: "FAIL"}[decision]
	c := &command{
		UsageLine: "trimline review " + decision + " CERT --reason TEXT --reviewer NAME --station F --sequence F [--out DIR] [--key REVIEWER.key]",
		Short:     decision + " a unit held for REVIEW: its certificate is reissued " + verdict,
		Long: `Records a reviewer's decision on the unit held for REVIEW under certificate CERT
(see 'trimline review list') and reissues its certificate with the final verdict
` + verdict + `: a record of its own, signed by the station's key and chained like every
run, with the REVIEW run's measurement and a "Review decision" section naming the
reviewer, the reason, the date, how the reviewer was known and the certificate it
replaces. The REVIEW certificate is superseded; the decision is written to the
audit trail under the reviewer's name.

--reviewer is the name or badge of a person the station file's people list with
may: [review]. With --key the reviewer signs the decision with their Ed25519
private key, which must be the key: of that person; the signature goes in the
audit trail. Without --key the record says the reviewer was named on the command
line. A reason is required, on one line.

Exit 0 when recorded; 2 for a certificate that is not a current REVIEW one of
the station, a person without the review right, a key not theirs, or no reason.`,
	}
	var f reviewFlags
	f.add(c, true)
	reason := c.Flag.String("reason", "", "why, in words, on one line")
	reviewer := c.Flag.String("reviewer", "", "the reviewer's `name` or badge, as the station file's people list them")
	keyPath := c.Flag.String("key", "", "the reviewer's Ed25519 private key `file`, to sign the decision")
	c.Run = func(ctx context.Context, e *env, args []string) error {
		if len(args) != 1 || f.station == "" || f.sequence == "" || *reviewer == "" || *reason == "" {
			return usagef("usage: %s", c.UsageLine)
		}
		st, seq, err := loadFiles(ctx, f.station, f.sequence)
		if err != nil {
			return err
		}
		var key *signing.Key
		if *keyPath != "" {
			if key, err = signing.Load(*keyPath); err != nil {
				return badInput(fmt.Errorf("--key: %w", err))
			}
		}
		d := sequencer.Disposition{Decision: decision, Reviewer: *reviewer, Reason: *reason, Authenticated: "named on the command line", At: e.clock()}
		return decide(ctx, e, &f, st, seq, args[0], d, key)
	}
	return c
}

// decide records decision d on certificate cert of station st, signed with
// key when it is not nil, and says what was issued.
func decide(ctx context.Context, e *env, f *reviewFlags, st *sequencer.Station, seq *sequencer.Sequence, cert string, d sequencer.Disposition, key *signing.Key) error {
	led, out, err := f.ledgerOf(ctx, st)
	if err != nil {
		return err
	}
	defer led.Close()
	is := &issuing.Issuer{Ledger: led, Station: st, Sequence: seq, CertDir: filepath.Join(out, "certificates")}
	if st.SigningKey != "" {
		if is.Key, err = signing.Load(st.SigningKey); err != nil {
			return badInput(fmt.Errorf("%s signing.key: %w", st.File.Name, err))
		}
	}
	if err := os.MkdirAll(is.CertDir, 0o755); err != nil {
		return err
	}
	newCert, err := is.DisposeSigned(ctx, cert, d, key)
	switch {
	case errors.Is(err, issuing.ErrNotHeld), errors.Is(err, issuing.ErrNotReviewer), errors.Is(err, issuing.ErrBadDecision):
		return badInput(err)
	case newCert == "":
		return err
	}
	rec, _, rerr := led.RunByCertificate(ctx, newCert)
	if rerr != nil {
		return errors.Join(err, rerr)
	}
	dp := rec.Disposition
	fmt.Fprintf(e.stdout, "%s %s: %s by %s (%s): %s\n", cert, rec.Serial, dp.OnReview(), dp.Reviewer, dp.Authenticated, dp.Reason)
	fmt.Fprintf(e.stdout, "certificate %s (%s) issued; it supersedes %s\n", newCert, rec.Verdict, cert)
	if docs, derr := led.DocumentsFor(ctx, newCert); derr == nil && len(docs) > 0 {
		fmt.Fprintf(e.stdout, "  %s\n", docs[len(docs)-1].Path)
	}
	return err
}
