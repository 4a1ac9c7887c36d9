package serve

import (
	"context"
	"math"
	"strconv"
	"strings"
	"sync"
	"time"

	"trimline/instruments"
	"trimline/instruments/scpi"
	"trimline/instruments/sim"
)

// SCPI error-queue entries the served instruments push.
const (
	errDataType     = `-104,"Data type error"`
	errParamNotAllw = `-108,"Parameter not allowed"`
	errMissingParam = `-109,"Missing parameter"`
	errUndefHeader  = `-113,"Undefined header"`
	errOutOfRange   = `-222,"Data out of range"`
	errIllegalValue = `-224,"Illegal parameter value"`
	errOverflow     = `-350,"Queue overflow"`
	errWatchdog     = `+301,"Output watchdog ran out: output off, 0 V"`
	noError         = `0,"No error"`
	queueLen        = 10
)

// node is one header node: its short form and its long form, upper case.
type node struct {
	short, long string
	optional    bool
}

// pattern parses "[SOURce] VOLTage [LEVel]": nodes separated by spaces, the short
// form in capitals, optional nodes in brackets.
func pattern(p string) []node {
	var out []node
	for _, f := range strings.Fields(p) {
		n := node{}
		if strings.HasPrefix(f, "[") {
			n.optional = true
			f = strings.Trim(f, "[]")
		}
		i := strings.IndexFunc(f, func(r rune) bool { return r >= 'a' && r <= 'z' })
		if i < 0 {
			i = len(f)
		}
		n.short, n.long = f[:i], strings.ToUpper(f)
		out = append(out, n)
	}
	return out
}

func matchNodes(in []string, pat []node) bool {
	if len(pat) == 0 {
		return len(in) == 0
	}
	p := pat[0]
	if len(in) > 0 && (in[0] == p.short || in[0] == p.long) && matchNodes(in[1:], pat[1:]) {
		return true
	}
	return p.optional && matchNodes(in, pat[1:])
}

// command is one entry of an instrument's command table.
type command struct {
	pat   []node
	set   func(ctx context.Context, args []string) string           // returns an error entry or ""
	query func(ctx context.Context, args []string) (string, string) // reply, error entry
}

// scpiInstrument is the common part of the served source and meter: header
// matching, the error queue and the common commands.
type scpiInstrument struct {
	mu       sync.Mutex // guards queue and the instrument's own state
	queue    []string
	commands []command
	identify func(ctx context.Context) (instruments.Identity, error)
	reset    func(ctx context.Context) error
	overload bool // set per line from the fault
	// trips, when set, counts the times the instrument switched its own output
	// off (the source's output watchdog); each new one queues errWatchdog.
	trips     func() int
	seenTrips int
}

func (s *scpiInstrument) push(entry string) {
	if len(s.queue) >= queueLen {
		s.queue[queueLen-1] = errOverflow
		return
	}
	s.queue = append(s.queue, entry)
}

func (s *scpiInstrument) add(p string, set func(context.Context, []string) string, query func(context.Context, []string) (string, string)) {
	s.commands = append(s.commands, command{pat: pattern(p), set: set, query: query})
}

// inject runs the line, then pushes entry.
func (s *scpiInstrument) inject(entry string, run func() (string, bool)) (string, bool) {
	r, ok := run()
	s.mu.Lock()
	s.push(entry)
	s.mu.Unlock()
	return r, ok
}

func (s *scpiInstrument) handle(ctx context.Context, line string, f Fault, _ int) (string, bool) {
	s.mu.Lock()
	defer s.mu.Unlock()
	s.overload = f.Overload
	if s.trips != nil {
		if n := s.trips(); n > s.seenTrips {
			s.push(errWatchdog)
			s.seenTrips = n
		}
	}
	var replies []string
	for _, unit := range strings.Split(line, ";") {
		unit = strings.TrimSpace(unit)
		if unit == "" {
			continue
		}
		if r, ok := s.one(ctx, unit); ok {
			replies = append(replies, r)
		}
	}
	if len(replies) == 0 {
		return "", false
	}
	return strings.Join(replies, ";"), true
}

// one carries out one program message unit and returns its reply, if any.
func (s *scpiInstrument) one(ctx context.Context, unit string) (string, bool) {
	header, rest := unit, ""
	if i := strings.IndexAny(unit, " \t"); i >= 0 {
		header, rest = unit[:i], strings.TrimSpace(unit[i+1:])
	}
	var args []string
	if rest != "" {
		for _, a := range strings.Split(rest, ",") {
			args = append(args, strings.TrimSpace(a))
		}
	}
	h := strings.ToUpper(header)
	isQuery := strings.HasSuffix(h, "?")
	h = strings.TrimSuffix(h, "?")
	switch h {
	case "*IDN":
		if !isQuery {
			break
		}
		if len(args) > 0 {
			s.push(errParamNotAllw)
			return "", false
		}
		id, err := s.identify(ctx)
		if err != nil {
			return "", false
		}
		return id.String(), true
	case "*RST", "*CLS", "*OPC", "*WAI":
		if len(args) > 0 {
			s.push(errParamNotAllw)
			return "", false
		}
		switch {
		case h == "*OPC" && isQuery:
			return "1", true
		case isQuery:
		case h == "*RST":
			s.reset(ctx)
			return "", false
		case h == "*CLS":
			s.queue = nil
			return "", false
		default:
			return "", false
		}
	}
	in := strings.Split(strings.TrimPrefix(h, ":"), ":")
	if isQuery && matchNodes(in, pattern("SYSTem ERRor [NEXT]")) {
		if len(s.queue) == 0 {
			return noError, true
		}
		e := s.queue[0]
		s.queue = s.queue[1:]
		return e, true
	}
	for _, c := range s.commands {
		if !matchNodes(in, c.pat) {
			continue
		}
		if isQuery && c.query != nil {
			r, e := c.query(ctx, args)
			if e != "" {
				s.push(e)
				return "", false
			}
			return r, true
		}
		if !isQuery && c.set != nil {
			if e := c.set(ctx, args); e != "" {
				s.push(e)
			}
			return "", false
		}
	}
	s.push(errUndefHeader)
	return "", false
}

// number parses the single numeric argument of a setting.
func number(args []string) (float64, string) {
	switch {
	case len(args) == 0 || args[0] == "":
		return 0, errMissingParam
	case len(args) > 1:
		return 0, errParamNotAllw
	}
	v, f, err := scpi.ParseNumber(args[0])
	if err != nil || f != instruments.FlagNone {
		return 0, errDataType
	}
	return v, ""
}

// boolean parses ON|OFF|1|0.
func boolean(args []string) (bool, string) {
	switch {
	case len(args) == 0 || args[0] == "":
		return false, errMissingParam
	case len(args) > 1:
		return false, errParamNotAllw
	}
	switch strings.ToUpper(args[0]) {
	case "ON", "1":
		return true, ""
	case "OFF", "0":
		return false, ""
	}
	return false, errIllegalValue
}

func noArgs(args []string) string {
	if len(args) > 0 {
		return errParamNotAllw
	}
	return ""
}

func onOff(b bool) string {
	if b {
		return "1"
	}
	return "0"
}

// newSourceHandler serves a sim.Source.
func newSourceHandler(src *sim.Source) *scpiInstrument {
	s := &scpiInstrument{identify: src.Identify, trips: func() int { _, _, n := src.Watchdog(); return n }}
	rng := src.Range()
	// The function (SOUR:FUNC VOLT|CURR; VOLT after reset) and the current
	// programmed with SOUR:CURR, which drives the output only in CURR.
	fnCurrent, amps := false, 0.0
	s.reset = func(ctx context.Context) error {
		rng = src.Range()
		fnCurrent, amps = false, 0
		return src.Reset(ctx)
	}
	s.add("[SOURce] FUNCtion [MODE]", func(ctx context.Context, a []string) string {
		if len(a) != 1 {
			return errMissingParam
		}
		switch strings.ToUpper(a[0]) {
		case "CURR", "CURRENT":
			if err := src.SetCurrent(ctx, amps); err != nil {
				return errOutOfRange
			}
			fnCurrent = true
		case "VOLT", "VOLTAGE":
			_, level := src.State()
			if err := src.SetLevel(ctx, level); err != nil {
				return errOutOfRange
			}
			fnCurrent = false
		default:
			return errIllegalValue
		}
		return ""
	}, func(ctx context.Context, a []string) (string, string) {
		if fnCurrent {
			return "CURR", noArgs(a)
		}
		return "VOLT", noArgs(a)
	})
	s.add("[SOURce] CURRent [LEVel] [IMMediate] [AMPLitude]", func(ctx context.Context, a []string) string {
		v, e := number(a)
		if e != "" {
			return e
		}
		if math.Abs(v) > src.CurrentRange()*(1+1e-9) {
			return errOutOfRange
		}
		if fnCurrent {
			if err := src.SetCurrent(ctx, v); err != nil {
				return errOutOfRange
			}
		}
		amps = v
		return ""
	}, func(ctx context.Context, a []string) (string, string) {
		return formatNumber(amps), noArgs(a)
	})
	s.add("[SOURce] VOLTage PROTection [LEVel]", func(ctx context.Context, a []string) string {
		v, e := number(a)
		if e != "" {
			return e
		}
		if err := src.SetVoltageLimit(ctx, v); err != nil {
			return errOutOfRange
		}
		return ""
	}, func(ctx context.Context, a []string) (string, string) {
		_, _, limit := src.CurrentState()
		return formatNumber(limit), noArgs(a)
	})
	s.add("[SOURce] VOLTage RANGe", func(ctx context.Context, a []string) string {
		v, e := number(a)
		if e != "" {
			return e
		}
		_, level := src.State()
		if !(v > 0) || v > src.Range()*(1+1e-9) || math.Abs(level) > v*(1+1e-9) {
			return errOutOfRange
		}
		rng = v
		return ""
	}, func(ctx context.Context, a []string) (string, string) {
		return formatNumber(rng), noArgs(a)
	})
	s.add("[SOURce] VOLTage [LEVel] [IMMediate] [AMPLitude]", func(ctx context.Context, a []string) string {
		v, e := number(a)
		if e != "" {
			return e
		}
		if math.Abs(v) > rng*(1+1e-9) {
			return errOutOfRange
		}
		if err := src.SetLevel(ctx, v); err != nil {
			return errOutOfRange
		}
		return ""
	}, func(ctx context.Context, a []string) (string, string) {
		_, level := src.State()
		return formatNumber(level), noArgs(a)
	})
	s.add("[SOURce] CURRent PROTection [LEVel]", func(ctx context.Context, a []string) string {
		v, e := number(a)
		if e != "" {
			return e
		}
		if err := src.SetCompliance(ctx, v); err != nil {
			return errOutOfRange
		}
		return ""
	}, func(ctx context.Context, a []string) (string, string) {
		return formatNumber(src.Compliance()), noArgs(a)
	})
	s.add("OUTPut [STATe]", func(ctx context.Context, a []string) string {
		on, e := boolean(a)
		if e != "" {
			return e
		}
		if err := src.SetOutput(ctx, on); err != nil {
			return `-200,"Execution error"`
		}
		return ""
	}, func(ctx context.Context, a []string) (string, string) {
		on, _ := src.State()
		return onOff(on), noArgs(a)
	})
	s.add("OUTPut WATChdog [TIMe]", func(ctx context.Context, a []string) string {
		if len(a) == 1 && strings.EqualFold(a[0], "OFF") {
			src.DisarmWatchdog(ctx)
			return ""
		}
		v, e := number(a)
		if e != "" {
			return e
		}
		if v == 0 {
			src.DisarmWatchdog(ctx)
			return ""
		}
		if !(v > 0) || v > sim.MaxWatchdog.Seconds() {
			return errOutOfRange
		}
		if err := src.ArmWatchdog(ctx, time.Duration(math.Round(v*1e9))); err != nil {
			return errOutOfRange
		}
		return ""
	}, func(ctx context.Context, a []string) (string, string) {
		armed, d, _ := src.Watchdog()
		if !armed {
			d = 0
		}
		return formatNumber(d.Seconds()), noArgs(a)
	})
	return s
}

// maxCount is the largest SAMPle:COUNt the served meter accepts.
const maxCount = 1000

// newMeterHandler serves a sim.Meter.
func newMeterHandler(m *sim.Meter) *scpiInstrument {
	s := &scpiInstrument{identify: m.Identify}
	count, autozero := 1, true
	s.reset = func(ctx context.Context) error {
		count, autozero = 1, true
		return m.Reset(ctx)
	}
	configure := func(f instruments.Function) func(ctx context.Context, a []string) string {
		return func(ctx context.Context, a []string) string {
			r := 0.0
			switch {
			case len(a) > 1:
				return errParamNotAllw
			case len(a) == 0 || strings.EqualFold(a[0], "AUTO") || strings.EqualFold(a[0], "DEF"):
			default:
				v, e := number(a)
				if e != "" {
					return e
				}
				if !(v > 0) {
					return errOutOfRange
				}
				r = v
			}
			prev := m.Function()
			if err := m.SetFunction(ctx, f); err != nil {
				return `-200,"Execution error"`
			}
			if err := m.Configure(ctx, r, m.NPLC()); err != nil {
				// A refused range leaves the meter as it was.
				m.SetFunction(ctx, prev)
				return errOutOfRange
			}
			return ""
		}
	}
	// nplc sets the integration time (shared by both functions, as on the model);
	// the function's own header is accepted whatever the function.
	nplc := func(ctx context.Context, a []string) string {
		v, e := number(a)
		if e != "" {
			return e
		}
		if err := m.Configure(ctx, m.Range(), v); err != nil {
			return errOutOfRange
		}
		return ""
	}
	nplcQuery := func(ctx context.Context, a []string) (string, string) {
		return formatNumber(m.NPLC()), noArgs(a)
	}
	s.add("CONFigure [VOLTage] [DC]", configure(instruments.FuncVoltage), nil)
	s.add("CONFigure CURRent [DC]", configure(instruments.FuncCurrent), nil)
	s.add("[SENSe] VOLTage [DC] NPLCycles", nplc, nplcQuery)
	s.add("[SENSe] CURRent [DC] NPLCycles", nplc, nplcQuery)
	s.add("[SENSe] ZERO AUTO", func(ctx context.Context, a []string) string {
		if len(a) == 1 && strings.EqualFold(a[0], "ONCE") {
			return ""
		}
		on, e := boolean(a)
		if e != "" {
			return e
		}
		autozero = on
		return ""
	}, func(ctx context.Context, a []string) (string, string) {
		return onOff(autozero), noArgs(a)
	})
	s.add("SAMPle COUNt", func(ctx context.Context, a []string) string {
		v, e := number(a)
		if e != "" {
			return e
		}
		if v != math.Trunc(v) || v < 1 || v > maxCount {
			return errOutOfRange
		}
		count = int(v)
		return ""
	}, func(ctx context.Context, a []string) (string, string) {
		return strconv.Itoa(count), noArgs(a)
	})
	s.add("READ", nil, func(ctx context.Context, a []string) (string, string) {
		if e := noArgs(a); e != "" {
			return "", e
		}
		rs, err := m.Read(ctx, count)
		if err != nil {
			return "", `-200,"Execution error"`
		}
		out := make([]string, len(rs))
		for i, r := range rs {
			v := r.Value
			if s.overload {
				v = sim.OverloadValue
			}
			out[i] = formatNumber(v)
		}
		return strings.Join(out, ","), ""
	})
	return s
}

// newSwitchHandler serves a sim.Switch: ROUTe:CLOSe (@<channel>) routes one
// channel, ROUTe:OPEN:ALL releases every path, ROUTe:CLOSe? answers (@<channel>),
// or (@) when released. A channel the switch refuses pushes -222.
func newSwitchHandler(sw *sim.Switch) *scpiInstrument {
	s := &scpiInstrument{identify: sw.Identify, reset: sw.Reset}
	s.add("ROUTe CLOSe", func(ctx context.Context, a []string) string {
		switch {
		case len(a) == 0 || a[0] == "":
			return errMissingParam
		case len(a) > 1:
			return errParamNotAllw
		}
		// A channel list is "(@k)": anything else is the wrong data type.
		ch, open := strings.CutPrefix(a[0], "(@")
		ch, closed := strings.CutSuffix(ch, ")")
		if !open || !closed || ch == "" {
			return errDataType
		}
		if err := sw.Route(ctx, ch); err != nil {
			return errOutOfRange
		}
		return ""
	}, func(ctx context.Context, a []string) (string, string) {
		return "(@" + sw.Routed() + ")", noArgs(a)
	})
	s.add("ROUTe OPEN ALL", func(ctx context.Context, a []string) string {
		if e := noArgs(a); e != "" {
			return e
		}
		sw.Release(ctx)
		return ""
	}, nil)
	return s
}

// newChamberHandler serves a sim.Chamber: TEMPerature:SETPoint <°C> programs the
// set point (one outside the chamber's min..max pushes -222) and ? answers it;
// TEMPerature? reads the chamber's temperature; TEMPerature:STABle? answers 1 once
// the chamber is stable, else 0.
func newChamberHandler(c *sim.Chamber) *scpiInstrument {
	s := &scpiInstrument{identify: c.Identify, reset: c.Reset}
	s.add("TEMPerature SETPoint", func(ctx context.Context, a []string) string {
		v, e := number(a)
		if e != "" {
			return e
		}
		if err := c.SetTemperature(ctx, v); err != nil {
			return errOutOfRange
		}
		return ""
	}, func(ctx context.Context, a []string) (string, string) {
		return formatNumber(c.SetPoint()), noArgs(a)
	})
	s.add("TEMPerature STABle", nil, func(ctx context.Context, a []string) (string, string) {
		ok, err := c.Stable(ctx)
		if err != nil {
			return "", errIllegalValue
		}
		return onOff(ok), noArgs(a)
	})
	s.add("TEMPerature", nil, func(ctx context.Context, a []string) (string, string) {
		v, err := c.Temperature(ctx)
		if err != nil {
			return "", errIllegalValue
		}
		return formatNumber(v), noArgs(a)
	})
	return s
}
