// Package shift wires one station for a shift of production: its station and
// sequence files, the output folder and its log, the ledger, the release check,
// the certificate issuer with the station's signing key, and the engine on the
// opened bench. `trimline run` (a batch of serials) and `trimline console` (a
// shift of units scanned one by one) both run units through it, so a unit run
// from either gives the same record.
package shift

import (
	"context"
	"errors"
	"fmt"
	"io"
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

// ErrBadInput marks what the person gave that cannot be used: a station or
// sequence file with problems, a signing key that does not load. The command
// maps it to its exit code for bad input; the message is the error's own.
var ErrBadInput = errors.New("bad input")

type badInput struct{ err error }

func (b *badInput) Error() string   { return b.err.Error() }
func (b *badInput) Unwrap() []error { return []error{ErrBadInput, b.err} }

func bad(err error) error { return &badInput{err} }

// Detailed is a files.List printed with source excerpts.
type Detailed files.List

func (d Detailed) Error() string {
	var b strings.Builder
	fmt.Fprintf(&b, "%d problem(s):", len(d))
	for _, e := range d {
		b.WriteString("\n")
		b.WriteString(e.Detail())
	}
	return b.String()
}

// Load loads the station and sequence files and checks them against each other
// (caps, step timing); problems are bad input (ErrBadInput). One file's parse
// cannot be interrupted, but files.Check bounds its work to well under a
// second; a cancelled ctx stops between the files.
func Load(ctx context.Context, stationPath, sequencePath string) (*sequencer.Station, *sequencer.Sequence, error) {
	var errs files.List
	st, err := sequencer.LoadStation(stationPath)
	if err != nil {
		if fe := files.Errs(err); fe != nil {
			errs = append(errs, fe...)
		} else {
			return nil, nil, bad(err)
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
			return nil, nil, bad(err)
		}
	}
	if len(errs) > 0 {
		return nil, nil, bad(Detailed(errs))
	}
	if err := sequencer.CheckCaps(st, seq); err != nil {
		return nil, nil, bad(err)
	}
	if err := sequencer.CheckTiming(st, seq); err != nil {
		return nil, nil, bad(err)
	}
	return st, seq, nil
}

// OutFolder is where a station's runs go: out when given, else the station
// file's output.folder, else "trimline-out".
func OutFolder(st *sequencer.Station, out string) string {
	if out == "" {
		out = st.OutputFolder
	}
	if out == "" {
		out = "trimline-out"
	}
	return out
}

// ParseAmbient reads an entered ambient temperature ("23.1 °C", "23.1degC") as
// the conditions every run records; "" records none.
func ParseAmbient(s string) (sequencer.Conditions, error) {
	if s == "" {
		return sequencer.Conditions{}, nil
	}
	c, err := units.ParseAs(s, units.Celsius)
	if err != nil {
		return sequencer.Conditions{}, err
	}
	return sequencer.Conditions{AmbientC: c, AmbientSource: "entered"}, nil
}

// Options say what a Shift opens.
type Options struct {
	StationPath, SequencePath string
	Out                       string // output folder; "" = the station file's
	Operator                  string // the engine's default operator (a run may name its own)
	Software                  string // "trimline v…", recorded in every run
	Conditions                sequencer.Conditions
	Engineering               bool   // run unreleased files; certificates are marked and numbered apart
	Lot                       string // production lot recorded in every run ("" = none; sequencer.CheckLot)
	// Serials, when given, are checked against the sequence's serial pattern
	// and, unless Retest, against the ledger's earlier runs, before anything is
	// opened beyond the ledger.
	Serials []string
	Retest  bool
	// Console receives the log's warnings and errors besides the log file
	// (nil: the log file only).
	Console io.Writer
}

// Shift is one opened station. It is not safe for concurrent use: one fixture,
// one unit at a time.
type Shift struct {
	Station  *sequencer.Station
	Sequence *sequencer.Sequence
	Out      string // the output folder
	Ledger   *ledger.Ledger
	Issuer   *issuing.Issuer
	Log      zerolog.Logger
	// Engine is the opened bench; nil until OpenEngine succeeds, and after
	// CloseEngine.
	Engine *sequencer.Engine

	cfg     sequencer.Config
	logFile *os.File
}

// Open loads the files and opens the output folder, its log and its ledger,
// checks the release of the files (unless Engineering), the serials, and the
// signing key, and tidies what an interrupted run left in the certificates
// folder. It does not open the instruments: OpenEngine does. On error nothing
// stays open.
func Open(ctx context.Context, o Options) (_ *Shift, err error) {
	st, seq, err := Load(ctx, o.StationPath, o.SequencePath)
	if err != nil {
		return nil, err
	}
	// Every serial is checked before anything is opened, written or recorded.
	if err := seq.CheckSerials(o.Serials); err != nil {
		return nil, err
	}
	s := &Shift{Station: st, Sequence: seq, Out: OutFolder(st, o.Out)}
	defer func() {
		if err != nil {
			s.Close()
		}
	}()
	if err := os.MkdirAll(filepath.Join(s.Out, "certificates"), 0o755); err != nil {
		return nil, err
	}
	s.logFile, err = os.OpenFile(filepath.Join(s.Out, "trimline.log"), os.O_CREATE|os.O_APPEND|os.O_WRONLY, 0o644)
	if err != nil {
		return nil, err
	}
	console := o.Console
	if console == nil {
		console = io.Discard
	} else {
		console = zerolog.ConsoleWriter{Out: console, TimeFormat: "15:04:05", NoColor: true}
	}
	s.Log = zerolog.New(zerolog.MultiLevelWriter(levelWriter{console, zerolog.WarnLevel}, s.logFile)).With().Timestamp().Str("station", st.ID).Logger()

	led, err := ledger.Open(ctx, filepath.Join(s.Out, "ledger.db"))
	if err != nil {
		return nil, fmt.Errorf("open ledger: %w", err)
	}
	s.Ledger = led
	if st.RequireRelease && !o.Engineering {
		if err := release.Check(ctx, led, st, seq); err != nil {
			return nil, err
		}
	}
	if o.Engineering {
		// Engineering certificates come from a number series of their own.
		st.CertificatePrefix += "-ENG"
	}
	is := &issuing.Issuer{Ledger: led, Station: st, Sequence: seq, CertDir: filepath.Join(s.Out, "certificates"), Engineering: o.Engineering}
	s.Issuer = is
	// A serial tested before runs again only as a retest: refused before anything
	// is touched or recorded.
	if err := is.CheckRetests(ctx, o.Serials, o.Retest); err != nil {
		return nil, err
	}
	if st.SigningKey != "" {
		if is.Key, err = signing.Load(st.SigningKey); err != nil {
			return nil, bad(fmt.Errorf("%s signing.key: %w", st.File.Name, err))
		}
	}
	if n, err := is.RemoveStaleTemps(ctx); err != nil {
		return nil, err
	} else if n > 0 {
		s.Log.Info().Int("files", n).Msg("removed temporary files an interrupted run left in the certificates folder")
	}
	if n, err := is.Repair(ctx); err != nil {
		return nil, err
	} else if n > 0 {
		s.Log.Warn().Int("certificates", n).Msg("published certificates whose documents were missing after an interrupted run")
	}
	if _, ok := o.Conditions.Ambient(); !ok {
		// One warning, naming every role whose spec holds only in a band.
		var banded []string
		for _, r := range st.Roles() {
			if v := st.Instruments[r].Validity; v.HasBand {
				banded = append(banded, r+" "+v.BandText())
			}
		}
		if len(banded) > 0 {
			s.Log.Warn().Strs("bands", banded).Msg("no ambient temperature entered (--ambient): the certificates will say the specifications were assumed to hold")
		}
	}
	s.cfg = sequencer.Config{Station: st, Sequence: seq, Operator: o.Operator,
		Software: o.Software, Log: s.Log, Conditions: o.Conditions, Engineering: o.Engineering, Lot: o.Lot}
	return s, nil
}

// OpenEngine opens the instruments (sequencer.Open: identities, calibration
// due dates, safe state). When it fails for a reason of the bench (not of the
// files: safety caps, an unbound role, a TUR below the minimum) and serial is
// given, the unit in the fixture was not run: the attempt is recorded in the
// ledger as a FAULT run of serial under operator ("" = the Options'), or as
// ABORTED when ctx was cancelled meanwhile (a stop, not a fault of the bench),
// and that record is returned with the error (nil when nothing was recorded).
// Opening an open engine closes it first, so that the next unit re-identifies
// every instrument.
func (s *Shift) OpenEngine(ctx context.Context, serial, operator string) (*sequencer.Record, error) {
	s.CloseEngine()
	eng, err := sequencer.Open(ctx, s.cfg)
	if err == nil {
		s.Engine = eng
		return nil, nil
	}
	if serial == "" || errors.Is(err, sequencer.ErrSafety) || errors.Is(err, sequencer.ErrUnboundRole) || errors.Is(err, sequencer.ErrTUR) {
		return nil, err
	}
	rec := s.FaultRecord(serial, operator, err)
	if ctx.Err() != nil {
		rec.Verdict, rec.FaultDetail = sequencer.Aborted, nil
		rec.Fault = fmt.Sprintf("aborted while the instruments were being opened: %v", context.Cause(ctx))
	}
	if _, lerr := s.Issuer.Record(context.WithoutCancel(ctx), rec); lerr != nil {
		s.Log.Error().Err(lerr).Msg("could not record the failed start in the ledger")
		return nil, err
	}
	s.Log.Error().Str("serial", rec.Serial).Err(err).Msg("station fault before the unit started")
	return rec, err
}

// FaultRecord is the record of a unit that could not start because the
// engine did not open (err), as OpenEngine records it, under operator ("" =
// the Options').
func (s *Shift) FaultRecord(serial, operator string, err error) *sequencer.Record {
	cfg := s.cfg
	if operator != "" {
		cfg.Operator = operator
	}
	return sequencer.FaultRecord(cfg, serial, time.Now(), err)
}

// Lot is the production lot the shift's runs record ("" = none): Options.Lot
// until SetLot changes it.
func (s *Shift) Lot() string { return s.cfg.Lot }

// SetLot changes the production lot that the shift's runs record from now on:
// RunUnit's (unless its options name their own) and the FAULT record of a unit
// whose start fails in OpenEngine. lot follows sequencer.CheckLot and is not
// "": a lot in force is replaced by the next one, never removed (a run of an
// engine opened with a lot cannot record none). Not safe concurrently with
// RunUnit or OpenEngine.
func (s *Shift) SetLot(lot string) error {
	if lot == "" {
		return errors.New("no lot id given")
	}
	if err := sequencer.CheckLot(lot); err != nil {
		return err
	}
	s.cfg.Lot = lot
	return nil
}

// RunUnit runs serial on the open engine with o's operator, lot (else the
// shift's: SetLot) and progress hook, then records the run (and publishes its
// certificate). It returns the record and the certificate number ("" for a
// run that gets none). The record is stored even when ctx is cancelled: an
// aborted run is recorded as ABORTED. Errors: no engine is open, or the ledger
// or the certificate failed.
func (s *Shift) RunUnit(ctx context.Context, serial string, o sequencer.RunOptions) (*sequencer.Record, string, error) {
	if s.Engine == nil {
		return nil, "", errors.New("the instruments are not open")
	}
	if o.Lot == "" {
		o.Lot = s.cfg.Lot
	}
	rec := s.Engine.RunWith(ctx, serial, o)
	cert, err := s.Issuer.Record(context.WithoutCancel(ctx), rec)
	if err != nil {
		return rec, cert, fmt.Errorf("%s: %w", rec.Serial, err)
	}
	s.Log.Info().Str("serial", rec.Serial).Str("verdict", string(rec.Verdict)).Str("certificate", cert).Msg("unit done")
	return rec, cert, nil
}

// CloseEngine closes the instruments (source off, switch released, chambers
// to the safe temperature). Safe to call when none are open.
func (s *Shift) CloseEngine() error {
	if s.Engine == nil {
		return nil
	}
	err := s.Engine.Close()
	s.Engine = nil
	return err
}

// Close closes the engine, the ledger and the log. Safe to call twice.
func (s *Shift) Close() error {
	first := s.CloseEngine()
	if s.Ledger != nil {
		if err := s.Ledger.Close(); err != nil && first == nil {
			first = err
		}
		s.Ledger = nil
	}
	if s.logFile != nil {
		if err := s.logFile.Close(); err != nil && first == nil {
			first = err
		}
		s.logFile = nil
	}
	return first
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
