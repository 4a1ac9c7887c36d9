package main

import (
	"context"
	"fmt"
	"os"

	"trimline/instruments/files"
	"trimline/limits"
	"trimline/sequencer"
)

func init() { register(newLimitsCmd) }

// limitsSubs are the quality engineer's subcommands of "trimline limits".
var limitsSubs = map[string]func(ctx context.Context, args []string) error{
	"lint": limitsLint,
	"diff": limitsDiff,
}

func newLimitsCmd() *command {
	c := &command{
		Name:  "limits",
		Usage: "lint FILE... | diff OLD NEW | whatif NEW [flags] | release FILE --by NAME --meaning MEANING",
		Short: "quality engineer's tools for limit files: lint, diff, what-if, release",
		Long: `lint     prints every problem of each limit file as file:line:col: unknown result
         names, type errors, limits that can never pass or never fail over the
         result's physical range, contradictory or redundant limits on one result,
         tolerances tighter than the station can measure (with --station), missing
         descriptions. Exit 2 when any error is found.
diff     a semantic diff: each limit added, removed, tightened, loosened, shifted or
         changed in shape, with the bounds side by side, and decision-rule changes.
whatif   re-judges every stored result in the ledger against NEW (see
         'trimline limits whatif -h').
release  records a limit or sequence file's hash as released (see
         'trimline limits release -h').`,
		Flags:   newFlags("limits"),
		RawArgs: true, // each subcommand parses its own flags
	}
	c.Run = func(ctx context.Context, c *command, args []string) error {
		if len(args) == 0 {
			return usageErr("name a subcommand: lint, diff, whatif or release")
		}
		sub, ok := limitsSubs[args[0]]
		if !ok {
			return usageErr("unknown subcommand %q (lint, diff, whatif, release)", args[0])
		}
		return sub(ctx, args[1:])
	}
	return c
}

func limitsLint(ctx context.Context, args []string) error {
	fs := newFlags("limits lint")
	station := fs.String("station", "", "station `file`: also check each tolerance against the TUR the station can reach")
	sequence := fs.String("sequence", "", "sequence `file`: the product's physical ranges (trim codes, output), and with --station the TUR check")
	paths, err := parseInterleaved(fs, args)
	if err != nil {
		return usageErr("%v", err)
	}
	if len(paths) == 0 {
		return usageErr("name at least one limit file")
	}
	var opt limits.LintOptions
	var seq *sequencer.Sequence // nil: lint knows only the ranges no product sets
	switch {
	case *station != "" && *sequence != "":
		st, s, err := loadFiles(*station, *sequence)
		if err != nil {
			return err
		}
		seq, opt.TUR = s, sequencer.PredictUncertainty(st, s)
	case *sequence != "":
		if seq, err = sequencer.LoadSequence(*sequence); err != nil {
			if fe := files.Errs(err); fe != nil {
				return badInput(detailed(fe))
			}
			return badInput(err)
		}
	}
	opt.Ranges = sequencer.PhysicalRanges(seq)
	errorsFound := 0
	for _, path := range paths {
		data, err := os.ReadFile(path)
		if err != nil {
			return badInput(err)
		}
		fds := limits.Lint(path, data, sequencer.ResultCatalog, opt)
		for _, f := range fds {
			fmt.Fprintln(stdoutW, f.Error())
			if f.Severity == limits.SeverityError {
				errorsFound++
			}
		}
		if len(fds) == 0 {
			fmt.Fprintf(stdoutW, "ok  %s\n", path)
		}
	}
	if errorsFound > 0 {
		return silent(exitUsage)
	}
	return nil
}

func loadLimitSet(path string) (*limits.Set, error) {
	set, err := limits.LoadFile(path, sequencer.ResultCatalog)
	if err != nil {
		if fe := files.Errs(err); fe != nil {
			return nil, badInput(detailed(fe))
		}
		return nil, badInput(err)
	}
	return set, nil
}

func limitsDiff(ctx context.Context, args []string) error {
	if len(args) != 2 {
		return usageErr("usage: trimline limits diff OLD NEW")
	}
	old, err := loadLimitSet(args[0])
	if err != nil {
		return err
	}
	nw, err := loadLimitSet(args[1])
	if err != nil {
		return err
	}
	changes := limits.Diff(old, nw)
	fmt.Fprintf(stdoutW, "%s (rev %s) → %s (rev %s)\n\n", args[0], old.Revision, args[1], nw.Revision)
	if len(changes) == 0 {
		fmt.Fprintln(stdoutW, "no semantic change")
		return nil
	}
	limits.FormatDiff(stdoutW, changes)
	return nil
}
