package generic

import (
	"context"
	"fmt"
	"math"
	"sync"
	"time"

	"trimline/instruments"
	"trimline/instruments/scpi"
	"trimline/instruments/transport"
)

// assumedNPLC sizes the read timeout before Configure has set the integration time.
const assumedNPLC = 10

// Meter is a DC voltmeter driven by templates (see the package doc).
type Meter struct {
	base
	lineFreq float64 // Hz, sizes the read timeout

	mu     sync.Mutex
	nplc   float64              // last programmed; 0 = unknown
	count  int                  // last programmed sample count; 0 = unknown
	fn     instruments.Function // last selected; "" = voltage (the power-on function)
	closed bool
	clock  instruments.Clock
}

var (
	_ instruments.Meter           = (*Meter)(nil)
	_ instruments.Identifier      = (*Meter)(nil)
	_ instruments.Resetter        = (*Meter)(nil)
	_ instruments.MeterConfigurer = (*Meter)(nil)
	_ instruments.ErrorQueue      = (*Meter)(nil)
	_ instruments.FunctionSetter  = (*Meter)(nil)
	_ Querier                     = (*Meter)(nil)
)

func (m *Meter) open(ctx context.Context, reset bool) error {
	m.clock = instruments.RealClock{}
	return m.prepare(ctx, reset)
}

// Identify sends the identify template (*IDN?) and parses the reply strictly.
func (m *Meter) Identify(ctx context.Context) (instruments.Identity, error) { return m.identify(ctx) }

// CheckErrors reads the error queue (error_query until 0) and returns the first
// entry as a *scpi.InstrumentError; nil when the queue was empty. A reading (read)
// is a query and does not read the queue itself, so an entry the meter raised while
// answering it is found here.
func (m *Meter) CheckErrors(ctx context.Context) error { return m.checkErrors(ctx) }

// Reset clears the instrument, sends the reset template (*RST), waits for it
// (*OPC?) and drains the error queue. The sample count and NPLC are then unknown
// and programmed again when needed.
func (m *Meter) Reset(ctx context.Context) error {
	m.mu.Lock()
	m.count, m.nplc, m.fn = 0, 0, ""
	m.mu.Unlock()
	return m.prepare(ctx, true)
}

// SetFunction selects what later reads measure: FuncVoltage sends function_voltage
// (CONF:VOLT:DC), FuncCurrent function_current (CONF:CURR:DC), then drains the error
// queue. The SCPI CONFigure commands also set autorange and may reset the trigger
// system, so call Configure after. Configure's range is then in the function's unit
// (volts or amperes) and it uses configure_current and set_nplc_current for current.
// A meter without a current function has function_current set to "": FuncCurrent is
// then an error.
func (m *Meter) SetFunction(ctx context.Context, f instruments.Function) error {
	name := map[instruments.Function]string{instruments.FuncVoltage: "function_voltage", instruments.FuncCurrent: "function_current"}[f]
	switch {
	case name == "":
		return fmt.Errorf("%s: function %q: expected %s or %s", m.addr, f, instruments.FuncVoltage, instruments.FuncCurrent)
	case m.tpl[name] == "":
		return fmt.Errorf("%s: function %s: the meter has none (templates.%s is empty)", m.addr, f, name)
	}
	if err := m.exec(ctx, name); err != nil {
		return err
	}
	m.mu.Lock()
	m.fn, m.count = f, 0
	m.mu.Unlock()
	return nil
}

// Configure sends configure with the range in volts ("AUTO" for 0), set_nplc with
// the integration time in power-line cycles, and autozero (unless ""), draining the
// error queue after each. After SetFunction(FuncCurrent) the range is in amperes and
// configure_current and set_nplc_current are sent instead.
func (m *Meter) Configure(ctx context.Context, rangeVolts, nplc float64) error {
	m.mu.Lock()
	current := m.fn == instruments.FuncCurrent
	m.mu.Unlock()
	configure, setNPLC, unit := "configure", "set_nplc", "V"
	if current {
		configure, setNPLC, unit = "configure_current", "set_nplc_current", "A"
	}
	if !finite(rangeVolts) || rangeVolts < 0 {
		return fmt.Errorf("%s: range %g %s: expected 0 (auto) or a positive range", m.addr, rangeVolts, unit)
	}
	if !finite(nplc) || nplc <= 0 {
		return fmt.Errorf("%s: nplc %g: expected a positive number of power-line cycles", m.addr, nplc)
	}
	r := "AUTO"
	if rangeVolts > 0 {
		r = num(rangeVolts)
	}
	if err := m.exec(ctx, configure, "{range}", r); err != nil {
		return err
	}
	m.mu.Lock()
	m.count = 0 // a configure may reset the trigger system
	m.mu.Unlock()
	if err := m.exec(ctx, setNPLC, "{nplc}", num(nplc)); err != nil {
		return err
	}
	m.mu.Lock()
	m.nplc = nplc
	m.mu.Unlock()
	if m.tpl["autozero"] != "" {
		return m.exec(ctx, "autozero")
	}
	return nil
}

// Read takes n ≥ 1 readings: set_count (when n differs from the last count) and read,
// whose reply must hold n comma-separated numbers (else an error wrapping
// scpi.ErrMalformed). The exchange timeout is stretched by n apertures (NPLC / line
// frequency; 10 PLC assumed before Configure). Overload and not-a-number readings
// come back flagged (FlagOverload, FlagNaN; value ±9.9e37 or 9.91e37), never as
// numbers. Every reading is stamped with the time the reply arrived.
func (m *Meter) Read(ctx context.Context, n int) ([]instruments.Reading, error) {
	if n < 1 {
		return nil, fmt.Errorf("%s: read %d readings: expected at least 1", m.addr, n)
	}
	m.mu.Lock()
	count, nplc := m.count, m.nplc
	m.mu.Unlock()
	if count != n {
		if err := m.exec(ctx, "set_count", "{n}", fmt.Sprint(n)); err != nil {
			return nil, err
		}
		m.mu.Lock()
		m.count = n
		m.mu.Unlock()
	}
	if nplc == 0 {
		nplc = assumedNPLC
	}
	aperture := time.Duration(math.Round(float64(n) * nplc / m.lineFreq * 1e9))
	vals, flags, err := m.sess.QueryFloats(transport.WithTimeout(ctx, m.timeout+aperture), m.tpl["read"])
	if err != nil {
		return nil, fmt.Errorf("%s: read: %w", m.addr, err)
	}
	t := m.clock.Now()
	if len(vals) != n {
		return nil, fmt.Errorf("%s: read: %d readings in the reply, want %d: %w", m.addr, len(vals), n, scpi.ErrMalformed)
	}
	out := make([]instruments.Reading, n)
	for i := range vals {
		out[i] = instruments.Reading{Value: vals[i], Flag: flags[i], Time: t}
	}
	return out, nil
}

// Close closes the link; a second call returns nil.
func (m *Meter) Close() error {
	m.mu.Lock()
	if m.closed {
		m.mu.Unlock()
		return nil
	}
	m.closed = true
	m.mu.Unlock()
	return m.sess.Close()
}
