// Package console is the operator's station screen: a small web application
// that the trimline process serves on the station PC (`trimline console`). It
// signs operators in, runs one scanned unit at a time through the shift (the
// same engine, ledger, certificates and signatures as `trimline run`), shows
// the engine's progress events live (server-sent events), the verdict in an
// operator's words, locks the station on a fault until someone clears it with
// a note, and lets a reviewer decide on units held for REVIEW.
//
// The web layer only wires: what the operator reads (sequencer's plain words),
// who may do what (the station file's people), how a decision is recorded
// (issuing) live in their own packages.
package console

import (
	"context"
	"errors"
	"fmt"
	"io"
	"net"
	"net/http"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"time"

	"trimline/cmd/trimline/internal/shift"
	"trimline/instruments"
	_ "trimline/instruments/generic" // the served bench is reached over tcp://
	"trimline/instruments/sim/serve"
	"trimline/sequencer"
)

// Options configure a console.
type Options struct {
	StationPath, SequencePath string
	Out                       string // output folder; "" = the station file's
	// Listen is the address the console is served on; it decides the security
	// rules (New does not listen). "" or a loopback address: sign-in by name or
	// badge. Any other address: every sign-in needs the person's passphrase and
	// sessions expire when idle.
	Listen string
	// Bench "tcp" serves the station's sim:// instruments on loopback TCP in
	// this process, on real time, and runs the station through them; "" runs
	// the station file as it is (sim:// on the simulated clock).
	Bench   string
	Ambient string // entered ambient temperature, e.g. "23.1 °C"; "" = not recorded
	// Lot is the production lot in force when the shift starts ("" = none;
	// sequencer.CheckLot): every unit records the lot in force, which the
	// operator changes on the station screen.
	Lot string
	// Engineering runs files that were never released; certificates are marked
	// and numbered apart.
	Engineering bool
	Log         io.Writer // the log's warnings; nil = the log file only
	// SessionTTL is how long a sign-in lasts; 0 = 12 h.
	SessionTTL time.Duration
	// Software is recorded in every run ("trimline v…"); "" = "trimline".
	Software string
	// TLS: the console is served over HTTPS (its session cookie is then
	// marked Secure). The command requires it beyond loopback.
	TLS bool
}

// DefaultListen is the console's address unless told otherwise.
const DefaultListen = "127.0.0.1:8470"

// idleBeyondLoopback is how long a session beyond loopback lasts without a
// request (common practice for a shared terminal).
const idleBeyondLoopback = 30 * time.Minute

// Server is one station's console. Its handler is safe for concurrent use; the
// station runs one unit at a time.
type Server struct {
	opt      Options
	loopback bool
	shift    *shift.Shift
	bench    *serve.Server
	benchDir string // the rewired station file's folder, removed on Close

	sessions *sessions
	hub      *hub
	mux      *http.ServeMux

	// observe, when set (benchmarks), sees every progress event first.
	observe func(sequencer.Event)

	// hashing lets one passphrase check run at a time.
	hashing sync.Mutex
	// issuing is held while the shift's Issuer records: a unit's run and
	// record, or a review decision (the Issuer is not safe for concurrent use).
	issuing sync.Mutex

	mu      sync.Mutex
	st      state
	cancel  context.CancelCauseFunc // the running unit's; nil when none runs
	running chan struct{}           // closed when the running unit's goroutine ends
	closed  bool
	// clearing: a clear of the fault lock is being recorded.
	clearing bool
	// changingLot: a change of the lot is being recorded; no unit starts.
	changingLot bool
	// stopStatus ends the status refresh; statusDone is closed when it has.
	stopStatus context.CancelFunc
	statusDone chan struct{}
	// signins holds a place per sign-in waiting for its passphrase check.
	signins chan struct{}
}

// New opens the station for a shift: with Bench "tcp" it serves the simulated
// bench first; then it loads the files, opens the ledger, checks the release
// and the signing key, and opens the instruments. A bench that does not open
// is not an error: the station starts locked, saying why, and the next unit
// tries again. Errors: bad files, a ledger or key that does not open, a
// listen address beyond loopback with nobody able to sign in by passphrase.
func New(ctx context.Context, o Options) (_ *Server, err error) {
	if o.SessionTTL <= 0 {
		o.SessionTTL = 12 * time.Hour
	}
	if o.Software == "" {
		o.Software = "trimline"
	}
	s := &Server{opt: o, loopback: IsLoopback(o.Listen), hub: newHub()}
	defer func() {
		if err != nil {
			s.Close()
		}
	}()
	stationPath := o.StationPath
	switch o.Bench {
	case "":
	case "tcp":
		if stationPath, err = s.serveBench(ctx); err != nil {
			return nil, err
		}
	default:
		return nil, fmt.Errorf("bench %q: the console serves the simulated bench over tcp only", o.Bench)
	}
	cond, err := shift.ParseAmbient(o.Ambient)
	if err != nil {
		return nil, fmt.Errorf("ambient: %w", err)
	}
	if err := sequencer.CheckLot(o.Lot); err != nil {
		return nil, err
	}
	s.shift, err = shift.Open(ctx, shift.Options{StationPath: stationPath, SequencePath: o.SequencePath, Out: o.Out,
		Software: o.Software, Conditions: cond, Engineering: o.Engineering, Lot: o.Lot, Console: o.Log})
	if err != nil {
		return nil, err
	}
	if !s.loopback {
		n := 0
		for _, p := range s.shift.Station.People {
			if p.Passphrase != "" {
				n++
			}
		}
		if n == 0 {
			return nil, fmt.Errorf("%w: %s: the console listens on %s, beyond loopback, where every sign-in needs a passphrase, and the station's people list nobody with a passphrase (add a hash made by `trimline keys passphrase`)", ErrNoPassphrase, s.shift.Station.File.Name, o.Listen)
		}
	}
	s.sessions = newSessions(o.SessionTTL, s.loopback, o.TLS)
	// The simulated bench: in process (sim://), served here (--bench) or by
	// `trimline bench` (whose station file it names so); the first record
	// says it too (finish).
	simulated := o.Bench != "" || strings.Contains(s.shift.Station.Name, "(served simulator)")
	for _, in := range s.shift.Station.Instruments {
		simulated = simulated || strings.HasPrefix(in.Address, "sim://")
	}
	s.st = newState(s.shift, simulated)
	s.st.Lot = o.Lot
	s.refreshStatus(ctx)
	if _, err := s.shift.OpenEngine(ctx, "", ""); errors.Is(err, sequencer.ErrCalibrationExpired) {
		// Not a fault a note clears: the calibration status blocks every
		// start until the instrument is recalibrated (refreshStatus).
		s.shift.Log.Error().Err(err).Msg("console: an instrument's calibration has expired")
	} else if err != nil {
		ft := sequencer.ExplainFault(s.shift.FaultRecord("", "", err))
		if ft.What == "" {
			ft = sequencer.FaultText{What: "the instruments did not open", Said: err.Error(), Check: "that every instrument is powered and connected"}
		}
		s.st.lock(faultView{What: ft.What, Said: ft.Said, Check: ft.Check}, "")
		s.shift.Log.Error().Err(err).Msg("console: the instruments did not open")
	}
	s.refreshReview(ctx)
	s.mux = s.routes()
	s.signins = make(chan struct{}, maxWaitingSignins)
	sctx, stop := context.WithCancel(context.WithoutCancel(ctx))
	s.stopStatus, s.statusDone = stop, make(chan struct{})
	go s.watchStatus(sctx)
	return s, nil
}

// maxWaitingSignins bounds the sign-ins waiting for a passphrase check; more
// are refused at once (busy), so a flood of them cannot queue without end.
const maxWaitingSignins = 4

// statusEvery is how often the station status is read again while nobody
// scans: a calibration falls due at midnight, a release can be withdrawn.
const statusEvery = time.Minute

// watchStatus reads the station status every statusEvery and tells the pages.
func (s *Server) watchStatus(ctx context.Context) {
	defer close(s.statusDone)
	t := time.NewTicker(statusEvery)
	defer t.Stop()
	for {
		select {
		case <-ctx.Done():
			return
		case <-t.C:
			s.refreshStatus(ctx)
			s.publishState()
		}
	}
}

// serveBench serves the station's sim:// instruments on loopback TCP and
// writes a copy of the station file that points at them; it returns that
// file's path.
func (s *Server) serveBench(ctx context.Context) (string, error) {
	st, err := sequencer.LoadStation(s.opt.StationPath)
	if err != nil {
		return "", err
	}
	var specs []instruments.Spec
	for _, sp := range st.Specs(st.Roles()) {
		if !strings.HasPrefix(sp.Address, "sim://") {
			return "", fmt.Errorf("%s: the %s is at %s; only sim:// instruments can be served", st.File.Name, sp.Role, sp.Address)
		}
		specs = append(specs, sp)
	}
	// The bench lives as long as the console, not as the request that made it.
	s.bench, err = serve.Start(context.WithoutCancel(ctx), specs, serve.Options{Transport: "tcp"})
	if err != nil {
		return "", fmt.Errorf("serve the simulated bench: %w", err)
	}
	settings, templates := s.bench.Wiring()
	data, err := st.Rewired(s.bench.Addresses(), sequencer.Served{Settings: settings, Templates: templates})
	if err != nil {
		return "", err
	}
	s.benchDir, err = os.MkdirTemp("", "trimline-console-")
	if err != nil {
		return "", err
	}
	path := filepath.Join(s.benchDir, strings.TrimSuffix(filepath.Base(s.opt.StationPath), filepath.Ext(s.opt.StationPath))+"-tcp.yaml")
	return path, os.WriteFile(path, data, 0o644)
}

// Handler is the console's web handler.
func (s *Server) Handler() http.Handler { return s.guard(s.mux) }

// Bench is the served simulated bench (to inject faults), nil without Bench "tcp".
func (s *Server) Bench() *serve.Server { return s.bench }

// Close stops a running unit (ABORTED, source off), closes the instruments,
// the ledger and the served bench, and ends every event stream. Safe to call
// twice.
func (s *Server) Close() error {
	s.mu.Lock()
	if s.closed {
		s.mu.Unlock()
		return nil
	}
	s.closed = true
	cancel, running := s.cancel, s.running
	s.mu.Unlock()
	if cancel != nil {
		cancel(errors.New("the console was stopped"))
		<-running
	}
	if s.stopStatus != nil {
		s.stopStatus()
		<-s.statusDone
	}
	s.hub.close()
	var first error
	if s.shift != nil {
		first = s.shift.Close()
	}
	if s.bench != nil {
		if err := s.bench.Close(); err != nil && first == nil {
			first = err
		}
	}
	if s.benchDir != "" {
		os.RemoveAll(s.benchDir)
	}
	return first
}

// IsLoopback reports whether addr (host:port, or "") listens on loopback only.
func IsLoopback(addr string) bool {
	if addr == "" {
		return true
	}
	host, _, err := net.SplitHostPort(addr)
	if err != nil {
		host = addr
	}
	if host == "localhost" {
		return true
	}
	ip := net.ParseIP(host)
	return ip != nil && ip.IsLoopback()
}

// ErrNoPassphrase is what New's refusal wraps when the console would listen
// beyond loopback and nobody in the station's people has a passphrase to sign
// in with.
var ErrNoPassphrase = errors.New("nobody can sign in beyond loopback")

// errBusy and friends are the refusals of a scan that the operator reads.
var (
	errBusy    = errors.New("a unit is running: wait for its verdict or press STOP")
	errLocked  = errors.New("the station is locked by a fault: clear it first")
	errBlocked = errors.New("the station cannot start a unit")
	// errLotChanging: a change of the lot is being recorded; the next unit
	// waits for it, so that it records the lot the screen shows.
	errLotChanging = errors.New("the lot is being changed: scan again in a moment")
)
