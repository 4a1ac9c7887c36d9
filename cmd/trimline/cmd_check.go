package main

import (
	"context"
	"fmt"
	"io"

	"trimline/instruments/files"
	"trimline/limits"
	"trimline/sequencer"
)

func newCheckCmd() *command {
	c := &command{
		UsageLine: "trimline check FILE...",
		Short:     "validate station, sequence and limit files",
		Long: `Loads each file as production would and prints every problem as file:line:col
with an excerpt. The kind of each file is told by its top-level key: station:,
sequence: or limit_set:. A sequence file also loads the limit file it names. When
a station and a sequence are both given, the sequence is also checked against the
station's safety caps and roles.

Exit code 0 when every file is clean, 2 otherwise.`,
	}
	c.Run = func(ctx context.Context, e *env, args []string) error {
		if len(args) == 0 {
			return usagef("name at least one file")
		}
		var problems files.List
		var other []error
		var st *sequencer.Station
		var seqs []*sequencer.Sequence
		for _, path := range args {
			if err := ctx.Err(); err != nil {
				return err // one file's parse is bounded (files.Check); stop between files
			}
			data, err := files.ReadFile(path)
			if err != nil {
				if fe := files.Errs(err); fe != nil {
					problems = append(problems, fe...)
				} else {
					other = append(other, err)
				}
				continue
			}
			kind := sequencer.FileKind(data)
			var lerr error
			switch kind {
			case sequencer.FileStation:
				st, lerr = sequencer.ParseStation(path, data)
			case sequencer.FileSequence:
				var s *sequencer.Sequence
				s, lerr = sequencer.LoadSequence(path)
				if s != nil {
					seqs = append(seqs, s)
				}
			case sequencer.FileLimits:
				_, lerr = limits.Load(path, data, sequencer.ResultCatalog)
			default:
				problems = append(problems, &files.Error{File: path, Line: 1, Col: 1,
					Msg: "cannot tell the kind of file: expected a top-level key station:, sequence: or limit_set:"})
				continue
			}
			if lerr != nil {
				if fe := files.Errs(lerr); fe != nil {
					problems = append(problems, fe...)
				} else {
					other = append(other, fmt.Errorf("%s: %w", path, lerr))
				}
				continue
			}
			fmt.Fprintf(e.stdout, "ok  %s (%s)\n", path, kind)
		}
		if st != nil {
			for _, s := range seqs {
				if err := sequencer.CheckCaps(st, s); err != nil {
					other = append(other, err)
				}
				checks, err := sequencer.CheckTUR(st, s)
				if err != nil {
					other = append(other, err)
				}
				printTUR(e.stdout, st, s, checks)
			}
		}
		for _, p := range problems {
			fmt.Fprintln(e.stdout, p.Detail())
		}
		for _, err := range other {
			fmt.Fprintln(e.stdout, err)
		}
		if n := len(problems) + len(other); n > 0 {
			fmt.Fprintf(e.stdout, "%d problem(s)\n", n)
			return report(badInput(fmt.Errorf("%d problem(s)", n)))
		}
		return nil
	}
	return c
}

// printTUR shows the test uncertainty ratio each toleranced limit can reach on
// this station, from the instruments' specifications alone.
func printTUR(w io.Writer, st *sequencer.Station, seq *sequencer.Sequence, checks []limits.TURCheck) {
	if len(checks) == 0 {
		return
	}
	fmt.Fprintf(w, "\nTUR on station %s for %s (from instrument specs; minimum %g:1):\n", st.ID, seq.Limits.File, seq.Limits.Policy().MinTUR)
	for _, c := range checks {
		switch {
		case c.OneSided:
			fmt.Fprintf(w, "  %-28s  —       one-sided tolerance\n", c.Limit)
		case c.Low:
			fmt.Fprintf(w, "  %-28s  %-7s below the minimum: %s\n", c.Limit, turRatio(c.TUR), c.Note)
		default:
			fmt.Fprintf(w, "  %-28s  %-7s ok\n", c.Limit, turRatio(c.TUR))
		}
	}
}

func turRatio(v float64) string {
	if !(v > 0) {
		return "?"
	}
	return fmt.Sprintf("%.1f:1", v)
}
