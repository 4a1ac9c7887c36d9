// Command trimline runs an end-of-line gain and offset trim station: it sweeps a
// precision source across a unit's input range, reads the output with a meter, fits
// slope and offset, writes trim codes into the unit, verifies with a second sweep,
// judges the results against the quality engineers' limit file and issues a per-unit
// PDF certificate, while a ledger keeps every reading.
//
// This file only parses the command line, cancels a context on Ctrl-C or SIGTERM and
// maps errors to exit codes (exitCode is the one place that does); commands are
// values (command.go), each in a file of its own.
package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"os/signal"
	"runtime/debug"
	"syscall"

	"trimline/cmd/trimline/internal/shift"
	_ "trimline/instruments/generic" // SCPI and trim-port drivers, schemes serial:// tcp:// usbtmc://
	_ "trimline/instruments/sim"     // the simulated bench, scheme sim://
	"trimline/reports/audit"
	"trimline/reports/issuing"
	"trimline/reports/release"
	"trimline/reports/signing"
	"trimline/sequencer"
	"trimline/sequencer/fit"
)

// Exit codes, part of the interface: scripts and line controllers read them.
const (
	exitPass    = 0 // every unit passed
	exitFail    = 1 // at least one unit failed its limits
	exitUsage   = 2 // bad input: usage, flags or a file with problems
	exitStation = 3 // station fault: an instrument or I/O error, or an aborted run
)

func main() {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	code := run(ctx, os.Args[1:], os.Stdout, os.Stderr)
	stop()
	os.Exit(code)
}

// run is main without the process: it returns the exit code.
func run(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	return runEnv(ctx, args, &env{stdout: stdout, stderr: stderr})
}

// runEnv is run with the env given (tests fix its clock).
func runEnv(ctx context.Context, args []string, e *env) int {
	root := trimline()
	stdout, stderr := e.stdout, e.stderr
	if len(args) == 0 || args[0] == "help" || args[0] == "-h" || args[0] == "--help" {
		if len(args) > 1 && args[0] == "help" {
			if top := root.sub(args[1]); top != nil {
				c, _ := top.lookup(args[2:])
				c.usage(stdout)
				return exitPass
			}
		}
		root.usage(stdout)
		if len(args) == 0 {
			return exitUsage
		}
		return exitPass
	}
	if args[0] == "version" || args[0] == "--version" {
		fmt.Fprintln(stdout, "trimline", version())
		return exitPass
	}
	top := root.sub(args[0])
	if top == nil {
		fmt.Fprintf(stderr, "trimline: unknown command %q\nRun 'trimline help' for the list.\n", args[0])
		return exitUsage
	}
	c, rest := top.lookup(args[1:])
	err := c.run(ctx, e, rest)
	code := exitCode(err)
	var r *reported
	if err != nil && !errors.As(err, &r) {
		if wantsJSON(c, rest) {
			writeJSON(stderr, newErrorOut(c.LongName(), err, code))
			return code
		}
		fmt.Fprintf(stderr, "trimline %s: %v\n", c.LongName(), err)
		var ue *usageError
		if errors.As(err, &ue) && ue.showUsage {
			c.usage(stderr)
		}
	}
	return code
}

// exitCode maps a command's error to the process's exit code; it is the only
// place that does.
func exitCode(err error) int {
	var ue *usageError
	switch {
	case err == nil:
		return exitPass
	case errors.Is(err, sequencer.ErrBatchStopped), errors.Is(err, sequencer.ErrUnitFault):
		return exitStation
	case errors.Is(err, sequencer.ErrUnitsFailed), errors.Is(err, errRejected):
		return exitFail
	case errors.As(err, &ue), errors.Is(err, errBadInput),
		errors.Is(err, release.ErrNotReleased), errors.Is(err, release.ErrNotReleasable), errors.Is(err, release.ErrReleaseKeys),
		errors.Is(err, release.ErrUntrusted), errors.Is(err, release.ErrLint), errors.Is(err, release.ErrDecision),
		errors.Is(err, shift.ErrBadInput),
		errors.Is(err, audit.ErrUntrustedVoid),
		errors.Is(err, sequencer.ErrSafety), errors.Is(err, sequencer.ErrUnboundRole), errors.Is(err, sequencer.ErrTUR),
		errors.Is(err, sequencer.ErrStepTiming),
		errors.Is(err, sequencer.ErrBadSerial), errors.Is(err, issuing.ErrTestedBefore), errors.Is(err, issuing.ErrAttemptsUsed),
		errors.Is(err, signing.ErrNoTrust), errors.Is(err, signing.ErrUnsafeKeyFolder),
		errors.Is(err, fit.ErrTooFewPoints), errors.Is(err, fit.ErrSingular), errors.Is(err, fit.ErrInvalidInput),
		errors.Is(err, fit.ErrNotFinite):
		return exitUsage
	}
	return exitStation // an instrument, the ledger or the file system failed
}

// Kinds of error a command gives main to map; none changes the error's message.
var (
	// errBadInput: what the person gave cannot be used — a file that is missing
	// or has problems, a key, a certificate number the ledger does not know.
	errBadInput = errors.New("bad input")
	// errRejected: what was checked is not what it claims to be — a certificate
	// that is not genuine, a broken ledger chain, a replay that differs, a bundle
	// that does not verify.
	errRejected = errors.New("rejected")
)

// kinded is an error with a kind main maps; its message is the error's own.
type kinded struct{ kind, err error }

func (k *kinded) Error() string   { return k.err.Error() }
func (k *kinded) Unwrap() []error { return []error{k.kind, k.err} }

func badInput(err error) error { return &kinded{errBadInput, err} }
func rejected(err error) error { return &kinded{errRejected, err} }

// usageError is a command line that does not say what to do.
type usageError struct {
	msg       string
	showUsage bool // print the command's usage after the message (bad flags)
}

func (e *usageError) Error() string { return e.msg }

func usagef(format string, args ...any) error {
	return &usageError{msg: fmt.Sprintf(format, args...)}
}

// reported is an outcome the command has already told on stdout (a verdict, a
// list of problems); main maps it to an exit code without printing it again.
type reported struct{ err error }

func (r *reported) Error() string { return r.err.Error() }
func (r *reported) Unwrap() error { return r.err }

// report marks err as already told; nil stays nil.
func report(err error) error {
	if err == nil {
		return nil
	}
	return &reported{err}
}

// version is the module version with the VCS revision when the binary was built from
// a checkout.
func version() string {
	bi, ok := debug.ReadBuildInfo()
	if !ok {
		return "dev"
	}
	v := bi.Main.Version
	if v == "" || v == "(devel)" {
		v = "dev"
	}
	var rev, dirty string
	for _, s := range bi.Settings {
		switch s.Key {
		case "vcs.revision":
			rev = s.Value
		case "vcs.modified":
			if s.Value == "true" {
				dirty = "+dirty"
			}
		}
	}
	if len(rev) > 12 {
		rev = rev[:12]
	}
	if rev != "" {
		v += " (" + rev + dirty + ")"
	}
	return v
}
