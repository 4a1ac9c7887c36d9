package sim

import (
	"context"
	"errors"
	"fmt"
	"math"
	"strconv"
	"time"

	"trimline/instruments"
)

// Meter is the simulated 6½-digit DC multimeter at sim://meter: it measures DC
// voltage (the power-on function) or DC current. A reading is the DUT output (or,
// with probe: supply, the unit's supply current) at the instant the reading starts,
// ·(1 + gain error) + offset error + noise, quantised to the resolution; the clock
// then advances by the aperture. Each function keeps its own range.
type Meter struct {
	wiring
	cfg      meterConfig
	uGain    float64 // drawn share (±0.6) of the gain spec
	uOffset  float64 // drawn share (±0.6) of the offset spec
	uIGain   float64 // the same for the current function
	uIOffset float64
	fn       instruments.Function
	rng      float64 // V, present voltage range
	iRng     float64 // A, present current range
	nplc     float64 // power-line cycles, present integration time
}

var (
	_ instruments.Meter           = (*Meter)(nil)
	_ instruments.Identifier      = (*Meter)(nil)
	_ instruments.Resetter        = (*Meter)(nil)
	_ instruments.MeterConfigurer = (*Meter)(nil)
	_ instruments.ClockSource     = (*Meter)(nil)
	_ instruments.FunctionSetter  = (*Meter)(nil)
)

// CurrentRanges are the meter's DC current ranges in amperes (readings up to 1.2×
// the range are valid); auto is the 100 mA range.
var CurrentRanges = []float64{1e-3, 10e-3, 0.1, 1}

// currentRange returns the current range in A for a request: 0 = auto (100 mA),
// otherwise the smallest range that holds it.
func currentRange(v float64) (float64, error) {
	if v == 0 {
		return 0.1, nil
	}
	if !(v > 0) || math.IsInf(v, 0) {
		return 0, fmt.Errorf("range %g A: expected 0 (auto) or a positive current", v)
	}
	for _, r := range CurrentRanges {
		if v <= r*(1+1e-9) {
			return r, nil
		}
	}
	return 0, fmt.Errorf("range %g A above the largest current range, %g A", v, CurrentRanges[len(CurrentRanges)-1])
}

// MeterRanges are the meter's DC voltage ranges in volts (full scale; readings up to
// 1.2× the range are valid).
var MeterRanges = []float64{0.1, 1, 10, 100, 1000}

// OverloadValue is the value of an overloaded reading (SCPI +9.9E37), signed like
// the input; NaNValue that of a not-a-number reading (SCPI 9.91E37).
const (
	OverloadValue = 9.9e37
	NaNValue      = 9.91e37
)

// meterRange returns the range in V the meter uses for a requested range: 0 = auto
// (the 10 V range), otherwise the smallest range that holds the request.
func meterRange(v float64) (float64, error) {
	if v == 0 {
		return 10, nil
	}
	if !(v > 0) || math.IsInf(v, 0) {
		return 0, fmt.Errorf("range %g V: expected 0 (auto) or a positive voltage", v)
	}
	for _, r := range MeterRanges {
		if v <= r*(1+1e-9) {
			return r, nil
		}
	}
	return 0, fmt.Errorf("range %g V above the largest range, %g V", v, MeterRanges[len(MeterRanges)-1])
}

// checkNPLC accepts an integration time of 0.001 to 100 power-line cycles.
func checkNPLC(n float64) error {
	if !(n >= 0.001 && n <= 100) {
		return fmt.Errorf("nplc %g outside 0.001..100", n)
	}
	return nil
}

// newMeter returns the bench's meter number i (0-based): the first draws its errors
// from the stream "meter", later ones from "meter#2", "meter#3", ….
func newMeter(b *Bench, c config, i int) *Meter {
	name := "meter"
	if i > 0 {
		name = "meter#" + strconv.Itoa(i+1)
	}
	r := streamRand(name, b.seed)
	m := &Meter{
		wiring: wiring{bench: b, latency: c.latency, name: "sim meter", errClosed: errMeterClosed},
		cfg:    c.meter, uGain: uniform(r), uOffset: uniform(r), rng: c.meter.rng, nplc: c.meter.nplc,
		fn: instruments.FuncVoltage, iRng: c.meter.iRng,
	}
	m.uIGain, m.uIOffset = uniform(r), uniform(r) // after the voltage draws, which stay as they were
	return m
}

var errMeterClosed = errors.New("sim meter: closed")

// Errors returns the meter's gain error (fraction) and offset error (V, or A in
// FuncCurrent) on the present function and range: reading = input·(1 + gain) +
// offset + noise.
func (m *Meter) Errors() (gain, offset float64) {
	m.bench.mu.Lock()
	defer m.bench.mu.Unlock()
	return m.errors()
}

func (m *Meter) errors() (gain, offset float64) {
	if m.fn == instruments.FuncCurrent {
		gain = m.uIGain * m.cfg.iSpecReading
		if m.cfg.iGainError != nil {
			gain = *m.cfg.iGainError
		}
		offset = m.uIOffset * m.cfg.iSpecRange * m.iRng
		if m.cfg.iOffset != nil {
			offset = *m.cfg.iOffset
		}
		return gain, offset
	}
	gain = m.uGain * m.cfg.specReading
	if m.cfg.gainError != nil {
		gain = *m.cfg.gainError
	}
	offset = m.uOffset * m.cfg.specRange * m.rng
	if m.cfg.offset != nil {
		offset = *m.cfg.offset
	}
	return gain, offset
}

// Resolution returns the reading resolution on the present function and range: in
// FuncVoltage the resolution setting (1 µV on the 10 V range by default) scaled by
// range/10 V, in FuncCurrent current_resolution (10 nA on the 100 mA range) scaled
// by range/100 mA.
func (m *Meter) Resolution() float64 {
	m.bench.mu.Lock()
	defer m.bench.mu.Unlock()
	return m.resolution()
}

func (m *Meter) resolution() float64 {
	if m.fn == instruments.FuncCurrent {
		return m.cfg.iResolution * m.iRng / 0.1
	}
	return m.cfg.resolution * m.rng / 10
}

// Aperture returns the time one reading takes: NPLC / line frequency (1 PLC = 20 ms
// at 50 Hz).
func (m *Meter) Aperture() time.Duration {
	m.bench.mu.Lock()
	defer m.bench.mu.Unlock()
	return m.aperture()
}

func (m *Meter) aperture() time.Duration {
	return time.Duration(math.Round(m.nplc / m.cfg.lineFreq * 1e9))
}

// Range returns the present range: in volts, or in amperes in FuncCurrent.
func (m *Meter) Range() float64 {
	m.bench.mu.Lock()
	defer m.bench.mu.Unlock()
	return m.rangeNow()
}

func (m *Meter) rangeNow() float64 {
	if m.fn == instruments.FuncCurrent {
		return m.iRng
	}
	return m.rng
}

// Function returns what the meter measures now.
func (m *Meter) Function() instruments.Function {
	m.bench.mu.Lock()
	defer m.bench.mu.Unlock()
	return m.fn
}

// SetFunction selects what later reads measure: FuncVoltage (in V) or FuncCurrent
// (in A). Each function keeps its own range; another function is an error.
func (m *Meter) SetFunction(ctx context.Context, f instruments.Function) error {
	var invalid error
	if f != instruments.FuncVoltage && f != instruments.FuncCurrent {
		invalid = fmt.Errorf("sim meter: function %q: expected %s or %s", f, instruments.FuncVoltage, instruments.FuncCurrent)
	}
	m.bench.mu.Lock()
	defer m.bench.mu.Unlock()
	if err := m.start(ctx, "set function", invalid); err != nil {
		return err
	}
	m.fn = f
	return nil
}

// NPLC returns the present integration time in power-line cycles.
func (m *Meter) NPLC() float64 {
	m.bench.mu.Lock()
	defer m.bench.mu.Unlock()
	return m.nplc
}

// Clock returns the bench clock.
func (m *Meter) Clock() instruments.Clock { return m.bench.clock }

// Configure sets the range of the present function (FuncVoltage: volts, 0 = auto,
// which is the 10 V range, otherwise the smallest of MeterRanges that holds it;
// FuncCurrent: amperes, 0 = auto = 100 mA, otherwise the smallest of CurrentRanges)
// and the integration time (0.001..100 PLC).
func (m *Meter) Configure(ctx context.Context, rangeVolts, nplc float64) error {
	m.bench.mu.Lock()
	defer m.bench.mu.Unlock()
	current := m.fn == instruments.FuncCurrent
	pick := meterRange
	if current {
		pick = currentRange
	}
	r, invalid := pick(rangeVolts)
	if invalid == nil {
		invalid = checkNPLC(nplc)
	}
	if invalid != nil {
		invalid = fmt.Errorf("sim meter: %w", invalid)
	}
	if err := m.start(ctx, "configure", invalid); err != nil {
		return err
	}
	if current {
		m.iRng = r
	} else {
		m.rng = r
	}
	m.nplc = nplc
	return nil
}

// Reset returns the meter to its power-on configuration: FuncVoltage, the range,
// current_range and nplc settings (by default 10 V, 100 mA and 1 PLC).
func (m *Meter) Reset(ctx context.Context) error {
	m.bench.mu.Lock()
	defer m.bench.mu.Unlock()
	if err := m.start(ctx, "reset", nil); err != nil {
		return err
	}
	m.rng, m.nplc = m.cfg.rng, m.cfg.nplc
	m.fn, m.iRng = instruments.FuncVoltage, m.cfg.iRng
	return nil
}

// Identify returns the meter's invented identity.
func (m *Meter) Identify(ctx context.Context) (instruments.Identity, error) {
	id, err := m.identify(ctx, "DV-65", "DV")
	// A second meter on the bench is another instrument: its serial says which.
	for i, o := range m.bench.meters {
		if o == m && i > 0 && err == nil {
			id.Serial += fmt.Sprintf("-%d", i+1)
		}
	}
	return id, err
}

// Read takes n ≥ 1 readings in the present function. Each samples the meter's input
// (the wired channel's output or the unit's supply current, see the package doc) at
// the instant it starts (its Time); the clock then advances by the aperture. A reading above 1.2× the
// range is FlagOverload (±OverloadValue); force_flag flags every reading. A done ctx
// stops the readings and returns its error, wrapped.
func (m *Meter) Read(ctx context.Context, n int) ([]instruments.Reading, error) {
	var invalid error
	if n < 1 {
		invalid = fmt.Errorf("sim meter: read %d readings: expected at least 1", n)
	}
	b := m.bench
	b.mu.Lock()
	defer b.mu.Unlock()
	if err := m.start(ctx, "read", invalid); err != nil {
		return nil, err
	}
	gain, offset := m.errors()
	noise := m.cfg.noise / math.Sqrt(m.nplc)
	if m.fn == instruments.FuncCurrent {
		noise = m.cfg.iNoise / math.Sqrt(m.nplc)
	}
	rng := m.rangeNow()
	res := m.resolution()
	out := make([]instruments.Reading, 0, n)
	for range n {
		if err := ctx.Err(); err != nil {
			return nil, fmt.Errorf("sim meter: read: %w", err)
		}
		t := b.clock.Now()
		v := b.probe(t, m.fn, m.cfg.supply)*(1+gain) + offset + noise*b.noise.NormFloat64()
		r := instruments.Reading{Value: quantise(v, res), Time: t}
		switch {
		case m.cfg.force == instruments.FlagNaN:
			r.Value, r.Flag = NaNValue, instruments.FlagNaN
		case m.cfg.force == instruments.FlagOverload:
			r.Value, r.Flag = OverloadValue, instruments.FlagOverload
		case math.Abs(v) > 1.2*rng:
			r.Value, r.Flag = math.Copysign(OverloadValue, v), instruments.FlagOverload
		}
		out = append(out, r)
		if err := b.advance(ctx, m.aperture()); err != nil {
			return nil, fmt.Errorf("sim meter: read: %w", err)
		}
	}
	return out, nil
}

// Close closes the meter; later calls return an error. A second Close returns nil.
func (m *Meter) Close() error {
	m.bench.mu.Lock()
	defer m.bench.mu.Unlock()
	m.closed = true
	return nil
}
