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
	"trimline/reports/ledger"
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
	json                      bool   // one JSON object per unit on stdout instead of live lines
	stdout, stderr            io.Writer
}

// tally is what a batch did, for the summary and the exit code.
type tally struct {
	records []*sequencer.Record
	certs   []string
	skipped []string // serials not run because the batch was stopped
}

// loadFiles loads the station and sequence files; problems are bad input.
func loadFiles(stationPath, sequencePath string) (*sequencer.Station, *sequencer.Sequence, error) {
	var errs files.List
	st, err := sequencer.LoadStation(stationPath)
	if err != nil {
		if fe := files.Errs(err); fe != nil {
			errs = append(errs, fe...)
		} else {
			return nil, nil, badInput(err)
		}
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

// runBatch runs every serial and writes records, certificates and logs.
func runBatch(ctx context.Context, b batch) (*tally, error) {
	st, seq, err := loadFiles(b.stationPath, b.sequencePath)
	if err != nil {
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
		return nil, stationErr(err)
	}
	logFile, err := os.OpenFile(filepath.Join(out, "trimline.log"), os.O_CREATE|os.O_APPEND|os.O_WRONLY, 0o644)
	if err != nil {
		return nil, stationErr(err)
	}
	defer logFile.Close()
	console := zerolog.ConsoleWriter{Out: b.stderr, TimeFormat: "15:04:05", NoColor: true}
	log := zerolog.New(zerolog.MultiLevelWriter(levelWriter{console, zerolog.WarnLevel}, logFile)).With().Timestamp().Str("station", st.ID).Logger()

	led, err := ledger.Open(ctx, filepath.Join(out, "ledger.db"))
	if err != nil {
		return nil, stationErr(fmt.Errorf("open ledger: %w", err))
	}
	defer led.Close()
	if st.RequireRelease && !b.engineering {
		if err := checkReleased(ctx, led, st, seq); err != nil {
			return nil, err
		}
	}
	if b.engineering {
		// Engineering certificates come from a number series of their own.
		st.CertificatePrefix += "-ENG"
	}
	is := &issuer{led: led, st: st, seq: seq, certDir: filepath.Join(out, "certificates")}
	if st.SigningKey != "" {
		if is.key, err = signing.Load(st.SigningKey); err != nil {
			return nil, badInput(fmt.Errorf("%s signing.key: %w", st.File.Name, err))
		}
	}
	if n, err := is.repair(ctx); err != nil {
		return nil, stationErr(err)
	} else if n > 0 {
		log.Warn().Int("certificates", n).Msg("published certificates whose documents were missing after an interrupted run")
	}

	var cond sequencer.Conditions
	if b.ambient != "" {
		c, err := units.ParseAs(b.ambient, units.Celsius)
		if err != nil {
			return nil, usageErr("--ambient: %v", err)
		}
		cond = sequencer.Conditions{AmbientC: c, AmbientSource: "entered"}
	}
	cfg := sequencer.Config{Station: st, Sequence: seq, Operator: b.operator,
		Software: "trimline " + version(), Log: log, Conditions: cond, Engineering: b.engineering}
	eng, err := sequencer.Open(ctx, cfg)
	if err != nil {
		if errors.Is(err, sequencer.ErrSafety) || errors.Is(err, sequencer.ErrTUR) {
			return nil, badInput(err)
		}
		// The unit in the fixture was not run: record the attempt and why.
		rec := sequencer.FaultRecord(cfg, b.serials[0], time.Now(), err)
		if _, lerr := is.record(context.WithoutCancel(ctx), rec); lerr != nil {
			log.Error().Err(lerr).Msg("could not record the failed start in the ledger")
		}
		log.Error().Str("serial", rec.Serial).Err(err).Msg("station fault before the unit started")
		return nil, stationErr(err)
	}
	defer eng.Close()
	log.Info().Str("sequence", seq.File.Name).Str("limits", seq.Limits.File).Int("units", len(b.serials)).Msg("batch start")

	t := &tally{}
	for i, sn := range b.serials {
		if ctx.Err() != nil {
			// Stopped between units: the rest were never run, and the batch is not a pass.
			t.skipped = b.serials[i:]
			log.Warn().Strs("serials", t.skipped).Msg("batch stopped: these units were not run")
			fmt.Fprintf(b.stderr, "stopped: %d unit(s) not run: %s\n", len(t.skipped), strings.Join(t.skipped, " "))
			break
		}
		rec := eng.Run(ctx, sn)
		cert, err := is.record(context.WithoutCancel(ctx), rec)
		if err != nil {
			return t, stationErr(fmt.Errorf("%s: %w", sn, err))
		}
		t.records = append(t.records, rec)
		t.certs = append(t.certs, cert)
		log.Info().Str("serial", sn).Str("verdict", string(rec.Verdict)).Str("certificate", cert).Msg("unit done")
		if b.json {
			writeJSONLine(b.stdout, rec, cert)
		} else {
			fmt.Fprintln(b.stdout, liveLine(i+1, len(b.serials), rec, cert))
		}
	}
	return t, nil
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

func result(rec *sequencer.Record, name string) (float64, bool) {
	for _, r := range rec.Results {
		if r.Name == name {
			return r.Value, r.Valid
		}
	}
	return math.NaN(), false
}

func liveLine(i, n int, rec *sequencer.Record, cert string) string {
	w := len(fmt.Sprint(n))
	head := fmt.Sprintf("%*d/%d  %-12s %-7s", w, i, n, rec.Serial, rec.Verdict)
	if rec.Verdict == sequencer.Fault || rec.Verdict == sequencer.Aborted {
		return head + "  " + rec.Fault
	}
	show := func(name, unit string, scale float64, digits int) string {
		v, ok := result(rec, name)
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

// code returns the batch's exit code: a station fault beats a failed unit.
func (t *tally) code() int {
	if len(t.skipped) > 0 {
		return exitStation
	}
	code := exitPass
	for _, r := range t.records {
		switch r.Verdict {
		case sequencer.Fault, sequencer.Aborted:
			return exitStation
		case sequencer.Fail, sequencer.Review:
			code = exitFail // a unit held for review does not ship either
		}
	}
	return code
}

// summary prints yield and the spread of the pre- and post-trim results.
func (t *tally) summary(w io.Writer) {
	n := len(t.records)
	var pass, fail, review, fault int
	for _, r := range t.records {
		switch r.Verdict {
		case sequencer.Pass:
			pass++
		case sequencer.Fail:
			fail++
		case sequencer.Review:
			review++
		default:
			fault++
		}
	}
	fmt.Fprintf(w, "\n%d unit(s): %d passed, %d failed, %d held for review, %d station fault/aborted", n, pass, fail, review, fault)
	if judged := pass + fail + review; judged > 0 {
		fmt.Fprintf(w, "; yield %.1f %%", 100*float64(pass)/float64(judged))
	}
	fmt.Fprintln(w)
	stat := func(name string, passedOnly bool) (mean, sd float64, k int) {
		var xs []float64
		for _, r := range t.records {
			if passedOnly && r.Verdict != sequencer.Pass {
				continue
			}
			if v, ok := result(r, name); ok {
				xs = append(xs, v)
			}
		}
		return meanSD(xs)
	}
	// Pre-trim spread over every measured unit (the process); post-trim residuals
	// over the units that passed (what ships).
	rows := []struct {
		label, name, unit string
		scale             float64
		passedOnly        bool
	}{
		{"pre-trim offset", sequencer.ResPreOffset, "mV", 1e3, false},
		{"pre-trim gain error", sequencer.ResPreGainError, "%", 1e2, false},
		{"post-trim offset", sequencer.ResPostOffset, "µV", 1e6, true},
		{"post-trim gain error", sequencer.ResPostGainError, "ppm", 1e6, true},
		{"post-trim nonlinearity", sequencer.ResPostNonlinearity, "% FS", 1e2, true},
	}
	fmt.Fprintln(w, "  pre-trim over every measured unit, post-trim over the units that passed:")
	for _, r := range rows {
		m, s, k := stat(r.name, r.passedOnly)
		if k == 0 {
			continue
		}
		fmt.Fprintf(w, "  %-24s mean %+10.4f %-4s  σ %9.4f %-4s  (n = %d)\n", r.label, m*r.scale, r.unit, s*r.scale, r.unit, k)
	}
}

func meanSD(xs []float64) (mean, sd float64, n int) {
	n = len(xs)
	if n == 0 {
		return 0, 0, 0
	}
	for _, x := range xs {
		mean += x
	}
	mean /= float64(n)
	if n > 1 {
		for _, x := range xs {
			sd += (x - mean) * (x - mean)
		}
		sd = math.Sqrt(sd / float64(n-1))
	}
	return mean, sd, n
}
