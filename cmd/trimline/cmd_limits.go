package main

import (
	"context"
	"fmt"

	"trimline/instruments/files"
	"trimline/limits"
	"trimline/sequencer"
)

func newLimitsCmd() *command {
	return &command{
		UsageLine: "trimline limits <command> [flags] [args]",
		Short:     "quality engineer's tools for limit files: lint, diff, what-if, release",
		Commands:  []*command{newLimitsLintCmd(), newLimitsDiffCmd(), newLimitsWhatIfCmd(), newLimitsReleaseCmd()},
	}
}

func newLimitsLintCmd() *command {
	c := &command{
		UsageLine: "trimline limits lint [--sequence FILE [--station FILE]] FILE...",
		Short:     "print every problem of each limit file",
		Long: `Prints every problem of each limit file as file:line:col: unknown result names,
type errors, limits that can never pass or never fail over the result's physical
range (the trim codes' and the output's ranges come from the product's steps), contradictory or redundant limits on one result,
tolerances tighter than the station can measure (with --sequence and --station),
missing descriptions. Exit 2 when any error is found.

The result names a limit file may use are those the product's steps declare: with
--sequence, that sequence's (read without its own limit file, so a broken limit
file can still be linted); without it, those of the sequence files beside the
limit file that name it, or, when none does, the first layout's, with a note on
stderr.`,
	}
	station := c.Flag.String("station", "", "station `file`: also check each tolerance against the TUR the station can reach")
	sequence := c.Flag.String("sequence", "", "sequence `file`: the product's physical ranges (trim codes, output), and with --station the TUR check")
	c.Run = func(ctx context.Context, e *env, paths []string) error {
		if len(paths) == 0 {
			return usagef("name at least one limit file")
		}
		if *station != "" && *sequence == "" {
			return usagef("--station needs --sequence: the TUR check predicts the sequence's measurements on the station")
		}
		var opt limits.LintOptions
		var seq *sequencer.Sequence // nil: lint knows only the ranges no product sets
		if *sequence != "" {
			// The sequence's steps alone: the limit file it names may be the very
			// file being linted, and lint must speak even while that file is broken.
			var errs files.List
			var st *sequencer.Station
			if *station != "" {
				var err error
				if st, err = sequencer.LoadStation(*station); err != nil {
					if errs = files.Errs(err); errs == nil {
						return badInput(err)
					}
				}
			}
			s, err := sequencer.LoadSequenceSteps(*sequence)
			if err != nil {
				fe := files.Errs(err)
				if fe == nil {
					return badInput(err)
				}
				errs = append(errs, fe...)
			}
			if len(errs) > 0 {
				return badInput(detailed(errs))
			}
			seq = s
			if st != nil {
				opt.TUR = sequencer.PredictUncertainty(st, s)
			}
		}
		opt.Ranges = sequencer.PhysicalRanges(seq)
		errorsFound := 0
		for _, path := range paths {
			data, err := files.ReadFile(path)
			if err != nil {
				return badInput(err)
			}
			var cat limits.Catalog
			if seq != nil {
				cat = seq.Catalog()
			} else {
				var s *sequencer.Sequence
				var note string
				if cat, s, note = sequencer.CatalogFor(path); note != "" {
					fmt.Fprintln(e.stderr, "note:", note)
				}
				opt.Ranges = sequencer.PhysicalRanges(s)
			}
			fds := limits.Lint(path, data, cat, opt)
			for _, f := range fds {
				fmt.Fprintln(e.stdout, f.Error())
				if f.Severity == limits.SeverityError {
					errorsFound++
				}
			}
			if len(fds) == 0 {
				fmt.Fprintf(e.stdout, "ok  %s\n", path)
			}
		}
		if errorsFound > 0 {
			return report(badInput(fmt.Errorf("%d error(s) found", errorsFound)))
		}
		return nil
	}
	return c
}

// loadLimitSet loads the limit file at path. Its result names are checked
// against the steps of the sequence file sequencePath when one is given (read
// without its own limit file), else against those sequencer.CatalogFor finds.
func loadLimitSet(path, sequencePath string) (*limits.Set, error) {
	cat, _, _ := sequencer.CatalogFor(path)
	if sequencePath != "" {
		s, err := sequencer.LoadSequenceSteps(sequencePath)
		if err != nil {
			if fe := files.Errs(err); fe != nil {
				return nil, badInput(detailed(fe))
			}
			return nil, badInput(err)
		}
		cat = s.Catalog()
	}
	set, err := limits.LoadFile(path, cat)
	if err != nil {
		if fe := files.Errs(err); fe != nil {
			return nil, badInput(detailed(fe))
		}
		return nil, badInput(err)
	}
	return set, nil
}

func newLimitsDiffCmd() *command {
	c := &command{
		UsageLine: "trimline limits diff [--sequence FILE] OLD NEW",
		Short:     "a semantic diff of two limit files",
		Long: `Lists each limit added, removed, tightened, loosened, shifted or changed in shape,
with the bounds side by side, and the decision-rule changes.

The result names each file may use are those of the product's steps: with
--sequence, that sequence's; without it, those of the sequence files beside each
file that name it or, when none does, that are for the product the file names
(limit_set.product), so a draft revision beside the released one is read against
its product's steps.`,
	}
	sequence := c.Flag.String("sequence", "", "sequence `file` whose steps declare the result names both files may use")
	c.Run = func(ctx context.Context, e *env, args []string) error {
		if len(args) != 2 {
			return usagef("usage: %s", c.UsageLine)
		}
		old, err := loadLimitSet(args[0], *sequence)
		if err != nil {
			return err
		}
		nw, err := loadLimitSet(args[1], *sequence)
		if err != nil {
			return err
		}
		changes := limits.Diff(old, nw)
		fmt.Fprintf(e.stdout, "%s (rev %s) → %s (rev %s)\n\n", args[0], old.Revision, args[1], nw.Revision)
		if len(changes) == 0 {
			fmt.Fprintln(e.stdout, "no semantic change")
			return nil
		}
		limits.FormatDiff(e.stdout, changes)
		return nil
	}
	return c
}
