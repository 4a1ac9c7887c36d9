// Package instruments is the driver contract of trimline: the small interfaces that
// every source, meter and DUT trim-port driver implements, and the registry that
// finds a driver by the scheme of an instrument address (sim://meter,
// serial:///dev/ttyUSB0?baud=115200, tcp://host:5025, usbtmc:///dev/usbtmc0).
//
// The engine (package sequencer) imports only this package. Concrete drivers live in
// subpackages and register themselves from an init function, like database/sql drivers.
//
// Units: every level is in SI base units (volts, amperes, seconds) as float64.
package instruments

import (
	"context"
	"errors"
	"fmt"
	"math"
	"net/url"
	"sort"
	"strings"
	"sync"
	"time"
)

// Instrument is what every opened instrument can do. Close must be safe to call more
// than once; the second call returns nil.
type Instrument interface {
	Close() error
}

// Source is a programmable DC voltage source that drives the DUT input.
// SetLevel programs the output level in volts; it does not switch the output on.
// SetOutput switches the output terminals on or off. Implementations must accept
// SetOutput(ctx, false) at any time, also after an earlier error, because the engine
// calls it on every exit path. SetCompliance sets the current limit in amperes
// (finite, > 0) and refuses a limit the source cannot enforce: every source must be
// able to limit its current, because the engine programs the station's cap
// (safety.max_source_current) before the output is ever switched on and an unenforced cap is a
// safety hazard.
type Source interface {
	Instrument
	SetLevel(ctx context.Context, volts float64) error
	SetOutput(ctx context.Context, on bool) error
	SetCompliance(ctx context.Context, amps float64) error
}

// CurrentSource is an optional capability of a Source that can drive a DC
// current instead of a voltage (a loop calibrator, an SMU in current mode). A
// station binds such a source as kind current_source (KindCurrentSource).
//
// SetCurrent programs the output current in amperes and puts the source in
// current mode; like SetLevel it does not switch the output on. SetVoltageLimit
// sets the compliance voltage in volts (finite, > 0): the largest |voltage| the
// source may put across the load to drive its current, and refuses a limit the
// source cannot enforce. Safety duty, the same as a voltage source's: the engine
// programs the station's voltage cap (safety.max_source_voltage) as the
// compliance voltage before the output is ever switched on, checks every current
// against the current cap (safety.max_source_current) before SetCurrent, and on
// every exit path switches the output off (SetOutput(ctx, false), which must
// work at any time) and programs 0 A. The engine never calls SetLevel or
// SetCompliance on a source it drives as a current source. Fallback when absent:
// a current_source role bound to a source without it is refused at open, before
// any output is switched on.
type CurrentSource interface {
	SetCurrent(ctx context.Context, amps float64) error
	SetVoltageLimit(ctx context.Context, volts float64) error
}

// Meter is a DC voltmeter that reads the DUT output. Read takes n readings in a row
// and returns them in order; each carries its own time and flag.
type Meter interface {
	Instrument
	Read(ctx context.Context, n int) ([]Reading, error)
}

// TrimPort is the DUT's line-based command port. Command sends one line and waits
// for the DUT's acknowledgement; Query sends one line and returns the reply line
// without its terminator. The command text comes from templates in the sequence
// file, so the engine knows nothing about a product's protocol.
type TrimPort interface {
	Instrument
	Command(ctx context.Context, line string) error
	Query(ctx context.Context, line string) (string, error)
}

// Switch routes the stimulus to one channel of a multi-channel unit and that
// channel's response back to the station (a relay multiplexer). Route closes the
// path of the named channel and opens every other; Release opens every path.
// Implementations must accept Release at any time, also after an earlier error,
// because the engine calls it on every exit path.
type Switch interface {
	Instrument
	Route(ctx context.Context, channel string) error
	Release(ctx context.Context) error
}

// Thermal is a temperature chamber or hot plate that holds the unit at a set
// point. SetTemperature programs the set point in °C; Temperature reads the
// chamber's own (controlled) temperature in °C. Implementations must accept
// SetTemperature to the station's safe temperature at any time, also after an
// earlier error, because the engine returns the chamber there on every exit
// path.
type Thermal interface {
	Instrument
	SetTemperature(ctx context.Context, celsius float64) error
	Temperature(ctx context.Context) (float64, error)
}

// StableReporter is an optional capability of a Thermal that judges its own
// stability (a chamber's "stable" flag). Fallback when absent: the engine judges
// stability from the temperatures it reads (within a band for a dwell time).
type StableReporter interface {
	Stable(ctx context.Context) (bool, error)
}

// Function is what a meter measures: FuncVoltage (readings in volts, the default)
// or FuncCurrent (readings in amperes).
type Function string

const (
	FuncVoltage Function = "voltage" // DC voltage, readings in V
	FuncCurrent Function = "current" // DC current, readings in A
)

// FunctionSetter is an optional capability of a Meter that measures more than DC
// voltage: SetFunction selects what later Reads measure, and Configure's range is
// then in that function's unit (amperes for FuncCurrent). Fallback when absent:
// the meter measures DC voltage only, and a sequence that reads a current through
// it is refused before the output is switched on.
type FunctionSetter interface {
	SetFunction(ctx context.Context, f Function) error
}

// Flag qualifies a reading. Only FlagNone readings are numbers that may be used.
type Flag int

const (
	FlagNone     Flag = iota // a valid number
	FlagOverload             // the meter reported overload (SCPI +/-9.9E37)
	FlagNaN                  // the meter reported not-a-number (SCPI 9.91E37)
)

func (f Flag) String() string {
	switch f {
	case FlagNone:
		return "ok"
	case FlagOverload:
		return "overload"
	case FlagNaN:
		return "nan"
	}
	return fmt.Sprintf("flag(%d)", int(f))
}

// Reading is one meter reading, in volts (or amperes when the meter measures
// current, or the number a unit reports about itself).
type Reading struct {
	Value float64   // SI units; meaningless unless Flag == FlagNone
	Flag  Flag      // FlagNone for a valid number
	Time  time.Time // when the reading was taken (the driver's clock)
}

// Valid reports whether the reading is a finite, unflagged number.
func (r Reading) Valid() bool {
	return r.Flag == FlagNone && !math.IsNaN(r.Value) && !math.IsInf(r.Value, 0)
}

// Querier is an optional capability: send one line and return the reply line. The
// engine reads a fixture interlock through it. TrimPort has it by contract; SCPI
// source and meter drivers have it too. Fallback when absent: an interlock cannot be
// read through that instrument and the station refuses to run.
type Querier interface {
	Query(ctx context.Context, line string) (string, error)
}

// Identity is the parsed reply of an identification query (IEEE 488.2 *IDN?):
// maker, model, serial and firmware, "0" where the instrument does not say.
type Identity struct {
	Maker    string `json:"maker"`
	Model    string `json:"model"`
	Serial   string `json:"serial"`
	Firmware string `json:"firmware"`
}

func (id Identity) String() string {
	return strings.Join([]string{id.Maker, id.Model, id.Serial, id.Firmware}, ",")
}

// SimulatedMaker is the maker field of the *IDN? reply of every simulated
// instrument (the sim:// drivers, and the simulator served over TCP or a serial
// line by trimline bench): "Trimline Sim,DMM-6.5,…". The name is reserved for
// simulators; no real instrument may report it.
const SimulatedMaker = "Trimline Sim"

// SimulatedScheme is the address scheme of the simulated bench (sim://meter).
const SimulatedScheme = "sim"

// Simulated reports whether the instrument at address, which identified itself
// as id, is a simulation rather than a measuring instrument: its address is of
// the sim scheme, or its *IDN? maker is SimulatedMaker (the simulator reached
// through a real transport). This is the one test of simulation: a record
// measured through any such instrument claims no traceability.
func Simulated(address string, id Identity) bool {
	scheme, _, ok := strings.Cut(strings.TrimSpace(address), "://")
	if ok && strings.EqualFold(scheme, SimulatedScheme) {
		return true
	}
	return strings.EqualFold(strings.TrimSpace(id.Maker), SimulatedMaker)
}

// Identifier is an optional capability: an instrument that can say what it is.
// Fallback when absent: the engine records the identity as unknown.
type Identifier interface {
	Identify(ctx context.Context) (Identity, error)
}

// Resetter is an optional capability: put the instrument in its documented safe,
// known state (*RST). Fallback when absent: no reset; for a Source the engine still
// switches the output off.
type Resetter interface {
	Reset(ctx context.Context) error
}

// ErrorQueue is an optional capability: an instrument that queues the errors it
// meets, as a SCPI instrument does, and can be asked for them. CheckErrors reads
// the queue until it is empty; it returns nil when the queue held nothing, an error
// naming the first entry (and how many more) when it held any, or the error of the
// exchange. Reading the queue empties it. The engine calls it for every instrument
// after each sweep point's readings and again before any verdict, and takes any
// entry as a station fault. Fallback when absent: the instrument is taken to report
// every error in the reply of the call that met it, as the simulator does.
type ErrorQueue interface {
	CheckErrors(ctx context.Context) error
}

// OutputWatchdog is an optional capability of a Source that can switch its own
// output off: once armed, the source switches the output off and programs 0 V by
// itself unless it is armed again within its time (set where the source is
// configured, e.g. the station file), so a station program that dies with the
// output on (kill -9, a crash, a pulled cable) leaves the unit driven for at most
// that time. ArmWatchdog arms it or, when armed, restarts its time; DisarmWatchdog
// stops it. The engine arms it at the start of every step of a run and disarms it
// once the output is off at the end of the run. Fallback when absent: the output
// stays as last programmed until the program switches it off; after a hard kill,
// until the next start (the engine's Open) puts the source in its safe state.
type OutputWatchdog interface {
	ArmWatchdog(ctx context.Context) error
	DisarmWatchdog(ctx context.Context) error
}

// MeterConfigurer is an optional capability of a Meter: set range (in the unit of
// what the meter measures: volts, or amperes after FunctionSetter's FuncCurrent;
// 0 = auto) and integration time in power-line cycles. Fallback when absent: the
// meter's own configuration is used and recorded as unknown.
type MeterConfigurer interface {
	Configure(ctx context.Context, rng, nplc float64) error
}

// FixtureLoader is an optional capability of a TrimPort used by simulated benches:
// the engine tells it which serial number the operator placed in the fixture.
// Fallback when absent: nothing happens (a real fixture holds a real unit).
type FixtureLoader interface {
	LoadUnit(ctx context.Context, serial string) error
}

// The kinds of instrument a Spec opens (Spec.Kind), spelled as station files
// write them after kind:.
const (
	KindSource = "voltage_source" // a Source
	// KindCurrentSource is a Source driven in current mode: it also implements
	// CurrentSource.
	KindCurrentSource = "current_source"
	KindMeter         = "meter"    // a Meter
	KindPort          = "dut_port" // a TrimPort
	KindSwitch        = "switch"   // a Switch
	KindThermal       = "thermal"  // a Thermal
)

// Spec says how to open one instrument: its role on the station, what kind of
// instrument the role binds, its address and driver settings from the station file.
type Spec struct {
	Role string // the station's name for it: "source", "meter", "dut" or any other
	// Kind is KindSource, KindCurrentSource, KindMeter, KindPort or KindSwitch. Empty means the kind of the
	// same name as Role (source, meter, dut): callers that predate kinds.
	Kind     string
	Address  string            // e.g. "sim://meter", "tcp://192.0.2.7:5025", "serial:///dev/ttyUSB0?baud=9600"
	Settings map[string]string // driver-specific settings, values still as written
	// Templates overrides a driver's command templates by name (e.g. "set_level":
	// "SOUR:VOLT {volts}"), so a new instrument model needs no Go code. For the DUT
	// the sequence file supplies the protocol; see the generic drivers for names.
	Templates map[string]string
	// Timeout bounds each command/reply exchange; 0 means the driver's default.
	Timeout time.Duration
	// Dir is the folder of the file the spec was read from (the station file's), where
	// a driver resolves a relative path in a setting that names a file; "" means the
	// working directory.
	Dir string
}

// Driver opens instruments of one address scheme.
type Driver interface {
	Open(ctx context.Context, addr *url.URL, spec Spec) (Instrument, error)
}

// GroupDriver is an optional capability of a Driver whose instruments are wired to
// each other (the simulated bench: the source drives the DUT the meter reads).
// OpenGroup receives every spec of its scheme at once and returns one instrument per
// spec, in the same order. Fallback when absent: Open is called per spec.
type GroupDriver interface {
	OpenGroup(ctx context.Context, specs []Spec) ([]Instrument, error)
}

// SettingsChecker is an optional capability of a Driver: validate settings before any
// instrument is opened, so that a bad station file is rejected at load. It returns a
// *SettingError naming the offending key.
type SettingsChecker interface {
	CheckSettings(spec Spec) error
}

// SettingError names a driver setting that is wrong.
type SettingError struct {
	Key string
	Msg string
}

func (e *SettingError) Error() string { return fmt.Sprintf("setting %q: %s", e.Key, e.Msg) }

var (
	mu      sync.RWMutex
	drivers = map[string]Driver{}
)

// Register makes a driver available for addresses with the given scheme. It panics
// if drv is nil or the scheme is already registered. Safe for concurrent use.
func Register(scheme string, drv Driver) {
	mu.Lock()
	defer mu.Unlock()
	if drv == nil {
		panic("instruments: Register driver is nil")
	}
	if _, dup := drivers[scheme]; dup {
		panic("instruments: Register called twice for scheme " + scheme)
	}
	drivers[scheme] = drv
}

// Schemes returns the registered schemes, sorted.
func Schemes() []string {
	mu.RLock()
	defer mu.RUnlock()
	out := make([]string, 0, len(drivers))
	for s := range drivers {
		out = append(out, s)
	}
	sort.Strings(out)
	return out
}

// ErrUnknownScheme is returned (wrapped) for an address whose scheme has no driver.
var ErrUnknownScheme = errors.New("unknown address scheme")

// Lookup parses addr and returns its driver.
func Lookup(addr string) (Driver, *url.URL, error) {
	u, err := url.Parse(addr)
	if err != nil {
		return nil, nil, fmt.Errorf("address %q: %w", addr, err)
	}
	if u.Scheme == "" {
		return nil, nil, fmt.Errorf("address %q has no scheme (known: %s): %w", addr, strings.Join(Schemes(), ", "), ErrUnknownScheme)
	}
	mu.RLock()
	drv := drivers[u.Scheme]
	mu.RUnlock()
	if drv == nil {
		return nil, nil, fmt.Errorf("address %q: scheme %q has no driver (known: %s): %w", addr, u.Scheme, strings.Join(Schemes(), ", "), ErrUnknownScheme)
	}
	return drv, u, nil
}

// Check validates specs without opening anything: every address has a registered
// scheme and every driver that can check its settings accepts them.
func Check(specs []Spec) error {
	for _, s := range specs {
		drv, _, err := Lookup(s.Address)
		if err != nil {
			return fmt.Errorf("%s: %w", s.Role, err)
		}
		if c, ok := drv.(SettingsChecker); ok {
			if err := c.CheckSettings(s); err != nil {
				return fmt.Errorf("%s: %w", s.Role, err)
			}
		}
	}
	return nil
}

// OpenError is the error of OpenAll for an instrument that would not open: its
// role, its address and the driver's error.
type OpenError struct {
	Role, Address string
	Err           error
}

func (e *OpenError) Error() string { return fmt.Sprintf("open %s at %s: %v", e.Role, e.Address, e.Err) }
func (e *OpenError) Unwrap() error { return e.Err }

// OpenAll opens every spec and returns the instruments keyed by role. An
// instrument opened on its own that fails is an *OpenError. Specs of a
// GroupDriver's scheme are opened together. On error every instrument already opened
// is closed again.
func OpenAll(ctx context.Context, specs []Spec) (map[string]Instrument, error) {
	out := map[string]Instrument{}
	closeAll := func() {
		for _, in := range out {
			in.Close()
		}
	}
	groups := map[string][]Spec{}
	var order []string
	for _, s := range specs {
		drv, u, err := Lookup(s.Address)
		if err != nil {
			closeAll()
			return nil, fmt.Errorf("%s: %w", s.Role, err)
		}
		if _, ok := drv.(GroupDriver); ok {
			if _, seen := groups[u.Scheme]; !seen {
				order = append(order, u.Scheme)
			}
			groups[u.Scheme] = append(groups[u.Scheme], s)
			continue
		}
		in, err := drv.Open(ctx, u, s)
		if err != nil {
			closeAll()
			return nil, &OpenError{Role: s.Role, Address: s.Address, Err: err}
		}
		out[s.Role] = in
	}
	for _, scheme := range order {
		mu.RLock()
		gd := drivers[scheme].(GroupDriver)
		mu.RUnlock()
		ins, err := gd.OpenGroup(ctx, groups[scheme])
		if err != nil {
			closeAll()
			return nil, fmt.Errorf("open %s instruments: %w", scheme, err)
		}
		for i, s := range groups[scheme] {
			out[s.Role] = ins[i]
		}
	}
	return out, nil
}

// Clock is the time base of a run: the engine waits for settling and stamps records
// with it. RealClock is the wall clock.
type Clock interface {
	Now() time.Time
	// Sleep waits d or until ctx is done, whichever comes first, and returns
	// ctx.Err() in the second case.
	Sleep(ctx context.Context, d time.Duration) error
}

// ClockSource is an optional capability of an instrument that runs on its own time
// base, such as the simulated bench, whose physics advance on simulated time so that a
// thousand units run in seconds. Fallback when absent: the engine uses RealClock.
type ClockSource interface {
	Clock() Clock
}

// RealClock is the wall clock.
type RealClock struct{}

// Now returns time.Now().
func (RealClock) Now() time.Time { return time.Now() }

// Sleep waits d or until ctx is done.
func (RealClock) Sleep(ctx context.Context, d time.Duration) error {
	if d <= 0 {
		return ctx.Err()
	}
	t := time.NewTimer(d)
	defer t.Stop()
	select {
	case <-t.C:
		return nil
	case <-ctx.Done():
		return ctx.Err()
	}
}
