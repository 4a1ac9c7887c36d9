package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"
	"time"

	"github.com/rs/zerolog"

	"trimline/instruments/files"
	"trimline/instruments/units"
	"trimline/reports/issuing"
	"trimline/reports/ledger"
	"trimline/reports/release"
	"trimline/reports/signing"
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
	retest                    bool   // serials with an earlier measured run may run again (and supersede its certificate)
	json                      bool   // one JSON object per unit on stdout instead of live lines
}

// loadFiles loads the station and sequence files; problems are bad input. One
// file's parse cannot be interrupted, but files.Check bounds its work to well
// under a second; a cancelled ctx (Ctrl-C, SIGTERM) stops between the files.
func loadFiles(ctx context.Context, stationPath, sequencePath string) (*sequencer.Station, *sequencer.Sequence, error) {
	var errs files.List
	st, err := sequencer.LoadStation(stationPath)
	if err != nil {
		if fe := files.Errs(err); fe != nil {
			errs = append(errs, fe...)
		} else {
			return nil, nil, badInput(err)
		}
	}
	if err := ctx.Err(); err != nil {
		return nil, nil, err
	}
	seq, err := sequencer.LoadSequence(sequencePath)
	if err != nil {
		if fe := files.Errs(err); fe != nil {
			errs = append(errs, fe...)
		} else {
			return nil, nil, badInput(err)
		}
	}
	if len(errs) > 0 {
		return nil, nil, badInput(detailed(errs))
	}
	if err := sequencer.CheckCaps(st, seq); err != nil {
		return nil, nil, badInput(err)
	}
	if err := sequencer.CheckTiming(st, seq); err != nil {
		return nil, nil, badInput(err)
	}
	return st, seq, nil
}

// detailed is a files.List printed with source excerpts.
type detailed files.List

func (d detailed) Error() string {
	var b strings.Builder
	fmt.Fprintf(&b, "%d problem(s):", len(d))
	for _, e := range d {
		b.WriteString("\n")
		b.WriteString(e.Detail())
	}
	return b.String()
}

// runBatch wires a batch together: the files, the output folder, the log, the
// ledger, the release check, the issuer and the engine; then it runs every serial
// and prints a line (or a JSON object) per unit.
func runBatch(ctx context.Context, e *env, b batch) (*sequencer.Tally, error) {
	st, seq, err := loadFiles(ctx, b.stationPath, b.sequencePath)
	if err != nil {
		return nil, err
	}
	// Every serial is checked before anything is opened, written or recorded.
	if err := seq.CheckSerials(b.serials); err != nil {
		return nil, err
	}
	out := b.out
	if out == "" {
		out = st.OutputFolder
	}
	if out == "" {
		out = "trimline-out"
	}
	if err := os.MkdirAll(filepath.Join(out, "certificates"), 0o755); err != nil {
		return nil, err
	}
	logFile, err := os.OpenFile(filepath.Join(out, "trimline.log"), os.O_CREATE|os.O_APPEND|os.O_WRONLY, 0o644)
	if err != nil {
		return nil, err
	}
	defer logFile.Close()
	// With --json, stderr holds nothing but an error object; the log's
	// warnings are in the log file, and a stopped batch's skipped serials in the
	// summary.
	var console io.Writer = zerolog.ConsoleWriter{Out: e.stderr, TimeFormat: "15:04:05", NoColor: true}
	if b.json {
		console = io.Discard
	}
	log := zerolog.New(zerolog.MultiLevelWriter(levelWriter{console, zerolog.WarnLevel}, logFile)).With().Timestamp().Str("station", st.ID).Logger()

	led, err := ledger.Open(ctx, filepath.Join(out, "ledger.db"))
	if err != nil {
		return nil, fmt.Errorf("open ledger: %w", err)
	}
	defer led.Close()
	if st.RequireRelease && !b.engineering {
		if err := release.Check(ctx, led, st, seq); err != nil {
			return nil, err
		}
	}
	if b.engineering {
		// Engineering certificates come from a number series of their own.
		st.CertificatePrefix += "-ENG"
	}
	is := &issuing.Issuer{Ledger: led, Station: st, Sequence: seq, CertDir: filepath.Join(out, "certificates"), Engineering: b.engineering}
	// A serial tested before runs again only as a retest: refused before anything
	// is touched or recorded.
	if err := is.CheckRetests(ctx, b.serials, b.retest); err != nil {
		return nil, err
	}
	if st.SigningKey != "" {
		if is.Key, err = signing.Load(st.SigningKey); err != nil {
			return nil, badInput(fmt.Errorf("%s signing.key: %w", st.File.Name, err))
		}
	}
	if n, err := is.RemoveStaleTemps(ctx); err != nil {
		return nil, err
	} else if n > 0 {
		log.Info().Int("files", n).Msg("removed temporary files an interrupted run left in the certificates folder")
	}
	if n, err := is.Repair(ctx); err != nil {
		return nil, err
	} else if n > 0 {
		log.Warn().Int("certificates", n).Msg("published certificates whose documents were missing after an interrupted run")
	}

	var cond sequencer.Conditions
	if b.ambient != "" {
		c, err := units.ParseAs(b.ambient, units.Celsius)
		if err != nil {
			return nil, usagef("--ambient: %v", err)
		}
		cond = sequencer.Conditions{AmbientC: c, AmbientSource: "entered"}
	}
	cfg := sequencer.Config{Station: st, Sequence: seq, Operator: b.operator,
		Software: "trimline " + version(), Log: log, Conditions: cond, Engineering: b.engineering}
	eng, err := sequencer.Open(ctx, cfg)
	if err != nil {
		if !errors.Is(err, sequencer.ErrSafety) && !errors.Is(err, sequencer.ErrUnboundRole) && !errors.Is(err, sequencer.ErrTUR) {
			// The unit in the fixture was not run: record the attempt and why.
			rec := sequencer.FaultRecord(cfg, b.serials[0], time.Now(), err)
			if _, lerr := is.Record(context.WithoutCancel(ctx), rec); lerr != nil {
				log.Error().Err(lerr).Msg("could not record the failed start in the ledger")
			}
			log.Error().Str("serial", rec.Serial).Err(err).Msg("station fault before the unit started")
		}
		return nil, err
	}
	defer eng.Close()
	log.Info().Str("sequence", seq.File.Name).Str("limits", seq.Limits.File).Int("units", len(b.serials)).Msg("batch start")

	t, err := eng.RunBatch(ctx, b.serials, func(i int, rec *sequencer.Record) error {
		cert, err := is.Record(context.WithoutCancel(ctx), rec)
		if err != nil {
			return fmt.Errorf("%s: %w", rec.Serial, err)
		}
		log.Info().Str("serial", rec.Serial).Str("verdict", string(rec.Verdict)).Str("certificate", cert).Msg("unit done")
		if b.json {
			writeJSON(e.stdout, newUnitOut(rec, cert, is.CertDir))
		} else {
			fmt.Fprintln(e.stdout, liveLine(i+1, len(b.serials), rec, cert))
		}
		return nil
	})
	if len(t.Skipped) > 0 {
		log.Warn().Strs("serials", t.Skipped).Msg("batch stopped: these units were not run")
		if !b.json {
			fmt.Fprintf(e.stderr, "stopped: %d unit(s) not run: %s\n", len(t.Skipped), strings.Join(t.Skipped, " "))
		}
	}
	return t, err
}

// levelWriter passes only events at or above min to w.
type levelWriter struct {
	w   io.Writer
	min zerolog.Level
}

func (l levelWriter) Write(p []byte) (int, error) { return l.w.Write(p) }
func (l levelWriter) WriteLevel(lv zerolog.Level, p []byte) (int, error) {
	if lv < l.min {
		return len(p), nil
	}
	return l.w.Write(p)
}

func liveLine(i, n int, rec *sequencer.Record, cert string) string {
	w := len(fmt.Sprint(n))
	head := fmt.Sprintf("%*d/%d  %-12s %-7s", w, i, n, rec.Serial, rec.Verdict)
	if rec.Verdict == sequencer.Fault || rec.Verdict == sequencer.Aborted {
		return head + "  " + rec.Fault
	}
	var pairs []string
	for _, dim := range []string{"V", "ratio", "number"} {
		if pair := livePair(rec, dim); pair != "" {
			pairs = append(pairs, pair)
		}
	}
	line := head + "  " + strings.Join(pairs, "   ")
	if cert != "" {
		line += "   " + cert
	}
	if (rec.Verdict == sequencer.Fail || rec.Verdict == sequencer.Review) && len(rec.Reasons) > 0 {
		line += "\n" + strings.Repeat(" ", 2*w+3) + "↳ " + rec.Reasons[0]
		if len(rec.Reasons) > 1 {
			line += fmt.Sprintf(" (+%d more)", len(rec.Reasons)-1)
		}
	}
	return line
}

// livePair shows, for one dimension ("V", "ratio" or "number"), the first
// quantity the unit measured both as found and as left, before → after:
// "offset -448 µV → -12 µV". Only results of the same quantity pair (what they
// measure, Result.QuantityOf: offset with offset, never gain error with
// nonlinearity); "" when no quantity of the dimension has both. Voltages have
// three significant digits as found and two as left, where they sit near the
// noise.
func livePair(rec *sequencer.Record, dim string) string {
	var found, left *sequencer.Result
	for i, r := range rec.Results {
		q := r.QuantityOf()
		if r.Unit != dim || q == "" || r.StageOf() != sequencer.AsFound {
			continue
		}
		for j, l := range rec.Results {
			if l.Unit == dim && l.QuantityOf() == q && l.StageOf() == sequencer.AsLeft {
				found, left = &rec.Results[i], &rec.Results[j]
				break
			}
		}
		if found != nil {
			break
		}
	}
	if found == nil {
		return ""
	}
	show := func(r *sequencer.Result, digits, width int) string {
		v := "—"
		switch {
		case !r.Valid:
		case dim == "V":
			v = units.Format(r.Value, "V", digits)
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
	}
	return fmt.Sprintf("%s %s → %s", label(found.QuantityOf()), show(found, 3, widths[0]), show(left, 2, widths[1]))
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
// a result of dimension dim reads: volts with the SI prefix that suits it, a
// plain number as it is, a ratio as ratioUnit says; the factor to multiply by
// and the unit.
func spreadUnit(dim units.Dim, mag float64) (float64, string) {
	switch dim {
	case units.Number:
		return 1, ""
	case units.Ratio:
		return ratioUnit(mag)
	}
	switch {
	case mag >= 1:
		return 1, "V"
	case mag >= 1e-3:
		return 1e3, "mV"
	case mag >= 1e-6:
		return 1e6, "µV"
	}
	return 1e9, "nV"
}

// printSummary prints yield and the spread of the results as found and as left.
func printSummary(w io.Writer, s sequencer.Summary) {
	fmt.Fprintf(w, "\n%d unit(s): %d passed, %d failed, %d held for review, %d station fault/aborted", s.Units, s.Passed, s.Failed, s.Review, s.Faulted)
	if !math.IsNaN(s.Yield) {
		fmt.Fprintf(w, "; yield %.1f %%", 100*s.Yield)
	}
	fmt.Fprintln(w)
	fmt.Fprintln(w, "  as found over every measured unit, as left over the units that passed:")
	for _, sp := range s.Spreads {
		if sp.N == 0 {
			continue
		}
		scale, unit := spreadUnit(sp.Dim, math.Max(math.Abs(sp.Mean), sp.SD))
		fmt.Fprintf(w, "  %-24s mean %+10.4f %-4s  σ %9.4f %-4s  (n = %d)\n", sp.Result, sp.Mean*scale, unit, sp.SD*scale, unit, sp.N)
	}
}
