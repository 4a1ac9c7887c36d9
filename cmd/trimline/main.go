// Command trimline runs an end-of-line gain and offset trim station: it sweeps a
// precision source across a unit's input range, reads the output with a meter, fits
// slope and offset, writes trim codes into the unit, verifies with a second sweep,
// judges the results against the quality engineers' limit file and issues a per-unit
// PDF certificate, while a ledger keeps every reading.
//
// This file only parses the command line, cancels a context on Ctrl-C or SIGTERM and
// maps errors to exit codes; every command lives in a file of its own.
package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"os/signal"
	"runtime/debug"
	"sort"
	"strings"
	"syscall"

	_ "trimline/instruments/generic" // SCPI and trim-port drivers, schemes serial:// tcp:// usbtmc://
	_ "trimline/instruments/sim"     // the simulated bench, scheme sim://
)

// Exit codes, part of the interface: scripts and line controllers read them.
const (
	exitPass    = 0 // every unit passed
	exitFail    = 1 // at least one unit failed its limits
	exitUsage   = 2 // bad input: usage, flags or a file with problems
	exitStation = 3 // station fault: an instrument or I/O error, or an aborted run
)

// command is one subcommand, described as data; help is generated from it.
type command struct {
	Name  string
	Usage string // arguments after the name
	Short string // one line
	Long  string // paragraphs
	Flags *flag.FlagSet
	Run   func(ctx context.Context, cmd *command, args []string) error
	// RawArgs hands Run the arguments unparsed, for a command whose subcommands
	// parse flags of their own.
	RawArgs bool
}

// commands holds a constructor per command, so every run parses into fresh flags.
var commands []func() *command

func register(newCmd func() *command) {
	commands = append(commands, newCmd)
	sort.Slice(commands, func(i, j int) bool { return commands[i]().Name < commands[j]().Name })
}

func newFlags(name string) *flag.FlagSet {
	fs := flag.NewFlagSet(name, flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	return fs
}

// exitError carries an exit code up to main.
type exitError struct {
	code int
	err  error
}

func (e *exitError) Error() string { return e.err.Error() }
func (e *exitError) Unwrap() error { return e.err }

func usageErr(format string, args ...any) error {
	return &exitError{exitUsage, fmt.Errorf(format, args...)}
}

func badInput(err error) error   { return &exitError{exitUsage, err} }
func stationErr(err error) error { return &exitError{exitStation, err} }

// silent is an exit code whose message was already printed.
type silent int

func (s silent) Error() string { return fmt.Sprintf("exit %d", int(s)) }

func main() {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	code := run(ctx, os.Args[1:], os.Stdout, os.Stderr)
	stop()
	os.Exit(code)
}

// run is main without the process: it returns the exit code.
func run(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	if len(args) == 0 || args[0] == "help" || args[0] == "-h" || args[0] == "--help" {
		if len(args) > 1 {
			if c := find(args[1]); c != nil {
				usage(c, stdout)
				return exitPass
			}
		}
		mainUsage(stdout)
		if len(args) == 0 {
			return exitUsage
		}
		return exitPass
	}
	if args[0] == "version" || args[0] == "--version" {
		fmt.Fprintln(stdout, "trimline", version())
		return exitPass
	}
	c := find(args[0])
	if c == nil {
		fmt.Fprintf(stderr, "trimline: unknown command %q\nRun 'trimline help' for the list.\n", args[0])
		return exitUsage
	}
	c.Flags.SetOutput(io.Discard)
	if c.RawArgs {
		stdoutW, stderrW = stdout, stderr
		return exitCode(c.Run(ctx, c, args[1:]), c.Name, stderr)
	}
	// Flags may stand before, between or after the arguments.
	pos, err := parseInterleaved(c.Flags, args[1:])
	if err != nil {
		if errors.Is(err, flag.ErrHelp) {
			usage(c, stdout)
			return exitPass
		}
		fmt.Fprintf(stderr, "trimline %s: %v\n", c.Name, err)
		usage(c, stderr)
		return exitUsage
	}
	stdoutW, stderrW = stdout, stderr
	return exitCode(c.Run(ctx, c, pos), c.Name, stderr)
}

// stdoutW and stderrW are where commands write; tests swap them through run.
var stdoutW, stderrW io.Writer = os.Stdout, os.Stderr

func exitCode(err error, name string, stderr io.Writer) int {
	if err == nil {
		return exitPass
	}
	var s silent
	if errors.As(err, &s) {
		return int(s)
	}
	var ee *exitError
	code := exitStation
	if errors.As(err, &ee) {
		code = ee.code
	}
	fmt.Fprintf(stderr, "trimline %s: %v\n", name, err)
	return code
}

func find(name string) *command {
	for _, newCmd := range commands {
		if c := newCmd(); c.Name == name {
			return c
		}
	}
	return nil
}

func mainUsage(w io.Writer) {
	fmt.Fprintf(w, "trimline %s — end-of-line gain and offset trim station\n\nUsage: trimline <command> [flags] [args]\n\nCommands:\n", version())
	for _, newCmd := range commands {
		c := newCmd()
		fmt.Fprintf(w, "  %-8s %s\n", c.Name, c.Short)
	}
	fmt.Fprintf(w, "\nExit codes: 0 every unit passed, 1 a unit failed or was held for review, 2 bad input or usage, 3 station fault.\nRun 'trimline help <command>' for its flags.\n")
}

func usage(c *command, w io.Writer) {
	fmt.Fprintf(w, "Usage: trimline %s %s\n\n%s\n", c.Name, c.Usage, c.Short)
	if c.Long != "" {
		fmt.Fprintf(w, "\n%s\n", strings.TrimSpace(c.Long))
	}
	has := false
	c.Flags.VisitAll(func(*flag.Flag) { has = true })
	if has {
		fmt.Fprintf(w, "\nFlags:\n")
		c.Flags.SetOutput(w)
		c.Flags.PrintDefaults()
		c.Flags.SetOutput(io.Discard)
	}
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

// multiFlag collects a repeatable string flag.
type multiFlag []string

func (m *multiFlag) String() string     { return strings.Join(*m, ",") }
func (m *multiFlag) Set(v string) error { *m = append(*m, v); return nil }

// parseInterleaved parses flags that may stand before, between or after the
// positional arguments, and returns the positional ones in order.
func parseInterleaved(fs *flag.FlagSet, args []string) ([]string, error) {
	var pos []string
	for {
		if err := fs.Parse(args); err != nil {
			return nil, err
		}
		if fs.NArg() == 0 {
			return pos, nil
		}
		pos = append(pos, fs.Arg(0))
		args = fs.Args()[1:]
	}
}
