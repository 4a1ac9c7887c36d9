package main

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"strings"

	"trimline/instruments/files"
	"trimline/limits"
	"trimline/reports/ledger"
	"trimline/reports/release"
	"trimline/reports/signing"
	"trimline/sequencer"
)

func newLimitsReleaseCmd() *command {
	c := &command{
		UsageLine: "trimline limits release FILE --decision approve|reject|withdraw --key APPROVER.key [--meaning TEXT] [--station FILE | --ledger DB --trust FILE] [--sequence FILE]",
		Short:     "approve, reject or withdraw a limit or sequence file for production, signed",
		Long: `Records in the ledger an approver's signed decision on FILE (a limit or sequence
file, by its SHA-256): approve puts it in force for production; reject or withdraw
takes it out. Only the last decision signed by a trusted approver counts; unsigned
entries change nothing.

The decision is signed with the approver's private key (--key), which must belong
to an approver trusted to release: one named by the station's release_keys (with
--station; a folder of NAME.pub files or a trust file) or by --trust FILE. A key
no trust names is refused. The printed name recorded is the approver's, as the
trust names them; --by, if given, must agree with it. --meaning is the wording of
the signature's meaning (default: approved, rejected or withdrawn).

A limit file is approved only when 'trimline limits lint' finds no error in it,
with the physical ranges of the product's sequence when --sequence names it.`,
	}
	decision := c.Flag.String("decision", "", "`decision`: "+strings.Join(release.Decisions, ", "))
	meaning := c.Flag.String("meaning", "", "`words` of the signature's meaning (default: approved, rejected or withdrawn)")
	by := c.Flag.String("by", "", "printed `name` of the approver; must agree with their trust entry (the name recorded comes from there)")
	ledgerPath := c.Flag.String("ledger", "", "ledger `file` (default: the station's output folder's ledger.db)")
	stationPath := c.Flag.String("station", "", "station `file`: its ledger and its release_keys (the trusted approvers)")
	trustPath := c.Flag.String("trust", "", "trust `file` naming the approvers (instead of the station's release_keys)")
	sequencePath := c.Flag.String("sequence", "", "sequence `file` whose physical ranges lint uses for a limit file")
	keyPath := c.Flag.String("key", "", "the approver's private key `file` that signs the decision")
	c.Run = func(ctx context.Context, e *env, pos []string) error {
		if len(pos) != 1 || *decision == "" || *keyPath == "" {
			return usagef("usage: %s", c.UsageLine)
		}
		data, err := files.ReadFile(pos[0])
		if err != nil {
			return badInput(err)
		}
		kind := sequencer.FileKind(data)
		var seq *sequencer.Sequence // nil: lint knows only the ranges no product sets
		var cat limits.Catalog      // the results the limit file may judge
		if *sequencePath != "" {
			if seq, err = sequencer.LoadSequenceSteps(*sequencePath); err != nil {
				if fe := files.Errs(err); fe != nil {
					return badInput(detailed(fe))
				}
				return badInput(err)
			}
			cat = seq.Catalog()
		} else if kind == release.KindLimits {
			var note string
			if cat, seq, note = sequencer.CatalogFor(pos[0]); note != "" {
				fmt.Fprintln(e.stderr, "note:", note)
			}
		}
		// The bytes checked are the bytes hashed and signed: data, read once.
		var cerr error
		switch kind {
		case release.KindLimits:
			_, cerr = limits.Load(pos[0], data, cat)
		case release.KindSequence:
			_, cerr = sequencer.ParseSequence(pos[0], data, files.ReadFile)
		default:
			return fmt.Errorf("%s: %w", pos[0], release.ErrNotReleasable)
		}
		if cerr != nil && *decision == release.Approve {
			if fe := files.Errs(cerr); fe != nil {
				return badInput(detailed(fe))
			}
			return badInput(cerr)
		}
		lp, keys := *ledgerPath, *trustPath
		if *stationPath != "" {
			st, err := sequencer.LoadStation(*stationPath)
			if err != nil {
				return badInput(err)
			}
			if lp == "" && st.OutputFolder != "" {
				lp = filepath.Join(st.OutputFolder, "ledger.db")
			}
			if keys == "" {
				keys = st.ReleaseKeys
			}
		}
		if lp == "" {
			return usagef("give --ledger or --station")
		}
		if keys == "" {
			return usagef("whose approvers count? give --station (its release_keys) or --trust FILE")
		}
		trust, err := release.Approvers(keys)
		if err != nil {
			return err
		}
		key, err := signing.Load(*keyPath)
		if err != nil {
			return badInput(err)
		}
		if a, ok := trust.Approver(key.ID()); ok && *by != "" && *by != a.Name {
			return usagef("--by %q: the key %s is %s's (%s); the name recorded is the trust entry's", *by, key.ID(), a.Name, trust.Source)
		}
		req := release.Request{Key: key, Trust: trust, Decision: *decision, Meaning: *meaning, Ranges: sequencer.PhysicalRanges(seq), Catalog: cat}
		r, err := recordRelease(ctx, lp, pos[0], kind, data, req)
		if err != nil {
			return err
		}
		fmt.Fprintf(e.stdout, "%s (%s file, SHA-256 %s)\n%s — %s — %s\nsigned with %s\n", pos[0], kind, r.SHA256, r.By, r.Meaning, r.At.Format("2006-01-02 15:04:05 UTC"), r.KeyID)
		if r.Decision == release.Approve {
			fmt.Fprintln(e.stdout, "in force for production")
		} else {
			fmt.Fprintf(e.stdout, "%s: not in force for production\n", r.Decision)
		}
		return nil
	}
	return c
}

// recordRelease opens the ledger at lp (creating its folder) and records the
// decision req on data there.
func recordRelease(ctx context.Context, lp, path, kind string, data []byte, req release.Request) (release.Release, error) {
	if err := os.MkdirAll(filepath.Dir(lp), 0o755); err != nil {
		return release.Release{}, err
	}
	led, err := ledger.Open(ctx, lp)
	if err != nil {
		return release.Release{}, err
	}
	defer led.Close()
	return release.Record(ctx, led, path, kind, data, req)
}
