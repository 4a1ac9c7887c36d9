// Package generic is trimline's template-driven driver for real instruments. It
// registers the address schemes serial, tcp and usbtmc (package transport) and opens,
// by the spec's kind, a DC source, a DC multimeter (voltage and current), a DUT trim
// port or a switch (relay multiplexer) whose command text comes from templates, so that a new instrument model needs a station file
// entry, not Go code.
//
// # Templates
//
// Each role has default templates (the standard SCPI tree); spec.Templates replaces
// any of them by name, and an unknown name or placeholder is a
// *instruments.SettingError with Key "templates.<name>". Placeholders are replaced by
// numbers formatted with strconv 'g' and 10 significant digits; {range} is "AUTO"
// for autorange.
//
//	source                                     meter
//	identify        *IDN?                      identify    *IDN?
//	reset           *RST                       reset       *RST
//	clear           *CLS                       clear       *CLS
//	sync            *OPC?                      sync        *OPC?
//	error_query     SYST:ERR?                  error_query SYST:ERR?
//	set_range       SOUR:VOLT:RANG {volts}     configure   CONF:VOLT:DC {range}
//	set_level       SOUR:VOLT {volts}          set_nplc    VOLT:DC:NPLC {nplc}
//	get_level       SOUR:VOLT?                 autozero    ZERO:AUTO ON
//	set_compliance  SOUR:CURR:PROT {amps}      set_count   SAMP:COUN {n}
//	output_on       OUTP ON                    read        READ?
//	output_off      OUTP OFF                   function_voltage  CONF:VOLT:DC
//	get_output      OUTP?                      function_current  CONF:CURR:DC
//	arm_watchdog    (none)                     configure_current CONF:CURR:DC {range}
//	disarm_watchdog (none)                     set_nplc_current  CURR:DC:NPLC {nplc}
//	current_mode    SOUR:FUNC CURR
//	set_current     SOUR:CURR {amps}
//	get_current     SOUR:CURR?
//	set_voltage_limit SOUR:VOLT:PROT {volts}
//
// A source opened as kind current_source (a *CurrentSource) also implements
// instruments.CurrentSource: SetCurrent sends current_mode once after open or
// Reset (the function a *RST leaves is voltage), then set_current, drains the
// error queue and reads the current back with get_current (within 1e-9 relative
// or 1 pA, else ErrReadback); SetVoltageLimit sends set_voltage_limit, the
// compliance voltage. A source opened as a voltage_source never sends them.
//
//	switch
//	identify, reset, clear, sync, error_query  as the meter's
//	route           ROUT:CLOS (@{channel})
//	release         ROUT:OPEN:ALL
//
//	thermal (a chamber or hot plate, kind thermal)
//	identify, reset, clear, sync, error_query  as the meter's
//	set_temperature TEMP:SETP {celsius}
//	temperature     TEMP?
//	stable          (none)
//
// The thermal (instruments.Thermal, a *Thermal) sends set_temperature with
// {celsius}, the set point in °C, then drains the error queue (SetTemperature is
// tried also after ctx is done, like a switch-off), and reads temperature as a
// number in °C. With stable set (e.g. "TEMP:STAB?", answered 1/0, ON/OFF or
// TRUE/FALSE) it is a *StableThermal, also an instruments.StableReporter.
//
// The meter implements instruments.FunctionSetter: SetFunction sends
// function_voltage or function_current, after which Configure's range is in that
// function's unit and a current meter is configured with configure_current and
// set_nplc_current. function_current may be "" for a meter without a current
// function; SetFunction(FuncCurrent) is then an error. The switch
// (instruments.Switch) sends route with {channel} (the channel's name as the station
// writes it) and release, each followed by a drain of the error queue; Release is
// tried also after ctx is done.
//
// clear, sync, set_range, autozero and function_current may be set to "" to leave
// that step out. A
// source whose output can switch itself off when not kept alive gets
// arm_watchdog, e.g. "OUTP:WATC {seconds}" ({seconds}: the watchdog setting), and
// optionally disarm_watchdog, e.g. "OUTP:WATC OFF"; the source then also implements
// instruments.OutputWatchdog (a *WatchdogSource), and the engine re-arms it at
// every step of a run and disarms it once the output is off. The
// DUT needs no templates (its protocol comes from the sequence file); its only one is
// load_unit (no default), e.g. "FIXTURE LOAD {serial}": when set, the port also
// implements instruments.FixtureLoader by sending it as a command.
//
// # Settings
//
//	read_term, write_term  line terminators, escapes allowed ("\n", "\r\n"); "\n"
//	timeout                per exchange (e.g. "500ms", "2 s"), at most 1 min; default 2 s, or spec.Timeout
//	retries                extra tries of an idempotent query after a timeout or a
//	                       dropped link (0..10); default 2
//	reset                  source, meter, switch and thermal: true|false, clear and reset at open; true
//	range                  source: volts programmed with set_range at open and after Reset
//	watchdog               source: the output watchdog's time (e.g. "5 s", at most 1 h),
//	                       required with arm_watchdog and only with it; choose it
//	                       longer than the longest step of a run (a sweep point:
//	                       settle + readings × aperture)
//	line_frequency         meter: 10 to 1000 Hz, only to size the read timeout; 50 Hz
//
// # Behaviour
//
// Every configuration command of a source or meter is followed by a drain of the
// error queue (error_query until 0); an entry fails the call with the instrument's
// own *scpi.InstrumentError. A query (a reading, a read-back) does not read the
// queue; CheckErrors (instruments.ErrorQueue) does, for a source or a meter. SetLevel reads the level back (get_level) and fails with
// an error wrapping ErrReadback unless it agrees within 1e-9 relative or 1 nV;
// SetOutput reads the output state back likewise. Commands are never repeated;
// idempotent queries are retried (package scpi). SetOutput(ctx, false) always tries,
// also after earlier errors, on a broken link (it reconnects) and after ctx is done
// (it runs on a fresh context bounded by three exchange timeouts).
//
// # Concurrency
//
// An instrument may be used from several goroutines; its exchanges are serialised.
package generic

import (
	"context"
	"errors"
	"fmt"
	"math"
	"net/url"
	"regexp"
	"sort"
	"strconv"
	"strings"
	"time"

	"trimline/instruments"
	"trimline/instruments/scpi"
	"trimline/instruments/transport"
	"trimline/instruments/units"
)

// Driver is the generic driver, registered for the schemes serial, tcp and usbtmc.
type Driver struct{}

var (
	_ instruments.Driver          = Driver{}
	_ instruments.SettingsChecker = Driver{}
)

func init() {
	for _, s := range []string{"serial", "tcp", "usbtmc"} {
		instruments.Register(s, Driver{})
	}
}

// Querier is implemented by every instrument of this package: send one line and
// return the reply line (an idempotent query is retried, see package scpi).
type Querier interface {
	Query(ctx context.Context, line string) (string, error)
}

// ErrReadback is wrapped when an instrument reads back a different value than the
// one just programmed.
var ErrReadback = errors.New("read-back mismatch")

// Roles this driver opens.
const (
	RoleSource  = "source"
	RoleMeter   = "meter"
	RoleDUT     = "dut"
	RoleSwitch  = "switch"
	RoleThermal = "thermal"
)

var defaults = map[string]map[string]string{
	RoleSource: {
		"identify": "*IDN?", "reset": "*RST", "clear": "*CLS", "sync": "*OPC?", "error_query": "SYST:ERR?",
		"set_range": "SOUR:VOLT:RANG {volts}", "set_level": "SOUR:VOLT {volts}", "get_level": "SOUR:VOLT?",
		"set_compliance": "SOUR:CURR:PROT {amps}", "output_on": "OUTP ON", "output_off": "OUTP OFF", "get_output": "OUTP?",
		"arm_watchdog": "", "disarm_watchdog": "",
		"current_mode": "SOUR:FUNC CURR", "set_current": "SOUR:CURR {amps}", "get_current": "SOUR:CURR?",
		"set_voltage_limit": "SOUR:VOLT:PROT {volts}",
	},
	RoleMeter: {
		"identify": "*IDN?", "reset": "*RST", "clear": "*CLS", "sync": "*OPC?", "error_query": "SYST:ERR?",
		"configure": "CONF:VOLT:DC {range}", "set_nplc": "VOLT:DC:NPLC {nplc}", "autozero": "ZERO:AUTO ON",
		"set_count": "SAMP:COUN {n}", "read": "READ?",
		"function_voltage": "CONF:VOLT:DC", "function_current": "CONF:CURR:DC",
		"configure_current": "CONF:CURR:DC {range}", "set_nplc_current": "CURR:DC:NPLC {nplc}",
	},
	RoleDUT: {"load_unit": ""},
	RoleSwitch: {
		"identify": "*IDN?", "reset": "*RST", "clear": "*CLS", "sync": "*OPC?", "error_query": "SYST:ERR?",
		"route": "ROUT:CLOS (@{channel})", "release": "ROUT:OPEN:ALL",
	},
	RoleThermal: {
		"identify": "*IDN?", "reset": "*RST", "clear": "*CLS", "sync": "*OPC?", "error_query": "SYST:ERR?",
		"set_temperature": "TEMP:SETP {celsius}", "temperature": "TEMP?", "stable": "",
	},
}

// placeholders lists the placeholders each template may use (none if absent).
var placeholders = map[string][]string{
	"set_range": {"{volts}"}, "set_level": {"{volts}"}, "set_compliance": {"{amps}"},
	"set_current": {"{amps}"}, "set_voltage_limit": {"{volts}"},
	"configure": {"{range}"}, "set_nplc": {"{nplc}"}, "set_count": {"{n}"}, "load_unit": {"{serial}"},
	"arm_watchdog": {"{seconds}"}, "configure_current": {"{range}"}, "set_nplc_current": {"{nplc}"},
	"route": {"{channel}"}, "set_temperature": {"{celsius}"},
}

// optional templates may be "" to leave the step out.
var optional = map[string]bool{"clear": true, "sync": true, "set_range": true, "autozero": true, "load_unit": true,
	"arm_watchdog": true, "disarm_watchdog": true, "function_current": true, "stable": true}

// maxWatchdog bounds the watchdog setting.
const maxWatchdog = time.Hour

// DefaultTemplates returns a copy of the default templates of role ("source",
// "meter", "dut" or "switch"), nil for another role.
func DefaultTemplates(role string) map[string]string {
	d, ok := defaults[role]
	if !ok {
		return nil
	}
	out := make(map[string]string, len(d))
	for k, v := range d {
		out[k] = v
	}
	return out
}

// config is a spec's parsed settings and templates.
type config struct {
	role     string
	tpl      map[string]string
	topt     transport.Options
	retries  int
	reset    bool
	rangeV   float64       // source: 0 = not programmed
	watchdog time.Duration // source: the output watchdog's time; 0 = none
	lineFreq float64       // meter
}

func settingErr(key, format string, args ...any) error {
	return &instruments.SettingError{Key: key, Msg: fmt.Sprintf(format, args...)}
}

var settingKeys = map[string][]string{
	RoleSource:  {"read_term", "write_term", "timeout", "retries", "reset", "range", "watchdog"},
	RoleMeter:   {"read_term", "write_term", "timeout", "retries", "reset", "line_frequency"},
	RoleDUT:     {"read_term", "write_term", "timeout", "retries"},
	RoleSwitch:  {"read_term", "write_term", "timeout", "retries", "reset"},
	RoleThermal: {"read_term", "write_term", "timeout", "retries", "reset"},
}

var placeholderRE = regexp.MustCompile(`\{[^{}]*\}`)

// Bounds on the settings: a longer timeout is a hung instrument, and the line
// frequency sizes the read timeout (16.7 Hz rail to 400 Hz aircraft supplies fit).
const (
	maxTimeout  = time.Minute
	minLineFreq = 10.0   // Hz
	maxLineFreq = 1000.0 // Hz
)

// kindRole is which of this driver's instruments spec opens (RoleSource,
// RoleMeter or RoleDUT), decided by spec.Kind: a station names its roles as it
// likes. A spec without a kind (a caller that predates kinds) is taken by its
// role's name.
func kindRole(spec instruments.Spec) (string, error) {
	switch spec.Kind {
	case instruments.KindSource, instruments.KindCurrentSource:
		return RoleSource, nil
	case instruments.KindMeter:
		return RoleMeter, nil
	case instruments.KindPort:
		return RoleDUT, nil
	case instruments.KindSwitch:
		return RoleSwitch, nil
	case instruments.KindThermal:
		return RoleThermal, nil
	case "":
		if _, ok := defaults[spec.Role]; ok {
			return spec.Role, nil
		}
		return "", fmt.Errorf("role %q: the generic driver opens a source, a meter, a dut, a switch or a thermal", spec.Role)
	}
	return "", fmt.Errorf("role %q: kind %q: the generic driver opens a %s, a %s, a %s, a %s, a %s or a %s", spec.Role, spec.Kind,
		instruments.KindSource, instruments.KindCurrentSource, instruments.KindMeter, instruments.KindPort, instruments.KindSwitch,
		instruments.KindThermal)
}

// parseConfig validates spec and returns its configuration.
func parseConfig(spec instruments.Spec) (config, error) {
	role, err := kindRole(spec)
	if err != nil {
		return config{}, err
	}
	c := config{role: role, retries: 2, reset: true, lineFreq: 50}
	def := defaults[role]
	c.tpl = DefaultTemplates(role)
	names := make([]string, 0, len(spec.Templates))
	for k := range spec.Templates {
		names = append(names, k)
	}
	sort.Strings(names)
	for _, k := range names {
		v := strings.TrimSpace(spec.Templates[k])
		if _, known := def[k]; !known {
			return c, settingErr("templates."+k, "unknown template for a %s (known: %s)", role, strings.Join(sortedKeys(def), ", "))
		}
		if v == "" && !optional[k] {
			return c, settingErr("templates."+k, "must not be empty")
		}
		for _, ph := range placeholderRE.FindAllString(v, -1) {
			if !contains(placeholders[k], ph) {
				want := "none"
				if len(placeholders[k]) > 0 {
					want = strings.Join(placeholders[k], ", ")
				}
				return c, settingErr("templates."+k, "placeholder %s not known here (allowed: %s)", ph, want)
			}
		}
		if strings.ContainsAny(v, "\r\n") {
			return c, settingErr("templates."+k, "a template is one line")
		}
		c.tpl[k] = v
	}
	keys := make([]string, 0, len(spec.Settings))
	for k := range spec.Settings {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	for _, k := range keys {
		v := spec.Settings[k]
		if !contains(settingKeys[role], k) {
			return c, settingErr(k, "unknown setting for a %s on the generic driver (known: %s)", role, strings.Join(settingKeys[role], ", "))
		}
		var err error
		switch k {
		case "read_term":
			c.topt.ReadTerm, err = terminator(k, v)
		case "write_term":
			c.topt.WriteTerm, err = terminator(k, v)
		case "timeout":
			c.topt.Timeout, err = duration(k, v)
			if err == nil && spec.Timeout > 0 && spec.Timeout != c.topt.Timeout {
				err = settingErr(k, "%q conflicts with the instrument's timeout of %s", v, spec.Timeout)
			}
		case "retries":
			c.retries, err = strconv.Atoi(strings.TrimSpace(v))
			if err != nil || c.retries < 0 || c.retries > 10 {
				err = settingErr(k, "%q: expected an integer 0..10", v)
			}
		case "reset":
			c.reset, err = strconv.ParseBool(strings.TrimSpace(v))
			if err != nil {
				err = settingErr(k, "%q: expected true or false", v)
			}
		case "range":
			c.rangeV, err = units.ParseAs(v, units.Volt)
			if err != nil || !(c.rangeV > 0) || math.IsInf(c.rangeV, 0) {
				err = settingErr(k, "%q: expected a positive voltage such as 100 mV", v)
			}
		case "watchdog":
			c.watchdog, err = duration(k, v)
			if err == nil && c.watchdog > maxWatchdog {
				err = settingErr(k, "%q: at most %s", v, maxWatchdog)
			}
		case "line_frequency":
			c.lineFreq, err = units.ParseAs(v, units.Hertz)
			if err != nil || !(c.lineFreq >= minLineFreq && c.lineFreq <= maxLineFreq) {
				err = settingErr(k, "%q: expected a frequency of %g to %g Hz such as 50 Hz", v, minLineFreq, maxLineFreq)
			}
		}
		if err != nil {
			return c, err
		}
	}
	switch arm := c.tpl["arm_watchdog"] != ""; {
	case arm && c.watchdog == 0:
		return c, settingErr("templates.arm_watchdog", "needs the watchdog setting: the time the source keeps its output on unless armed again, such as 5 s")
	case !arm && c.watchdog > 0:
		return c, settingErr("watchdog", "needs templates.arm_watchdog: the command that arms the source's output watchdog")
	case !arm && c.tpl["disarm_watchdog"] != "":
		return c, settingErr("templates.disarm_watchdog", "needs templates.arm_watchdog: the command that arms the source's output watchdog")
	}
	if spec.Timeout > 0 {
		c.topt.Timeout = spec.Timeout
	}
	if c.topt.Timeout <= 0 {
		c.topt.Timeout = transport.DefaultTimeout
	}
	return c, nil
}

func terminator(key, v string) (string, error) {
	s := v
	if strings.Contains(v, `\`) {
		u, err := strconv.Unquote(`"` + strings.ReplaceAll(v, `"`, `\"`) + `"`)
		if err != nil {
			return "", settingErr(key, "%q: bad escape sequence (use \\n, \\r\\n, \\r)", v)
		}
		s = u
	}
	if s == "" {
		return "", settingErr(key, "must not be empty")
	}
	return s, nil
}

func duration(key, v string) (time.Duration, error) {
	d, err := time.ParseDuration(strings.TrimSpace(v))
	if err != nil {
		var s float64
		if s, err = units.ParseAs(v, units.Second); err != nil {
			return 0, settingErr(key, "%q: expected a duration such as 500ms or 2 s", v)
		}
		d = time.Duration(math.Round(s * 1e9))
	}
	if d <= 0 {
		return 0, settingErr(key, "%q: expected a positive duration", v)
	}
	if d > maxTimeout {
		return 0, settingErr(key, "%q: expected a duration of at most %s", v, maxTimeout)
	}
	return d, nil
}

func contains(list []string, s string) bool {
	for _, x := range list {
		if x == s {
			return true
		}
	}
	return false
}

func sortedKeys(m map[string]string) []string {
	out := make([]string, 0, len(m))
	for k := range m {
		out = append(out, k)
	}
	sort.Strings(out)
	return out
}

// CheckSettings validates the address (scheme-specific parts), the role, the
// settings and the templates of spec without opening anything. A bad setting or
// template is a *instruments.SettingError.
func (Driver) CheckSettings(spec instruments.Spec) error {
	u, err := url.Parse(spec.Address)
	if err != nil {
		return fmt.Errorf("address %q: %w", spec.Address, err)
	}
	if err := transport.CheckAddress(u); err != nil {
		return err
	}
	_, err = parseConfig(spec)
	return err
}

// Open dials addr and opens the instrument spec.Kind names (or, without a kind,
// spec.Role): a *Source (a
// *WatchdogSource when the arm_watchdog template is set; for the kind
// current_source a *CurrentSource or *WatchdogCurrentSource), a *Meter or a *Port (a
// *LoaderPort when the load_unit template is set). A source or meter is
// cleared and reset at open unless the reset setting is false; its error queue is
// then drained. ctx bounds the opening only.
func (Driver) Open(ctx context.Context, addr *url.URL, spec instruments.Spec) (instruments.Instrument, error) {
	if err := transport.CheckAddress(addr); err != nil {
		return nil, err
	}
	c, err := parseConfig(spec)
	if err != nil {
		return nil, err
	}
	dial := func(ctx context.Context) (transport.Conn, error) { return transport.Dial(ctx, addr, c.topt) }
	conn, err := dial(ctx)
	if err != nil {
		return nil, err
	}
	sess := scpi.NewSession(conn, scpi.Options{Redial: dial, Retries: c.retries, ErrorQuery: c.tpl["error_query"]})
	b := base{sess: sess, tpl: c.tpl, addr: addr.String(), timeout: c.topt.Timeout}
	var in instruments.Instrument
	switch c.role {
	case RoleSource:
		s := &Source{base: b, rangeV: c.rangeV}
		err = s.open(ctx, c.reset)
		in = s
		switch current := spec.Kind == instruments.KindCurrentSource; {
		case current && c.watchdog > 0:
			in = &WatchdogCurrentSource{CurrentSource: &CurrentSource{Source: s}, timeout: c.watchdog}
		case current:
			in = &CurrentSource{Source: s}
		case c.watchdog > 0:
			in = &WatchdogSource{Source: s, timeout: c.watchdog}
		}
	case RoleMeter:
		m := &Meter{base: b, lineFreq: c.lineFreq}
		err = m.open(ctx, c.reset)
		in = m
	case RoleSwitch:
		w := &Switch{base: b}
		err = w.prepare(ctx, c.reset)
		in = w
	case RoleThermal:
		th := &Thermal{base: b}
		err = th.prepare(ctx, c.reset)
		in = th
		if c.tpl["stable"] != "" {
			in = &StableThermal{Thermal: th}
		}
	default:
		p := &Port{base: b}
		in = p
		if c.tpl["load_unit"] != "" {
			in = &LoaderPort{Port: p}
		}
	}
	if err != nil {
		sess.Close()
		return nil, err
	}
	return in, nil
}

// base is what every instrument of this package shares.
type base struct {
	sess    *scpi.Session
	tpl     map[string]string
	addr    string
	timeout time.Duration
}

// Session returns the instrument's SCPI session (for diagnostics and tests).
func (b *base) Session() *scpi.Session { return b.sess }

// Query sends line and returns the reply; an idempotent query is retried.
func (b *base) Query(ctx context.Context, line string) (string, error) {
	r, err := b.sess.Query(ctx, line)
	if err != nil {
		return "", fmt.Errorf("%s: %w", b.addr, err)
	}
	return r, nil
}

// expand fills the template name with the placeholder values (pairs).
func (b *base) expand(name string, kv ...string) string {
	return strings.NewReplacer(kv...).Replace(b.tpl[name])
}

// exec sends the template name and drains the error queue.
func (b *base) exec(ctx context.Context, name string, kv ...string) error {
	if err := b.sess.Exec(ctx, b.expand(name, kv...)); err != nil {
		return fmt.Errorf("%s: %s: %w", b.addr, name, err)
	}
	return nil
}

// prepare clears, optionally resets and syncs, then drains the error queue.
func (b *base) prepare(ctx context.Context, reset bool) error {
	if t := b.tpl["clear"]; t != "" {
		if err := b.sess.Write(ctx, t); err != nil {
			return fmt.Errorf("%s: clear: %w", b.addr, err)
		}
	}
	if reset {
		if err := b.sess.Write(ctx, b.tpl["reset"]); err != nil {
			return fmt.Errorf("%s: reset: %w", b.addr, err)
		}
	}
	if t := b.tpl["sync"]; t != "" {
		r, err := b.sess.Query(ctx, t)
		if err != nil {
			return fmt.Errorf("%s: sync: %w", b.addr, err)
		}
		if v, f, err := scpi.ParseNumber(r); err != nil || f != instruments.FlagNone || v != 1 {
			return fmt.Errorf("%s: sync: %q answered %q, want 1: %w", b.addr, t, r, scpi.ErrMalformed)
		}
	}
	if err := b.sess.DrainErrors(ctx); err != nil {
		return fmt.Errorf("%s: %w", b.addr, err)
	}
	return nil
}

// checkErrors drains the error queue (error_query until 0).
func (b *base) checkErrors(ctx context.Context) error {
	if err := b.sess.DrainErrors(ctx); err != nil {
		return fmt.Errorf("%s: error queue: %w", b.addr, err)
	}
	return nil
}

// identify sends the identify template and parses the reply strictly.
func (b *base) identify(ctx context.Context) (instruments.Identity, error) {
	r, err := b.sess.Query(ctx, b.tpl["identify"])
	if err != nil {
		return instruments.Identity{}, fmt.Errorf("%s: identify: %w", b.addr, err)
	}
	id, err := scpi.ParseIDN(r)
	if err != nil {
		return instruments.Identity{}, fmt.Errorf("%s: identify: %w", b.addr, err)
	}
	return id, nil
}

// num formats v for a template: strconv 'g' with 10 significant digits.
func num(v float64) string { return strconv.FormatFloat(v, 'g', 10, 64) }

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
