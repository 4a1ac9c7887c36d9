package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"slices"
	"strings"
	"time"
)

// command is one command or subcommand, described as data; its help is generated
// from these fields.
type command struct {
	// UsageLine is the one-line usage; its words up to the first that is not a
	// plain lower-case word are the command's long name ("limits whatif").
	UsageLine string
	Short     string // one line, shown in the parent's list
	Long      string // paragraphs, shown by -h and 'trimline help'
	// Flag is the command's own flag set. Flags may stand before, between or
	// after the arguments.
	Flag flag.FlagSet
	// Run runs the command with the positional arguments, its flags parsed. A
	// command with Commands has no Run.
	Run func(ctx context.Context, e *env, args []string) error
	// Commands are the subcommands, in the order help lists them.
	Commands []*command
}

// env is what a running command writes to, and its clock.
type env struct {
	stdout, stderr io.Writer
	now            func() time.Time // nil: time.Now; tests set a fixed day
}

// clock returns the time now, from e.now when set.
func (e *env) clock() time.Time {
	if e.now != nil {
		return e.now()
	}
	return time.Now()
}

// trimline builds the command tree. run calls it once per invocation and finds
// commands by walking it; it is not a package variable so that every invocation
// (the process's one, or each of a test's) parses into flags of its own.
func trimline() *command {
	root := &command{
		UsageLine: "trimline <command> [flags] [args]",
		Short:     "end-of-line gain and offset trim station",
		Commands: []*command{
			newAuditCmd(), newBenchCmd(), newChartCmd(), newCheckCmd(), newConsoleCmd(), newDemoCmd(), newExportCmd(),
			newFitCmd(), newImportCmd(), newKeysCmd(), newLimitsCmd(), newReprintCmd(), newRunCmd(),
			newPlanCmd(), newReviewCmd(), newStatsCmd(),
		},
	}
	root.walk(func(c *command) {
		c.Flag.Init(c.LongName(), flag.ContinueOnError)
		c.Flag.SetOutput(io.Discard)
	})
	return root
}

// walk calls f for c and every command below it.
func (c *command) walk(f func(*command)) {
	f(c)
	for _, s := range c.Commands {
		s.walk(f)
	}
}

// LongName is the command's name with its parents' names, without "trimline":
// "limits whatif"; "" for the root.
func (c *command) LongName() string {
	words := strings.Fields(c.UsageLine)
	var name []string
	for _, w := range words[1:] {
		if strings.Trim(w, "abcdefghijklmnopqrstuvwxyz") != "" {
			break
		}
		name = append(name, w)
	}
	return strings.Join(name, " ")
}

// Name is the last word of the long name: "whatif".
func (c *command) Name() string {
	n := c.LongName()
	return n[strings.LastIndex(n, " ")+1:]
}

// sub returns the subcommand called name, or nil.
func (c *command) sub(name string) *command {
	for _, s := range c.Commands {
		if s.Name() == name {
			return s
		}
	}
	return nil
}

// lookup finds the subcommand of c that args name and returns it with the rest of
// args: a subcommand's name may stand anywhere among its parent's arguments,
// before or after flags (the first argument that names one counts). When none is
// named it returns c and args.
func (c *command) lookup(args []string) (*command, []string) {
	for i, a := range args {
		if strings.HasPrefix(a, "-") {
			continue
		}
		if s := c.sub(a); s != nil {
			return s.lookup(append(slices.Clip(args[:i]), args[i+1:]...))
		}
	}
	return c, args
}

// run parses c's flags and runs it; -h prints its usage and succeeds.
func (c *command) run(ctx context.Context, e *env, args []string) error {
	if c.Run == nil {
		// A command of subcommands that lookup found none of.
		names := make([]string, len(c.Commands))
		for i, s := range c.Commands {
			names[i] = s.Name()
		}
		switch {
		case slices.ContainsFunc(args, isHelpFlag):
			c.usage(e.stdout)
			return nil
		case len(args) == 0:
			last := len(names) - 1
			if last == 0 {
				return usagef("name a subcommand: %s", names[0])
			}
			return usagef("name a subcommand: %s or %s", strings.Join(names[:last], ", "), names[last])
		}
		return usagef("unknown subcommand %q (%s)", args[0], strings.Join(names, ", "))
	}
	// A command with a flag named h (chart's CUSUM decision interval) still
	// answers -h with its help: its flag is written --h.
	if c.Flag.Lookup("h") != nil && slices.Contains(args, "-h") {
		c.usage(e.stdout)
		return nil
	}
	pos, err := parseInterleaved(&c.Flag, args)
	if errors.Is(err, flag.ErrHelp) {
		c.usage(e.stdout)
		return nil
	}
	if err != nil {
		return &usageError{msg: err.Error(), showUsage: true}
	}
	return c.Run(ctx, e, pos)
}

func isHelpFlag(a string) bool { return a == "-h" || a == "--help" || a == "-help" }

// usage writes c's help: usage line, summary, long text, subcommands and flags.
func (c *command) usage(w io.Writer) {
	if c.LongName() == "" {
		fmt.Fprintf(w, "trimline %s — %s\n\nUsage: %s\n\nCommands:\n", version(), c.Short, c.UsageLine)
		for _, s := range c.Commands {
			fmt.Fprintf(w, "  %-8s %s\n", s.Name(), s.Short)
		}
		fmt.Fprintf(w, "\nExit codes: 0 every unit passed, 1 a unit failed or was held for review, 2 bad input or usage, 3 station fault.\nRun 'trimline help <command>' for its flags.\n")
		return
	}
	fmt.Fprintf(w, "Usage: %s\n\n%s\n", c.UsageLine, c.Short)
	if c.Long != "" {
		fmt.Fprintf(w, "\n%s\n", strings.TrimSpace(c.Long))
	}
	if len(c.Commands) > 0 {
		fmt.Fprintf(w, "\nCommands:\n")
		for _, s := range c.Commands {
			fmt.Fprintf(w, "  %-8s %s\n", s.Name(), s.Short)
		}
		fmt.Fprintf(w, "\nRun 'trimline help %s <command>' for its flags.\n", c.LongName())
	}
	has := false
	c.Flag.VisitAll(func(*flag.Flag) { has = true })
	if has {
		fmt.Fprintf(w, "\nFlags:\n")
		c.Flag.SetOutput(w)
		c.Flag.PrintDefaults()
		c.Flag.SetOutput(io.Discard)
	}
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
