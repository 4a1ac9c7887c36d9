package main

import (
	"context"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"unicode/utf8"

	"trimline/cmd/trimline/internal/shift"
	"trimline/instruments/units"
	"trimline/sequencer"
)

// batch is one production session: a station, a sequence and a list of serials.
type batch struct {
	stationPath, sequencePath string
	serials                   []string
	out                       string // output folder; "" = the station file's
	operator                  string
	ambient                   string // entered ambient temperature, e.g. "23.1 °C"; "" = not recorded
	engineering               bool   // run unreleased files; certificates are marked and numbered apart
	lot                       string // production lot recorded in every run; "" = none
	retest                    bool   // serials with an earlier measured run may run again (and supersede its certificate)
	json                      bool   // one JSON object per unit on stdout instead of live lines
}

// detailed is a files.List printed with source excerpts.
type detailed = shift.Detailed

// loadFiles loads the station and sequence files (shift.Load); problems are
// bad input.
func loadFiles(ctx context.Context, stationPath, sequencePath string) (*sequencer.Station, *sequencer.Sequence, error) {
	return shift.Load(ctx, stationPath, sequencePath)
}

// runBatch wires a batch together through a shift (the files, the output
// folder, the log, the ledger, the release check, the issuer and the engine);
// then it runs every serial and prints a line (or a JSON object) per unit.
func runBatch(ctx context.Context, e *env, b batch) (*sequencer.Tally, error) {
	cond, err := shift.ParseAmbient(b.ambient)
	if err != nil {
		return nil, usagef("--ambient: %v", err)
	}
	// With --json, stderr holds nothing but an error object; the log's
	// warnings are in the log file, and a stopped batch's skipped serials in the
	// summary.
	var console io.Writer = e.stderr
	if b.json {
		console = nil
	}
	s, err := shift.Open(ctx, shift.Options{StationPath: b.stationPath, SequencePath: b.sequencePath, Out: b.out,
		Operator: b.operator, Software: "trimline " + version(), Conditions: cond, Engineering: b.engineering, Lot: b.lot,
		Serials: b.serials, Retest: b.retest, Console: console})
	if err != nil {
		return nil, err
	}
	defer s.Close()
	if _, err := s.OpenEngine(ctx, b.serials[0], ""); err != nil {
		return nil, err
	}
	log := s.Log
	log.Info().Str("sequence", s.Sequence.File.Name).Str("limits", s.Sequence.Limits.File).Int("units", len(b.serials)).Msg("batch start")

	t, err := s.Engine.RunBatch(ctx, b.serials, func(i int, rec *sequencer.Record) error {
		cert, err := s.Issuer.Record(context.WithoutCancel(ctx), rec)
		if err != nil {
			return fmt.Errorf("%s: %w", rec.Serial, err)
		}
		log.Info().Str("serial", rec.Serial).Str("verdict", string(rec.Verdict)).Str("certificate", cert).Msg("unit done")
		if b.json {
			writeJSON(e.stdout, newUnitOut(rec, cert, s.Issuer.CertDir))
		} else {
			fmt.Fprintln(e.stdout, liveLine(i+1, len(b.serials), rec, cert))
		}
		return nil
	})
	if len(t.Skipped) > 0 {
		log.Warn().Strs("serials", t.Skipped).Msg("batch stopped: these units were not run")
		if !b.json {
			why := "stopped"
			if n := len(t.Records); n > 0 && t.Records[n-1].Verdict == sequencer.Fault {
				why = "stopped at the station fault of " + t.Records[n-1].Serial + " (fix it, then run these)"
			}
			fmt.Fprintf(e.stderr, "%s: %d unit(s) not run: %s\n", why, len(t.Skipped), strings.Join(t.Skipped, " "))
		}
	}
	return t, err
}

func liveLine(i, n int, rec *sequencer.Record, cert string) string {
	w := len(fmt.Sprint(n))
	head := fmt.Sprintf("%*d/%d  %-12s %-7s", w, i, n, rec.Serial, rec.Verdict)
	if rec.Verdict == sequencer.Fault {
		// What failed and what to check, in the operator's words.
		f := sequencer.ExplainFault(rec)
		return head + "  " + rec.Fault + "\n" + strings.Repeat(" ", 2*w+3) + "↳ " + f.What + "; check " + f.Check
	}
	if rec.Verdict == sequencer.Aborted {
		return head + "  " + rec.Fault
	}
	var pairs []string
	for _, dim := range liveDims {
		if pair := livePair(rec, dim); pair != "" {
			pairs = append(pairs, pair)
		}
	}
	line := head + "  " + strings.Join(pairs, "   ")
	if cert != "" {
		line += "   " + cert
	}
	// The worst reason in the operator's plain words; the metrologist's
	// statements are in the record, the log and the certificate.
	if why := sequencer.ForOperator(rec, 0, 0).Reasons; (rec.Verdict == sequencer.Fail || rec.Verdict == sequencer.Review) && len(why) > 0 {
		line += "\n" + strings.Repeat(" ", 2*w+3) + "↳ " + why[0]
		if len(why) > 1 {
			line += fmt.Sprintf(" (+%d more)", len(why)-1)
		}
	}
	// A chamber still beyond the handling band of the safe temperature: the
	// operator waits before taking the unit out.
	for _, n := range rec.Notes {
		line += "\n" + strings.Repeat(" ", 2*w+3) + "! " + n
	}
	return line
}

// liveDims are the dimensions the live line pairs as found → as left, in the
// order it shows them: the response's own quantities (V, A or counts) first.
var liveDims = []string{"V", "A", "count", "ratio", "number"}

// livePair shows, for one dimension ("V", "A", "count", "ratio" or "number"),
// the first quantity the unit measured both as found and as left, before →
// after: "offset -448 µV → -12 µV", "offset 31.6 µA → 74 nA", "offset -67.9 →
// 0.3 counts". Only results of the same quantity and channel pair (what they
// measure, Result.QuantityOf: offset with offset, never gain error with
// nonlinearity); "" when no quantity of the dimension has both. Voltages and
// currents have three significant digits as found and two as left, where they
// sit near the noise; counts one decimal (a mean of readings of a 1-count
// resolution).
//
// A unit with several channels shows, of that quantity, the channel whose as
// left value is furthest from zero (an invalid one first): the one nearest its
// limit, which is what an operator looks for on one line. The label says which
// and of how many: "offset ch 3 (worst of 4)".
func livePair(rec *sequencer.Record, dim string) string {
	pairs := quantityPairs(rec, dim)
	if len(pairs) == 0 {
		return ""
	}
	worst := pairs[0]
	for _, p := range pairs[1:] {
		if leftBadness(p[1]) > leftBadness(worst[1]) {
			worst = p
		}
	}
	found, left := worst[0], worst[1]
	show := func(r *sequencer.Result, digits, width int) string {
		v := "—"
		switch {
		case !r.Valid:
		case dim == "V" || dim == "A":
			v = units.Format(r.Value, dim, digits)
		case dim == "count":
			v = fmtCounts(r.Value)
		case dim == "number":
			v = units.FormatNumber(r.Value, 3)
		default:
			v = fmtRatio(r.Value)
		}
		return fmt.Sprintf("%*s", width, v)
	}
	widths := [2]int{9, 9}
	switch dim {
	case "ratio":
		widths = [2]int{8, 7}
	case "number":
		widths = [2]int{5, 5}
	case "count":
		widths = [2]int{6, 5}
	}
	name := label(found.QuantityOf())
	if len(pairs) > 1 {
		name += fmt.Sprintf(" ch %s (worst of %d)", found.Channel, len(pairs))
	}
	pair := fmt.Sprintf("%s %s → %s", name, show(found, 3, widths[0]), show(left, 2, widths[1]))
	if dim == "count" {
		pair += " counts"
	}
	return pair
}

// quantityPairs returns, for the first quantity of dimension dim the record has
// both as found and as left, every channel's pair {as found, as left} of it, in
// the record's order ("" is the channel of a one-channel unit). Nil when no
// quantity of dim has both.
func quantityPairs(rec *sequencer.Record, dim string) [][2]*sequencer.Result {
	q := ""
	for _, r := range rec.Results {
		if r.Unit != dim || r.QuantityOf() == "" || r.StageOf() != sequencer.AsFound {
			continue
		}
		if asLeft(rec, dim, r.QuantityOf(), r.Channel) != nil {
			q = r.QuantityOf()
			break
		}
	}
	if q == "" {
		return nil
	}
	// One pair per channel: the first as-found result of the quantity on each
	// (a unit may measure a quantity as found more than once, e.g. at two
	// temperatures before a drift correction).
	var pairs [][2]*sequencer.Result
	seen := map[string]bool{}
	for i, r := range rec.Results {
		if r.Unit != dim || r.QuantityOf() != q || r.StageOf() != sequencer.AsFound || seen[r.Channel] {
			continue
		}
		if l := asLeft(rec, dim, q, r.Channel); l != nil {
			seen[r.Channel] = true
			pairs = append(pairs, [2]*sequencer.Result{&rec.Results[i], l})
		}
	}
	return pairs
}

// asLeft is the record's first as-left result of quantity q in dimension dim
// on channel ch, nil when there is none.
func asLeft(rec *sequencer.Record, dim, q, ch string) *sequencer.Result {
	for j, l := range rec.Results {
		if l.Unit == dim && l.QuantityOf() == q && l.Channel == ch && l.StageOf() == sequencer.AsLeft {
			return &rec.Results[j]
		}
	}
	return nil
}

// leftBadness orders as-left results from best to worst: by distance from
// zero, an invalid value worst of all.
func leftBadness(r *sequencer.Result) float64 {
	if !r.Valid || math.IsNaN(r.Value) {
		return math.Inf(1)
	}
	return math.Abs(r.Value)
}

// fmtCounts writes a number of counts the unit reported with one decimal and
// an ASCII minus, never "-0.0": "-67.9", "0.3".
func fmtCounts(v float64) string {
	s := strconv.FormatFloat(v, 'f', 1, 64)
	if s == "-0.0" {
		s = "0.0"
	}
	return s
}

// label is a result name as a line of text shows it: "gain_error" is "gain error".
func label(name string) string { return strings.ReplaceAll(name, "_", " ") }

// fmtRatio writes a ratio in % with three decimals from 0.01 % up, else in ppm
// with one: "+0.958 %", "-11.4 ppm".
func fmtRatio(v float64) string {
	scale, unit := ratioUnit(math.Abs(v))
	dec := 1
	if unit == "%" {
		dec = 3
	}
	return fmt.Sprintf("%+.*f %s", dec, v*scale, unit)
}

// ratioUnit is how a ratio of magnitude mag reads: in % from 0.01 % up, else in
// ppm; the factor to multiply by and the unit.
func ratioUnit(mag float64) (float64, string) {
	if mag >= 1e-4 {
		return 1e2, "%"
	}
	return 1e6, "ppm"
}

// spreadUnit is how a spread of magnitude mag (the larger of |mean| and σ) of
// a result of dimension dim reads: volts and amperes with the SI prefix that
// suits it, counts the unit reported as they are, a plain number as it is, a
// ratio as ratioUnit says; the factor to multiply by and the unit.
func spreadUnit(dim units.Dim, mag float64) (float64, string) {
	switch dim {
	case units.Number:
		return 1, ""
	case units.Count:
		return 1, "counts"
	case units.Ratio:
		return ratioUnit(mag)
	}
	unit := "V"
	if dim == units.Ampere {
		unit = "A"
	}
	switch {
	case mag >= 1:
		return 1, unit
	case mag >= 1e-3:
		return 1e3, "m" + unit
	case mag >= 1e-6:
		return 1e6, "µ" + unit
	}
	return 1e9, "n" + unit
}

// printSummary prints yield and the spread of the results as found and as
// left, a line per result and channel: "pre_gain_error ch 2".
func printSummary(w io.Writer, s sequencer.Summary) {
	fmt.Fprintf(w, "\n%d unit(s): %d passed, %d failed, %d held for review, %d station fault/aborted", s.Units, s.Passed, s.Failed, s.Review, s.Faulted)
	if !math.IsNaN(s.Yield) {
		fmt.Fprintf(w, "; yield %.1f %%", 100*s.Yield)
	}
	fmt.Fprintln(w)
	fmt.Fprintln(w, "  as found over every measured unit, as left over the units that passed:")
	type line struct {
		name, unit string
		mean, sd   float64
		n          int
	}
	var lines []line
	unitWidth := 4 // "ppm", "mV", "µV": the columns line up as they always have
	for _, sp := range s.Spreads {
		if sp.N == 0 {
			continue
		}
		scale, unit := spreadUnit(sp.Dim, math.Max(math.Abs(sp.Mean), sp.SD))
		name := sp.Result
		if sp.Channel != "" {
			name += " ch " + sp.Channel
		}
		lines = append(lines, line{name, unit, sp.Mean * scale, sp.SD * scale, sp.N})
		unitWidth = max(unitWidth, utf8.RuneCountInString(unit))
	}
	for _, l := range lines {
		fmt.Fprintf(w, "  %-24s mean %+10.4f %-*s  σ %9.4f %-*s  (n = %d)\n", l.name, l.mean, unitWidth, l.unit, l.sd, unitWidth, l.unit, l.n)
	}
}
