package main

import (
	"context"
	"encoding/json"
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
	console := zerolog.ConsoleWriter{Out: e.stderr, TimeFormat: "15:04:05", NoColor: true}
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
			writeJSONLine(e.stdout, rec, cert)
		} else {
			fmt.Fprintln(e.stdout, liveLine(i+1, len(b.serials), rec, cert))
		}
		return nil
	})
	if len(t.Skipped) > 0 {
		log.Warn().Strs("serials", t.Skipped).Msg("batch stopped: these units were not run")
		fmt.Fprintf(e.stderr, "stopped: %d unit(s) not run: %s\n", len(t.Skipped), strings.Join(t.Skipped, " "))
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
	show := func(name, unit string, scale float64, digits int) string {
		v, ok := rec.Result(name)
		if !ok {
			return "—"
		}
		if unit == "V" {
			return units.Format(v, "V", digits)
		}
		return fmt.Sprintf("%+.*f %s", digits, v*scale, unit)
	}
	line := fmt.Sprintf("%s  offset %9s → %9s   gain %8s → %7s",
		head, show(sequencer.ResPreOffset, "V", 0, 3), show(sequencer.ResPostOffset, "V", 0, 2),
		show(sequencer.ResPreGainError, "%", 100, 3), show(sequencer.ResPostGainError, "ppm", 1e6, 1))
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

// unitJSON is the --json form of one unit.
type unitJSON struct {
	Serial      string             `json:"serial"`
	RunID       string             `json:"run_id"`
	Verdict     string             `json:"verdict"`
	Certificate string             `json:"certificate,omitempty"`
	Reasons     []string           `json:"reasons,omitempty"`
	Fault       string             `json:"fault,omitempty"`
	Results     map[string]float64 `json:"results"`
	Codes       map[string]int     `json:"codes,omitempty"`
	Started     time.Time          `json:"started"`
	Finished    time.Time          `json:"finished"`
}

func writeJSONLine(w io.Writer, rec *sequencer.Record, cert string) {
	u := unitJSON{Serial: rec.Serial, RunID: rec.RunID, Verdict: string(rec.Verdict), Certificate: cert,
		Reasons: rec.Reasons, Fault: rec.Fault, Results: map[string]float64{}, Started: rec.Started, Finished: rec.Finished}
	for _, r := range rec.Results {
		if r.Valid {
			u.Results[r.Name] = r.Value
		}
	}
	if len(rec.Trims) > 0 {
		u.Codes = map[string]int{}
		for _, t := range rec.Trims {
			u.Codes[t.DAC] = t.Code
		}
	}
	json.NewEncoder(w).Encode(u)
}

// summaryRows say how printSummary shows each spread the batch summarises.
var summaryRows = map[string]struct {
	label, unit string
	scale       float64
}{
	sequencer.ResPreOffset:        {"pre-trim offset", "mV", 1e3},
	sequencer.ResPreGainError:     {"pre-trim gain error", "%", 1e2},
	sequencer.ResPostOffset:       {"post-trim offset", "µV", 1e6},
	sequencer.ResPostGainError:    {"post-trim gain error", "ppm", 1e6},
	sequencer.ResPostNonlinearity: {"post-trim nonlinearity", "% FS", 1e2},
}

// printSummary prints yield and the spread of the pre- and post-trim results.
func printSummary(w io.Writer, s sequencer.Summary) {
	fmt.Fprintf(w, "\n%d unit(s): %d passed, %d failed, %d held for review, %d station fault/aborted", s.Units, s.Passed, s.Failed, s.Review, s.Faulted)
	if !math.IsNaN(s.Yield) {
		fmt.Fprintf(w, "; yield %.1f %%", 100*s.Yield)
	}
	fmt.Fprintln(w)
	fmt.Fprintln(w, "  pre-trim over every measured unit, post-trim over the units that passed:")
	for _, sp := range s.Spreads {
		r, ok := summaryRows[sp.Result]
		if sp.N == 0 || !ok {
			continue
		}
		fmt.Fprintf(w, "  %-24s mean %+10.4f %-4s  σ %9.4f %-4s  (n = %d)\n", r.label, sp.Mean*r.scale, r.unit, sp.SD*r.scale, r.unit, sp.N)
	}
}
