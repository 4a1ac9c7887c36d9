// Package serve puts a simulated bench (package sim) on a real wire: the source, the
// meter and the switch answer as SCPI instruments and the DUT fixture as its line
// trim port,
// each on an endpoint of its own, over loopback TCP, pseudo-terminals that stand in
// for serial ports, or (Linux) pseudo-terminals in canonical mode that stand in for
// the USBTMC class driver's character device (one response per read). Tests and
// demos point the generic drivers (package generic) at the addresses it returns.
//
// The served bench runs on real time (sim setting time: real): settling, command
// latency and meter apertures really elapse.
//
// # SCPI instruments
//
// Headers match in short or long form, case-insensitively, with optional nodes
// optional; ';' separates commands on one line, replies to several queries are
// joined by ';'. An unknown header pushes -113,"Undefined header" and gets no reply
// (as a real instrument does, so a client waiting for one times out); a value
// outside the instrument's limits pushes -222,"Data out of range", a missing one
// -109,"Missing parameter", a surplus one -108,"Parameter not allowed", a word
// where a number belongs -104,"Data type error", a bad ON/OFF -224,"Illegal
// parameter value". The queue holds 10 entries; on overflow the last becomes
// -350,"Queue overflow". Numbers are sent as NR3 with 10 significant digits.
//
// Both: *IDN?, *RST, *CLS, *OPC?, *OPC, *WAI, SYSTem:ERRor[:NEXT]?.
//
// Source (sim.Source): [SOURce:]VOLTage:RANGe <V> and ?, (0 < V ≤ the sim range,
// 100 mV by default; the level must stay within it);
// [SOURce:]VOLTage[:LEVel][:IMMediate][:AMPLitude] <V> and ?;
// [SOURce:]CURRent:PROTection[:LEVel] <A> and ? (0 < A ≤ 100 mA);
// [SOURce:]FUNCtion[:MODE] VOLTage|CURRent and ? (VOLT or CURR: what the output
// drives; CURR puts the sim source in current mode at the programmed current);
// [SOURce:]CURRent[:LEVel][:IMMediate][:AMPLitude] <A> and ? (|A| ≤ the sim
// current range, 25 mA by default; it drives the output only in CURR);
// [SOURce:]VOLTage:PROTection[:LEVel] <V> and ? (the compliance voltage of
// current mode, 0 < V ≤ 30 V);
// OUTPut[:STATe] ON|OFF|1|0 and ? (1 or 0);
// OUTPut:WATChdog[:TIMe] <s>|0|OFF and ? (the output watchdog, sim.Source.ArmWatchdog:
// a time arms it or restarts it, 0 < s ≤ 3600; 0 or OFF disarms it; the query
// answers the armed time, 0 when disarmed). When the watchdog runs out with the
// output on, the source switches it off, programs 0 V and queues
// +301,"Output watchdog ran out: output off, 0 V". *RST: output off, FUNC VOLT,
// 0 V and 0 A, 10 mA and 10 V, full range, watchdog disarmed.
//
// Meter (sim.Meter): CONFigure[:VOLTage][:DC] [<range V>|AUTO|DEF] (selects DC
// voltage; no value, AUTO or DEF: autorange, which is the 10 V range);
// CONFigure:CURRent[:DC] [<range A>|AUTO|DEF] (selects DC current; autorange is the
// 100 mA range); [SENSe:]VOLTage[:DC]:NPLCycles and [SENSe:]CURRent[:DC]:NPLCycles
// <n> and ? (0.001..100, one integration time for both); [SENSe:]ZERO:AUTO
// ON|OFF|ONCE|1|0 and ?; SAMPle:COUNt <n> and ? (1..1000); READ? (n comma-separated
// readings in the selected function; an overload is ±9.9E37). *RST: DC voltage, the
// meter's power-on ranges and NPLC, count 1, autozero on.
//
// Switch (sim.Switch): ROUTe:CLOSe (@<channel>) routes one channel (a channel the
// card does not have pushes -222); ROUTe:CLOSe? answers (@<channel>), or (@) when
// released; ROUTe:OPEN:ALL releases every path. *RST releases.
//
// Chamber (sim.Chamber): TEMPerature:SETPoint <°C> and ? (a set point outside the
// chamber's min..max pushes -222); TEMPerature? reads its temperature;
// TEMPerature:STABle? answers 1 or 0. *RST sets the set point to ambient.
//
// # DUT
//
// The trim port protocol of package sim, one reply line per line, plus one line of
// the fixture's own: "FIXTURE LOAD <serial>" places a unit (DUT.LoadUnit) and answers
// OK or "ERR …", so that a station file can have the generic trim-port driver load
// units (its load_unit template). Server.LoadUnit does the same from Go.
//
// # Faults
//
// Options.Faults (or Server.SetFault at run time) injects faults per role; see Fault.
// Counts run from Start or from the last SetFault for that role, except DropAfter,
// which counts the commands of each link, and Options.LidOpenAfter, which counts
// from Start.
//
// # Concurrency
//
// A Server's methods are safe for concurrent use. Each endpoint serves any number of
// links at a time; their commands go to the one bench, whose mutex serialises them.
package serve

import (
	"context"
	"errors"
	"fmt"
	"maps"
	"net/url"
	"strconv"
	"strings"
	"sync"
	"time"

	"trimline/instruments"
	"trimline/instruments/sim"
)

// Templates are the generic drivers' templates, per simulated model (what a
// sim:// address names: source, meter, dut), that reach what the served bench
// offers beyond the standard commands: the fixture's load_unit places a unit (as
// Server.LoadUnit does from Go), and the source's output watchdog switches the
// output off when the station stops talking. Server.Wiring gives them per role.
var Templates = map[string]map[string]string{
	"dut":     {"load_unit": "FIXTURE LOAD {serial}"},
	"source":  {"arm_watchdog": "OUTP:WATC {seconds}", "disarm_watchdog": "OUTP:WATC OFF"},
	"chamber": {"stable": "TEMP:STAB?"},
}

// Settings are the generic drivers' settings, per simulated model, that go with
// Templates: the source's watchdog time, longer than any step of the demo sequence.
var Settings = map[string]map[string]string{
	"source": {"watchdog": "5 s"},
}

// Options configure a Server. The zero value serves over loopback TCP.
type Options struct {
	// Transport is "tcp" (loopback 127.0.0.1, an ephemeral port per instrument; the
	// default), "serial" (a pseudo-terminal per instrument; Linux and macOS) or
	// "usbtmc" (a pseudo-terminal in canonical mode per instrument, read by the
	// usbtmc:// transport as if it were the USBTMC character device; Linux).
	Transport string
	// Baud is written into serial addresses; 0 means 115200. A pseudo-terminal
	// ignores it.
	Baud int
	// Faults are injected per role ("source", "meter", "dut").
	Faults map[string]Fault
	// LidOpenAfter opens the fixture lid (LID? answers OPEN) once the DUT endpoint has
	// received this many commands since Start; 0 leaves the lid as the dut's lid setting says
	// (closed by default).
	LidOpenAfter int
}

// Fault is what one endpoint does wrong. The zero value is a healthy instrument.
// "Commands" are lines received; counts are described in the package doc.
type Fault struct {
	// Delay holds every reply back this long before sending it.
	Delay time.Duration
	// NoReply makes the endpoint silent once it has received NoReplyAfter commands:
	// later commands are read and dropped, neither carried out nor answered.
	NoReply      bool
	NoReplyAfter int
	// DropAfter > 0 closes a link when command DropAfter+1 arrives on it, before that
	// command is carried out (the command is lost). A TCP endpoint keeps listening,
	// so a client can reconnect; a pseudo-terminal is gone for good, like an
	// unplugged adapter.
	DropAfter int
	// Garble corrupts reply number GarbleAt (1-based; 0 means the first): every other
	// byte becomes 0xFF. Truncate cuts that reply to its first half instead (the
	// terminator is still sent).
	Garble   bool
	Truncate bool
	GarbleAt int
	// ErrorAfter pushes ErrorEntry onto the error queue after the first command that
	// starts with this prefix (the ErrorAt-th, with ErrorAt > 1) has been carried
	// out. The DUT has no queue: that matching command is not carried out and
	// answers "ERR injected fault".
	ErrorAfter string
	ErrorAt    int
	// ErrorEntry is the entry ErrorAfter pushes, code,"text"; "" means
	// -300,"Device-specific error".
	ErrorEntry string
	// Overload makes every meter reading +9.9E37.
	Overload bool
	// ReadbackMismatch makes the DUT answer its register reads (TRIM OFS? and TRIM
	// GAIN? on the demo card) with the register's code plus one, wrapping at the
	// DAC's width (modulo 4096 on the demo card).
	ReadbackMismatch bool
}

// Server serves one simulated bench.
type Server struct {
	bench     *sim.Bench
	opt       Options
	ctx       context.Context
	cancel    context.CancelFunc
	endpoints map[string]*endpoint // by role
	addrs     map[string]string
	models    map[string]string // by role: source, meter or dut
	wg        sync.WaitGroup
	closeOnce sync.Once
	stopCtx   func() bool
}

// Start builds one sim.Bench from specs (sim://source, sim://meter, sim://dut,
// sim://switch and sim://chamber addresses with their settings; at most one of each but meters; each
// spec's Role names its endpoint) with time: real, and serves every instrument. A spec asking for time:
// simulated is an error, as is an unknown transport or a serial/usbtmc transport on
// a system without pseudo-terminals. When ctx is done the server closes; ctx
// cancellation does not interrupt Start itself, which does not block.
func Start(ctx context.Context, specs []instruments.Spec, opt Options) (*Server, error) {
	if len(specs) == 0 {
		return nil, errors.New("serve: no instruments to serve")
	}
	switch opt.Transport {
	case "", "tcp", "serial", "usbtmc":
	default:
		return nil, fmt.Errorf("serve: transport %q: expected tcp, serial or usbtmc", opt.Transport)
	}
	if opt.Baud <= 0 {
		opt.Baud = 115200
	}
	roles := map[string]bool{}
	local := make([]instruments.Spec, len(specs))
	for i, s := range specs {
		if s.Role == "" || roles[s.Role] {
			return nil, fmt.Errorf("serve: spec %d (%s): empty or repeated role %q", i, s.Address, s.Role)
		}
		roles[s.Role] = true
		set := maps.Clone(s.Settings)
		if set == nil {
			set = map[string]string{}
		}
		if t, ok := set["time"]; ok && strings.TrimSpace(strings.ToLower(t)) != "real" {
			return nil, &instruments.SettingError{Key: "time", Msg: fmt.Sprintf("%q: a served bench runs on real time", t)}
		}
		set["time"] = "real"
		s.Settings = set
		local[i] = s
	}
	for f := range opt.Faults {
		if !roles[f] {
			return nil, fmt.Errorf("serve: fault for role %q, which no spec has", f)
		}
	}
	b, err := sim.NewBench(local)
	if err != nil {
		return nil, fmt.Errorf("serve: %w", err)
	}
	sctx, cancel := context.WithCancel(context.WithoutCancel(ctx))
	s := &Server{bench: b, opt: opt, ctx: sctx, cancel: cancel, endpoints: map[string]*endpoint{}, addrs: map[string]string{}, models: map[string]string{}}
	for i, sp := range local {
		u, _ := url.Parse(sp.Address)
		var h handler
		model := strings.ToLower(u.Hostname())
		s.models[sp.Role] = model
		switch model {
		case "source":
			h = newSourceHandler(b.Source())
		case "meter":
			h = newMeterHandler(b.Instrument(i).(*sim.Meter))
		case "dut":
			h = &dutHandler{dut: b.DUT(), lidOpenAfter: opt.LidOpenAfter}
		case "switch":
			h = newSwitchHandler(b.Switch())
		case "chamber":
			h = newChamberHandler(b.Chamber())
		}
		ep := &endpoint{srv: s, role: sp.Role, h: h, fault: opt.Faults[sp.Role]}
		s.endpoints[sp.Role] = ep
		addr, err := s.listen(ep)
		if err != nil {
			s.Close()
			return nil, fmt.Errorf("serve: %s: %w", sp.Role, err)
		}
		s.addrs[sp.Role] = addr
	}
	s.stopCtx = context.AfterFunc(ctx, func() { s.Close() })
	return s, nil
}

// listen opens ep's endpoint on the configured transport and returns its address.
func (s *Server) listen(ep *endpoint) (string, error) {
	switch s.opt.Transport {
	case "serial":
		return s.listenPTY(ep, false)
	case "usbtmc":
		return s.listenPTY(ep, true)
	}
	return s.listenTCP(ep)
}

// Addresses returns the address of each role's endpoint, ready for a station file:
// "tcp://127.0.0.1:40123", "serial:///dev/pts/5?baud=115200", "usbtmc:///dev/pts/6".
func (s *Server) Addresses() map[string]string { return maps.Clone(s.addrs) }

// Wiring returns Settings and Templates keyed by the roles this server serves,
// each role getting those of the model its address names, so a station whose
// roles have names of its own (input, dmm, card) is rewired as the demo's is.
func (s *Server) Wiring() (settings, templates map[string]map[string]string) {
	settings, templates = map[string]map[string]string{}, map[string]map[string]string{}
	for role, model := range s.models {
		if m, ok := Settings[model]; ok {
			settings[role] = maps.Clone(m)
		}
		if m, ok := Templates[model]; ok {
			templates[role] = maps.Clone(m)
		}
	}
	return settings, templates
}

// Bench returns the served bench, for tests that look at its state.
func (s *Server) Bench() *sim.Bench { return s.bench }

// LoadUnit places unit serial in the DUT fixture (sim.DUT.LoadUnit).
func (s *Server) LoadUnit(ctx context.Context, serial string) error {
	if s.bench.DUT() == nil {
		return errors.New("serve: the bench has no dut")
	}
	return s.bench.DUT().LoadUnit(ctx, serial)
}

// SetFault replaces the fault of role's endpoint and restarts its counts.
func (s *Server) SetFault(role string, f Fault) error {
	ep := s.endpoints[role]
	if ep == nil {
		return fmt.Errorf("serve: no endpoint for role %q", role)
	}
	ep.mu.Lock()
	defer ep.mu.Unlock()
	ep.fault, ep.cmds, ep.replies, ep.errorMatches, ep.errorFired = f, 0, 0, 0, false
	return nil
}

// Received returns the lines role's endpoint has received since Start (at most the
// last 65536), in order, without terminators.
func (s *Server) Received(role string) []string {
	ep := s.endpoints[role]
	if ep == nil {
		return nil
	}
	ep.mu.Lock()
	defer ep.mu.Unlock()
	return append([]string(nil), ep.log...)
}

// Count returns how many lines of role's endpoint started with prefix (among those
// Received returns).
func (s *Server) Count(role, prefix string) int {
	n := 0
	for _, l := range s.Received(role) {
		if strings.HasPrefix(l, prefix) {
			n++
		}
	}
	return n
}

// Close stops every endpoint, closes every link and the bench, and waits for the
// server's goroutines. A second call returns nil.
func (s *Server) Close() error {
	s.closeOnce.Do(func() {
		if s.stopCtx != nil {
			s.stopCtx()
		}
		s.cancel()
		for _, ep := range s.endpoints {
			ep.shutdown()
		}
		s.wg.Wait()
		s.bench.Close()
	})
	return nil
}

// formatNumber writes v as NR3 with 10 significant digits: +2.503100000E+00.
func formatNumber(v float64) string {
	s := strconv.FormatFloat(v, 'E', 9, 64)
	if !strings.HasPrefix(s, "-") {
		s = "+" + s
	}
	return s
}
