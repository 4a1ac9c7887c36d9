package main

import (
	"errors"
	"fmt"
	"strings"
	"testing"

	"trimline/reports/release"
	"trimline/sequencer"
	"trimline/sequencer/fit"
)

// Every command and subcommand answers -h, --help and 'trimline help …' with its
// usage and exit code 0.
func TestEveryCommandAnswersHelp(t *testing.T) {
	n := 0
	trimline().walk(func(c *command) {
		if c.LongName() == "" {
			return
		}
		n++
		path := strings.Fields(c.LongName())
		for _, args := range [][]string{
			append(append([]string{}, path...), "-h"),
			append(append([]string{}, path...), "--help"),
			append([]string{"help"}, path...),
		} {
			code, out, errOut := runCLI(t, args...)
			if code != exitPass || !strings.Contains(out, "Usage: "+c.UsageLine+"\n") {
				t.Errorf("trimline %s: exit %d, want 0 and the usage line %q\n%s%s", strings.Join(args, " "), code, c.UsageLine, out, errOut)
			}
		}
	})
	if n < 18 {
		t.Errorf("walked %d commands; the tree has at least 18", n)
	}
}

// A subcommand's name may stand before or after its flags, and a parent without
// one says which it has.
func TestSubcommandLookup(t *testing.T) {
	root := trimline()
	limits := root.sub("limits")
	for _, args := range [][]string{
		{"whatif", "NEW", "--ledger", "db"},
		{"--ledger", "db", "whatif", "NEW"},
	} {
		c, rest := limits.lookup(args)
		if c.LongName() != "limits whatif" || strings.Join(rest, " ") != strings.Join(without(args, "whatif"), " ") {
			t.Errorf("lookup %q: %q %q", args, c.LongName(), rest)
		}
	}
	if code, _, errOut := runCLI(t, "limits"); code != exitUsage || !strings.Contains(errOut, "name a subcommand: lint, diff, whatif or release") {
		t.Errorf("limits alone: exit %d %s", code, errOut)
	}
	if code, _, errOut := runCLI(t, "audit", "nonsense"); code != exitUsage || !strings.Contains(errOut, `unknown subcommand "nonsense" (verify, ledger, replay, void)`) {
		t.Errorf("audit nonsense: exit %d %s", code, errOut)
	}
	if code, _, errOut := runCLI(t, "limits", "whatif", "--bogus"); code != exitUsage || !strings.Contains(errOut, "Usage: trimline limits whatif") {
		t.Errorf("bad flag: exit %d %s", code, errOut)
	}
}

func without(args []string, drop string) []string {
	var out []string
	for _, a := range args {
		if a != drop {
			out = append(out, a)
		}
	}
	return out
}

// exitCode is the one place errors become exit codes; wrapping keeps the code.
func TestExitCode(t *testing.T) {
	for _, c := range []struct {
		err  error
		want int
	}{
		{nil, exitPass},
		{report(nil), exitPass},
		{report(sequencer.ErrUnitsFailed), exitFail},
		{fmt.Errorf("x: %w", sequencer.ErrUnitFault), exitStation},
		{report(sequencer.ErrBatchStopped), exitStation},
		{report(rejected(errors.New("altered"))), exitFail},
		{usagef("name a subcommand"), exitUsage},
		{badInput(errors.New("no such file")), exitUsage},
		{&release.NotReleasedError{}, exitUsage},
		{fmt.Errorf("open: %w", sequencer.ErrSafety), exitUsage},
		{fmt.Errorf("open: %w", sequencer.ErrStepTiming), exitUsage},
		{fmt.Errorf("f.csv: %w", fit.ErrTooFewPoints), exitUsage},
		{errors.New("meter timeout"), exitStation},
	} {
		if got := exitCode(c.err); got != c.want {
			t.Errorf("exitCode(%v) = %d, want %d", c.err, got, c.want)
		}
	}
}

// Lint's TUR check needs both files; a station alone is refused, not ignored.
func TestLintStationNeedsSequence(t *testing.T) {
	code, _, errOut := runCLI(t, "limits", "lint", "--station", "st.yaml", "limits.yaml")
	if code != exitUsage || !strings.Contains(errOut, "--station needs --sequence") {
		t.Errorf("lint --station alone: exit %d %s", code, errOut)
	}
}
