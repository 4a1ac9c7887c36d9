package main

import (
	"context"
	"fmt"
	"io"
	"maps"
	"slices"
	"strings"
	"text/tabwriter"
	"unicode/utf8"

	"trimline/instruments/files"
	"trimline/instruments/units"
	"trimline/limits"
	"trimline/reports/certificate"
	"trimline/reports/signing"
	"trimline/sequencer"
)

func newCheckCmd() *command {
	c := &command{
		UsageLine: "trimline check [--steps] [--json] FILE|FOLDER...",
		Short:     "validate station, sequence and limit files",
		Long: `Loads each file as production would and prints every problem of every file,
in one pass, as file:line:col with an excerpt. The kind of each file is told by its
top-level key: station:, sequence: or limit_set:. A sequence file also loads the
limit file it names, which must be for the sequence's product. A folder stands for
every file under it.

The other files a station's folder holds are recognised too. Trust files, key
files, seals and saved chain heads are loaded as the commands that use them would
load them ("ok" when they can be used); certificates, the ledger, export bundles and
the run log are not inputs, and check says which command checks them (a line
starting "--"); they count as no problem.

A station file is also checked for what production would refuse later: a
calibration that has run out (an error) or runs out within 14 days (a warning), and
a signing key that is missing or cannot be read. When a station and a sequence are
both given, every sweep level is checked against the station's caps and the
source's rating, and the roles against the station's instruments.

With --steps, each sequence that loads is followed by the list of steps it read:
name, kind, stage, the roles each uses and the results each declares (what a limit
file may judge).

Exit code 0 when no file has an error (warnings are printed but do not count), 2
otherwise.`,
	}
	showSteps := c.Flag.Bool("steps", false, "after each sequence, list the steps it read (name, kind, stage, roles, results)")
	asJSON := jsonFlag(c, "one object with every file, problem and TUR line")
	c.Run = func(ctx context.Context, e *env, args []string) error {
		if len(args) == 0 {
			return usagef("name at least one file")
		}
		var problems files.List
		var other []error
		var stations []*sequencer.Station
		var seqs []*sequencer.Sequence
		// With --json the text goes nowhere and out collects the same.
		stdout, stderr := e.stdout, e.stderr
		if *asJSON {
			stdout, stderr = io.Discard, io.Discard
		}
		out := checkOut{Kind: kindCheck, Version: jsonVersion, Files: []fileOut{}, Problems: []problem{}, TUR: []turOut{}, Notes: []string{}}
		args, err := expandFolders(args)
		if err != nil {
			return badInput(err)
		}
		// The steps of each product a sequence given here is for: a limit file
		// beside no sequence naming it is read against its product's steps.
		productCats := map[string]limits.Catalog{}
		for _, path := range args {
			data, err := files.ReadFile(path)
			if err != nil || sequencer.FileKind(data) != sequencer.FileSequence {
				continue
			}
			if s, err := sequencer.LoadSequenceSteps(path); err == nil && s.Product != "" {
				p := strings.TrimSpace(s.Product)
				if productCats[p] == nil {
					productCats[p] = limits.Catalog{}
				}
				maps.Copy(productCats[p], s.Catalog())
			}
		}
		for _, path := range args {
			if err := ctx.Err(); err != nil {
				return err // one file's parse is bounded (files.Check); stop between files
			}
			if o := recogniseOther(path); o != nil {
				if o.elsewhere != nil {
					fmt.Fprintf(stdout, "--  %s (%s): %s\n", path, o.kind, o.elsewhere(path))
					out.Files = append(out.Files, fileOut{Path: path, What: o.kind, OK: true, Says: o.elsewhere(path)})
					continue
				}
				what, err := o.check(path)
				if err != nil {
					other = append(other, fmt.Errorf("%s: %s: %w", path, o.kind, err))
					out.Files = append(out.Files, fileOut{Path: path, What: o.kind, Says: err.Error()})
					continue
				}
				fmt.Fprintf(stdout, "ok  %s (%s: %s)\n", path, o.kind, what)
				out.Files = append(out.Files, fileOut{Path: path, What: o.kind, OK: true, Says: what})
				continue
			}
			data, err := files.ReadFile(path)
			if err != nil {
				if fe := files.Errs(err); fe != nil {
					problems = append(problems, fe...)
				} else {
					other = append(other, err)
				}
				out.Files = append(out.Files, fileOut{Path: path, What: "unreadable"})
				continue
			}
			kind := sequencer.FileKind(data)
			var lerr error
			says := "" // what the ok line adds to the kind
			switch kind {
			case sequencer.FileStation:
				var st *sequencer.Station
				if st, lerr = sequencer.InspectStation(path, data); st != nil {
					problems = append(problems, stationProblems(e, st)...)
					if lerr == nil {
						stations = append(stations, st)
						if st.Site != "" {
							says = "site: " + st.Site
						}
					}
				}
			case sequencer.FileSequence:
				var s *sequencer.Sequence
				s, lerr = sequencer.LoadSequence(path)
				if s != nil {
					seqs = append(seqs, s)
					problems = append(problems, s.Warnings...)
				}
			case sequencer.FileLimits:
				cat, seq, note := sequencer.CatalogFor(path)
				if given := productCats[sequencer.LimitsProduct(data)]; given != nil && (seq == nil || note != "") {
					cat, note = given, ""
				}
				if note != "" {
					fmt.Fprintln(stderr, "note:", note)
					out.Notes = append(out.Notes, note)
				}
				_, lerr = limits.Load(path, data, cat)
			default:
				problems = append(problems, &files.Error{File: path, Line: 1, Col: 1,
					Msg: "cannot tell the kind of file: expected a top-level key station:, sequence: or limit_set:"})
				out.Files = append(out.Files, fileOut{Path: path, What: "unknown"})
				continue
			}
			if lerr != nil {
				if fe := files.Errs(lerr); fe != nil {
					problems = append(problems, fe...)
				} else {
					other = append(other, fmt.Errorf("%s: %w", path, lerr))
				}
				out.Files = append(out.Files, fileOut{Path: path, What: kind})
				continue
			}
			if says != "" {
				fmt.Fprintf(stdout, "ok  %s (%s; %s)\n", path, kind, says)
			} else {
				fmt.Fprintf(stdout, "ok  %s (%s)\n", path, kind)
			}
			out.Files = append(out.Files, fileOut{Path: path, What: kind, OK: true, Says: says})
			if *showSteps && kind == sequencer.FileSequence {
				printSteps(stdout, seqs[len(seqs)-1])
			}
		}
		for _, st := range stations {
			for _, s := range seqs {
				if err := sequencer.CheckCaps(st, s); err != nil {
					other = append(other, err)
				}
				if err := sequencer.CheckTiming(st, s); err != nil {
					other = append(other, err)
				}
				checks, err := sequencer.CheckTUR(st, s)
				if err != nil {
					other = append(other, err)
				}
				printTUR(stdout, st, s, checks)
				paper := sequencer.PredictResults(st, s)
				printBudgets(stdout, checks, paper)
				for _, c := range checks {
					tur := num(c.TUR)
					if !(c.TUR > 0) {
						tur = nil
					}
					out.TUR = append(out.TUR, turOut{Station: st.ID, Limits: s.Limits.File, Limit: c.Limit, Result: c.Result,
						TUR: tur, Minimum: c.Min, Low: c.Low, OneSided: c.OneSided, Note: c.Note, Budget: budgetJSON(paper, c)})
				}
			}
		}
		problems.Sort()
		warnings := 0
		for _, p := range problems {
			fmt.Fprintln(stdout, p.Detail())
			out.Problems = append(out.Problems, newProblem(p))
			if p.Warning {
				warnings++
			}
		}
		for _, err := range other {
			fmt.Fprintln(stdout, err)
			// Not positioned: the message names the file where it knows it.
			out.Problems = append(out.Problems, problem{Message: err.Error()})
		}
		if warnings > 0 {
			fmt.Fprintf(stdout, "%d warning(s)\n", warnings)
		}
		n := len(problems) - warnings + len(other)
		for i, f := range out.Files {
			// A file that loads may still have an error production would
			// meet (a calibration run out).
			if slices.ContainsFunc(problems, func(p *files.Error) bool { return !p.Warning && p.File == f.Path }) {
				out.Files[i].OK = false
			}
		}
		out.OK, out.Errors, out.Warnings = n == 0, n, warnings
		if *asJSON {
			writeJSON(e.stdout, out)
		}
		if n > 0 {
			fmt.Fprintf(stdout, "%d problem(s)\n", n)
			return report(badInput(fmt.Errorf("%d problem(s)", n)))
		}
		return nil
	}
	return c
}

// stationProblems are what a loaded station file would meet in production beyond
// the loader's checks: calibrations run out or running out at e's clock, a
// signing key that is missing or unreadable, and a person's public key that is.
func stationProblems(e *env, st *sequencer.Station) files.List {
	out := st.CheckCalibration(e.clock())
	if st.SigningKey != "" {
		if _, err := signing.Load(st.SigningKey); err != nil {
			out = append(out, st.Errorf("$.signing.key", "cannot use the signing key: %v (make one with: trimline keys init)", err))
		}
	}
	for i, p := range st.People {
		if p.Key == "" {
			continue
		}
		if _, err := signing.LoadPublic(p.Key); err != nil {
			out = append(out, st.Errorf(fmt.Sprintf("$.people[%d].key", i), "cannot use %s's public key: %v (trimline keys init makes a key pair; the person keeps the .key)", p.Name, err))
		}
	}
	return out
}

// printSteps lists the steps seq read, one a line, indented under its "ok" line.
func printSteps(w io.Writer, seq *sequencer.Sequence) {
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprintf(tw, "    #\tstep\tkind\tstage\troles\tresults\n")
	n := 0
	for i, d := range seq.Steps {
		if i > 0 && d.Channel != "" && seq.Steps[i-1].Name == d.Name {
			continue // the same step on the next channel: one line says them all
		}
		n++
		name := d.Name
		if d.Channel != "" {
			var chans []string
			for _, e := range seq.Steps[i:] {
				if e.Name != d.Name {
					break
				}
				chans = append(chans, e.Channel)
			}
			word := "channels "
			if len(chans) == 1 {
				word = "channel "
			}
			name += " (" + word + strings.Join(chans, ", ") + ")"
		}
		roles := make([]string, len(d.Roles))
		for j, r := range d.Roles {
			roles[j] = fmt.Sprintf("%s (%s)", r.Role, r.Kind)
		}
		results := make([]string, len(d.Results))
		for j, r := range d.Results {
			results[j] = r.Name
		}
		last := orDash(strings.Join(results, ", "))
		if d.SkipIf != "" {
			last += "; skipped if " + d.SkipIf
		}
		fmt.Fprintf(tw, "    %d\t%s\t%s\t%s\t%s\t%s\n", n, name, d.Kind, d.Stage, orDash(strings.Join(roles, ", ")), last)
	}
	tw.Flush()
}

func orDash(s string) string {
	if s == "" {
		return "—"
	}
	return s
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
			fmt.Fprintf(w, "  %-28s  %-7s below the minimum: %s\n", c.Limit, turRatio(c.TUR, c.Low), c.Note)
		default:
			fmt.Fprintf(w, "  %-28s  %-7s ok\n", c.Limit, turRatio(c.TUR, c.Low))
		}
	}
}

// turRatio writes a TUR as the certificate does (units.FormatTUR).
func turRatio(v float64, low bool) string {
	if !(v > 0) {
		return "?"
	}
	return units.FormatTUR(v, low)
}

// printBudgets shows, under the TUR lines, the uncertainty budget on paper of
// each toleranced result: every input from the instruments' specifications with
// its u, sensitivity, contribution and share (certificate.BudgetText, as the
// certificate prints a unit's), so that one sees which instrument term limits
// the TUR. A unit's own noise adds a Type A row on the bench. The columns line
// up across all budgets, under one header.
func printBudgets(w io.Writer, checks []limits.TURCheck, results []sequencer.Result) {
	byName := map[string]sequencer.Result{}
	for _, r := range results {
		byName[r.Name] = r
	}
	type block struct {
		title string
		rows  [][]string
	}
	var blocks []block
	done := map[string]bool{}
	all := [][]string{certificate.BudgetColumns}
	for _, c := range checks {
		r, ok := byName[c.Result]
		if c.OneSided || !ok || done[c.Result] {
			continue
		}
		rows, _ := certificate.BudgetText(r)
		if len(rows) == 0 {
			continue
		}
		done[c.Result] = true
		blocks = append(blocks, block{fmt.Sprintf("  %s (%s): %s", c.Limit, c.Result, certificate.BudgetFoot(r)), rows})
		all = append(all, rows...)
	}
	if len(blocks) == 0 {
		return
	}
	width := columnWidths(all)
	fmt.Fprintf(w, "\nUncertainty budgets on paper (instrument specs only; a unit's noise adds to them):\n")
	printRow(w, "    ", certificate.BudgetColumns, width, 2)
	for _, b := range blocks {
		fmt.Fprintln(w, b.title)
		for _, r := range b.rows {
			printRow(w, "    ", r, width, 2)
		}
	}
}

// columnWidths is the widest cell of each column of rows, in runes (µ, −, ∞
// are one each).
func columnWidths(rows [][]string) []int {
	var width []int
	for _, r := range rows {
		for i, c := range r {
			if i == len(width) {
				width = append(width, 0)
			}
			width[i] = max(width[i], utf8.RuneCountInString(c))
		}
	}
	return width
}

// printRow writes one row indented by indent, its first left cells aligned
// left in their widths, the rest right, two spaces apart.
func printRow(w io.Writer, indent string, r []string, width []int, left int) {
	var b strings.Builder
	b.WriteString(indent)
	for i, c := range r {
		pad := strings.Repeat(" ", width[i]-utf8.RuneCountInString(c))
		if i > 0 {
			b.WriteString("  ")
		}
		if i < left {
			b.WriteString(c + pad)
		} else {
			b.WriteString(pad + c)
		}
	}
	fmt.Fprintln(w, strings.TrimRight(b.String(), " "))
}

// budgetOut is one row of a result's budget in check --json: SI units (input_u
// in input_unit, "1" for a relative quantity; u in the result's unit), the
// sensitivity null for a per-point row (points says how many), dof null for
// infinite degrees of freedom, share a fraction of u².
type budgetOut struct {
	Name        string   `json:"name"`
	Kind        string   `json:"kind"`
	InputU      float64  `json:"input_u"`
	InputUnit   string   `json:"input_unit"`
	Sensitivity *float64 `json:"sensitivity"`
	Points      int      `json:"points"`
	U           float64  `json:"u"`
	DOF         *float64 `json:"dof"`
	Share       float64  `json:"share"`
}

// budgetJSON is the budget on paper of c's result, for a two-sided limit.
func budgetJSON(paper []sequencer.Result, c limits.TURCheck) []budgetOut {
	if c.OneSided {
		return nil
	}
	for _, r := range paper {
		if r.Name != c.Result {
			continue
		}
		var out []budgetOut
		for _, b := range r.Budget {
			o := budgetOut{Name: b.Name, Kind: b.Kind, InputU: b.InputU, InputUnit: b.InputUnit,
				Points: b.Points, U: b.U, DOF: num(b.DOF), Share: b.Share}
			if b.Points == 0 {
				o.Sensitivity = num(b.Sensitivity)
			}
			out = append(out, o)
		}
		return out
	}
	return nil
}
