package sim

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"net/url"
	"strings"
	"sync"
	"time"

	"trimline/instruments"
)

// Bench is one simulated bench: up to one source, one DUT fixture and one switch and
// any number of meters, wired together (the source drives the DUT input, a meter
// reads the DUT output, or with probe: supply the unit's supply current; with a
// switch, of the channel it routes), on one clock. All its instruments share one mutex, so each call is atomic; the
// bench is meant to be driven from one goroutine at a time.
type Bench struct {
	mu     sync.Mutex
	clock  instruments.Clock
	seed   uint64
	noise  *rand.Rand // reading noise, one stream per bench
	source *Source
	meter  *Meter                   // the first meter
	meters []*Meter                 // every meter, in the order of the specs
	insts  []instruments.Instrument // the instrument of each spec, in order
	dut    *DUT
	sw     *Switch
	ch     *Chamber
	therm  thermal           // the chamber's and the unit's temperatures
	route  int               // 0-based channel wired to source and meter; −1 = none (switch released)
	stored map[string]stored // serial → what the unit stored in non-volatile memory
}

// virtualClock is simulated time: Sleep advances it at once.
type virtualClock struct {
	mu  sync.Mutex
	now time.Time
}

// Now returns the simulated time.
func (c *virtualClock) Now() time.Time {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.now
}

// Sleep advances the simulated time by d (nothing for d ≤ 0) and returns at once,
// or returns ctx.Err() without advancing when ctx is already done.
func (c *virtualClock) Sleep(ctx context.Context, d time.Duration) error {
	if err := ctx.Err(); err != nil {
		return err
	}
	if d > 0 {
		c.mu.Lock()
		c.now = c.now.Add(d)
		c.mu.Unlock()
	}
	return nil
}

// model returns the instrument model an address names: "source", "meter" or "dut".
func model(addr *url.URL) (string, error) {
	bad := fmt.Errorf("address %q: expected sim://source, sim://meter, sim://dut, sim://switch or sim://chamber", addr.String())
	if addr.Scheme != "sim" || addr.Opaque != "" || addr.User != nil || addr.Port() != "" ||
		(addr.Path != "" && addr.Path != "/") || addr.RawQuery != "" || addr.Fragment != "" {
		return "", bad
	}
	switch h := strings.ToLower(addr.Hostname()); h {
	case modelSource, modelMeter, modelDUT, modelSwitch, modelChamber:
		return h, nil
	}
	return "", bad
}

func specModel(s instruments.Spec) (string, error) {
	u, err := url.Parse(s.Address)
	if err != nil {
		return "", fmt.Errorf("address %q: %w", s.Address, err)
	}
	return model(u)
}

// NewBench opens a bench with one instrument per spec (at most one of each of
// sim://source, sim://dut, sim://switch and sim://chamber, any number of
// sim://meter), wired
// together. Bench-wide settings (seed, time, start) may appear in any spec;
// conflicting values give a *instruments.SettingError.
func NewBench(specs []instruments.Spec) (*Bench, error) {
	if len(specs) == 0 {
		return nil, errors.New("sim: a bench needs at least one instrument")
	}
	cfgs := make([]config, len(specs))
	var bk benchKeys
	var from [3]int // index of the spec that set seed, time, start
	for i, s := range specs {
		m, err := specModel(s)
		if err != nil {
			return nil, err
		}
		c, err := parseSettings(m, s.Settings, s.Dir)
		if err != nil {
			return nil, fmt.Errorf("%s: %w", s.Address, err)
		}
		for j := range i {
			if cfgs[j].model == m && m != modelMeter {
				return nil, fmt.Errorf("sim: two instruments at sim://%s on one bench", m)
			}
		}
		cfgs[i] = c
		b := c.bench
		if b.seedSet {
			if bk.seedSet && bk.seed != b.seed {
				return nil, conflict("seed", specs[from[0]], s)
			}
			bk.seed, bk.seedSet, from[0] = b.seed, true, i
		}
		if b.timeSet {
			if bk.timeSet && bk.real != b.real {
				return nil, conflict("time", specs[from[1]], s)
			}
			bk.real, bk.timeSet, from[1] = b.real, true, i
		}
		if b.startSet {
			if bk.startSet && !bk.start.Equal(b.start) {
				return nil, conflict("start", specs[from[2]], s)
			}
			bk.start, bk.startSet, from[2] = b.start, true, i
		}
	}
	if bk.real && bk.startSet {
		return nil, settingErr("start", "applies only to time: simulated")
	}
	seed := uint64(1)
	if bk.seedSet {
		seed = bk.seed
	}
	b := &Bench{seed: seed, noise: streamRand("noise", seed), stored: map[string]stored{}}
	switch {
	case bk.real:
		b.clock = instruments.RealClock{}
	case bk.startSet:
		b.clock = &virtualClock{now: bk.start}
	default:
		b.clock = &virtualClock{now: time.Now().Truncate(time.Millisecond)}
	}
	for _, c := range cfgs {
		switch c.model {
		case modelSource:
			b.source = newSource(b, c)
		case modelMeter:
			m := newMeter(b, c, len(b.meters))
			if b.meter == nil {
				b.meter = m
			}
			b.meters = append(b.meters, m)
		case modelDUT:
			d, err := newDUT(wiring{bench: b, latency: c.latency, name: "sim dut", errClosed: errDUTClosed},
				c.dut, c.lidOpen)
			if err != nil {
				return nil, err
			}
			b.dut = d
		case modelSwitch:
			b.sw = &Switch{wiring: wiring{bench: b, latency: c.latency, name: "sim switch", errClosed: errSwitchClosed}}
		case modelChamber:
			b.ch = newChamber(b, c)
		}
	}
	dut := DefaultDUTSettings()
	if b.dut != nil {
		dut = b.dut.settings
	}
	var chc *chamberConfig
	if b.ch != nil {
		chc = &b.ch.cfg
	}
	b.therm = newThermal(b.clock.Now(), chc, dut.Ambient, dut.ThermalTau)
	if b.sw != nil {
		b.route = -1 // a multiplexer powers up with every path open
	}
	nm := 0
	for _, c := range cfgs {
		switch c.model {
		case modelSource:
			b.insts = append(b.insts, b.source)
		case modelMeter:
			b.insts = append(b.insts, b.meters[nm])
			nm++
		case modelDUT:
			b.insts = append(b.insts, b.dut)
		case modelSwitch:
			b.insts = append(b.insts, b.sw)
		case modelChamber:
			b.insts = append(b.insts, b.ch)
		}
	}
	return b, nil
}

// conflict reports a bench-wide key set differently in two specs.
func conflict(key string, first, second instruments.Spec) error {
	return settingErr(key, "conflicting bench-wide values %q (%s) and %q (%s)",
		first.Settings[key], first.Address, second.Settings[key], second.Address)
}

// instrument returns the bench's instrument for a spec's address.
func (b *Bench) instrument(s instruments.Spec) instruments.Instrument {
	m, _ := specModel(s)
	switch m {
	case modelSource:
		return b.source
	case modelMeter:
		return b.meter
	case modelSwitch:
		return b.sw
	case modelChamber:
		return b.ch
	}
	return b.dut
}

// Switch returns the bench's switch, nil if it has none.
func (b *Bench) Switch() *Switch { return b.sw }

// Chamber returns the bench's chamber, nil if it has none.
func (b *Bench) Chamber() *Chamber { return b.ch }

// Source returns the bench's source, nil if it has none.
func (b *Bench) Source() *Source { return b.source }

// Meter returns the bench's (first) meter, nil if it has none.
func (b *Bench) Meter() *Meter { return b.meter }

// Meters returns every meter of the bench in the order of the specs.
func (b *Bench) Meters() []*Meter { return append([]*Meter(nil), b.meters...) }

// Instrument returns the instrument opened for specs[i] of NewBench.
func (b *Bench) Instrument(i int) instruments.Instrument { return b.insts[i] }

// DUT returns the bench's DUT fixture, nil if it has none.
func (b *Bench) DUT() *DUT { return b.dut }

// Clock returns the bench clock: simulated unless the bench was opened with
// time: real.
func (b *Bench) Clock() instruments.Clock { return b.clock }

// Seed returns the bench-wide seed.
func (b *Bench) Seed() uint64 { return b.seed }

// Close closes every instrument of the bench. It is safe to call more than once.
func (b *Bench) Close() error {
	if b.source != nil {
		b.source.Close()
	}
	for _, m := range b.meters {
		m.Close()
	}
	if b.dut != nil {
		b.dut.Close()
	}
	if b.sw != nil {
		b.sw.Close()
	}
	if b.ch != nil {
		b.ch.Close()
	}
	return nil
}

// wiring is what every instrument of a bench shares: the bench it is wired into, its
// command latency and whether it is closed. Its methods are called with the bench
// lock held.
type wiring struct {
	bench     *Bench
	latency   time.Duration
	name      string // the prefix of its errors, e.g. "sim source"
	errClosed error  // what every call but a switch-off returns after Close
	closed    bool
}

// start begins one command: it fails with errClosed after Close, then with invalid
// (the caller's verdict on the request; nil when the request is good), and then lets
// the command latency pass on the bench clock. A done ctx fails as "<name>: <what>:
// <ctx error>" and lets no time pass.
func (w *wiring) start(ctx context.Context, what string, invalid error) error {
	w.bench.watchdog()
	if w.closed {
		return w.errClosed
	}
	if invalid != nil {
		return invalid
	}
	if err := w.bench.advance(ctx, w.latency); err != nil {
		return fmt.Errorf("%s: %s: %w", w.name, what, err)
	}
	return nil
}

// identify returns the invented identity of a bench instrument: model, and a serial
// of prefix and the last six digits of the bench seed.
func (w *wiring) identify(ctx context.Context, model, prefix string) (instruments.Identity, error) {
	w.bench.mu.Lock()
	defer w.bench.mu.Unlock()
	if err := w.start(ctx, "identify", nil); err != nil {
		return instruments.Identity{}, err
	}
	return instruments.Identity{Maker: Maker, Model: model, Serial: fmt.Sprintf("%s%06d", prefix, w.bench.seed%1000000), Firmware: "1.0"}, nil
}

// advance lets d of bench time pass (a command latency or a meter aperture). Called
// with b.mu held; the clock has its own lock.
func (b *Bench) advance(ctx context.Context, d time.Duration) error {
	if d <= 0 {
		return ctx.Err()
	}
	err := b.clock.Sleep(ctx, d)
	b.watchdog()
	return err
}

// watchdog lets the source's output watchdog act if its time ran out. Called with
// b.mu held whenever the bench is about to be read or changed, and after time
// passed.
func (b *Bench) watchdog() {
	if b.source != nil {
		b.source.expire(b.clock.Now())
	}
}

// dutInput returns the noiseless voltage in V the source puts on the DUT
// amplifier's input it is wired to: its actual output when it is on (into a
// current-input card, the current through the card's shunt times the shunt),
// else 0 V (the fixture relay shorts the input).
func (b *Bench) dutInput() float64 {
	if b.source == nil {
		return 0
	}
	return b.source.into(b.inputOhms())
}

// inputOhms is the resistance of the DUT's input: the shunt of a current-input
// card, 0 (high impedance) for a voltage input or without a DUT.
func (b *Bench) inputOhms() float64 {
	if b.dut == nil {
		return 0
	}
	return b.dut.card.inputOhms
}

// wired reports whether channel k (0-based) is wired to the source and the meter:
// channel 1 on a bench without a switch, else the channel the switch routes.
func (b *Bench) wired(k int) bool {
	if b.sw == nil {
		return k == 0
	}
	return b.route == k
}

// inputs returns the noiseless input of every channel of the card in V: the source's
// on the wired channel, 0 V (shorted) on the others. Nil without a DUT.
func (b *Bench) inputs() []float64 {
	if b.dut == nil {
		return nil
	}
	in := make([]float64, b.dut.card.channels)
	for k := range in {
		if b.wired(k) {
			in[k] = b.dutInput()
		}
	}
	return in
}

// inputsChanged tells the DUT that its channels' inputs went from old (inputs()
// before the change) to the present values at time t, so they settle.
func (b *Bench) inputsChanged(t time.Time, old []float64) {
	if b.dut != nil {
		b.dut.step(t, old, b.inputs())
	}
}

// sample returns channel k's (0-based) output at time t, with source noise on a
// wired channel and DUT noise. The fixture must hold a unit.
func (b *Bench) sample(t time.Time, k int) float64 {
	x := 0.0
	if b.wired(k) {
		x = b.dutInput()
		if b.source != nil && b.source.on {
			x += b.source.noiseInto(b.inputOhms()) * b.noise.NormFloat64()
		}
	}
	return b.dut.output(t, k, x, b.noise.NormFloat64())
}

// probe returns what the meter's input sees at time t when it measures f: with
// probe: output the wired channel's output if the card's output is of f's kind
// (a voltage card in FuncVoltage, a current card in FuncCurrent), else 0; with
// probe: supply the unit's supply current in FuncCurrent and 0 V in FuncVoltage.
// 0 when the bench has no DUT, the fixture is empty or no channel is routed.
func (b *Bench) probe(t time.Time, f instruments.Function, supply bool) float64 {
	if b.dut == nil || !b.dut.loaded {
		return 0
	}
	if supply {
		if f == instruments.FuncCurrent {
			return b.dut.chans[0].unit.SupplyCurrent
		}
		return 0
	}
	out := b.dut.card.output
	if b.route < 0 || (out == OutputVoltage) != (f == instruments.FuncVoltage) || out == OutputReported {
		return 0
	}
	return b.sample(t, b.route)
}

// uniform returns a value drawn uniformly in ±0.6 (the share of a spec inside which
// instrument errors are drawn).
func uniform(r *rand.Rand) float64 { return 0.6 * (2*r.Float64() - 1) }

// quantise rounds v to a multiple of res (no rounding when res is 0).
func quantise(v, res float64) float64 {
	if res <= 0 {
		return v
	}
	return math.Round(v/res) * res
}
