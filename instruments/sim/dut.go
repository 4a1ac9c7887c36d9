package sim

import (
	"context"
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"
	"time"
	"unicode"

	"trimline/instruments"
)

// DUT is the simulated fixture at sim://dut holding one card at a time, the card its
// settings describe (the BRX-200 bridge amplifier card by default). Its trim port
// speaks the line protocol in the package doc with the card's command templates;
// until LoadUnit places a unit, every command but LID? answers "ERR no unit in
// fixture".
type DUT struct {
	wiring
	settings DUTSettings
	card     card // settings resolved
	port     port // the card's command set, compiled once
	lidOpen  bool // the fixture lid (interlock input) is open

	loaded   bool
	serial   string
	chans    []channel // one per channel of the card; [0] is channel 1
	unlocked bool      // the unlock command was received since the unit was loaded
}

// channel is one analog chain of the unit in the fixture, with its own registers.
type channel struct {
	unit        UnitParams
	ofs, gain   int       // trim registers
	cGain, cOfs float64   // coefficient registers, as the firmware holds them (offset in its unit)
	cTCO, cTCG  float64   // temperature coefficient registers, in their units per °C
	resid       float64   // settling residual of the linear output at tStep (V or A)
	tStep       time.Time // time of the last step of this channel's input
}

// stored is what a unit keeps in non-volatile memory, per channel.
type stored struct {
	regs  [][2]int     // {offset, gain} trim codes
	coefs [][2]float64 // {gain, offset} coefficients
	tcs   [][2]float64 // {TCO, TCG} temperature coefficients
}

var (
	_ instruments.TrimPort      = (*DUT)(nil)
	_ instruments.Identifier    = (*DUT)(nil)
	_ instruments.FixtureLoader = (*DUT)(nil)
	_ instruments.ClockSource   = (*DUT)(nil)
)

// newDUT returns the fixture for settings s, compiling its command set.
func newDUT(w wiring, s DUTSettings, lidOpen bool) (*DUT, error) {
	c := s.card()
	if _, err := s.Coef.resolve(c.output); err != nil {
		return nil, err
	}
	p, err := compilePort(c)
	if err != nil {
		return nil, err
	}
	return &DUT{wiring: w, settings: s, card: c, port: p, lidOpen: lidOpen}, nil
}

// Firmware is the firmware id every simulated unit reports to FW? unless the
// firmware setting says otherwise.
const Firmware = "BRX200-FW 2.3.1"

// ReplyError is an "ERR …" reply of the trim port.
type ReplyError struct {
	Line  string // the line sent, without terminator
	Reply string // the reply, e.g. "ERR code out of range"
}

// Error returns the line and the reply.
func (e *ReplyError) Error() string { return fmt.Sprintf("sim dut: %q: %s", e.Line, e.Reply) }

var errDUTClosed = errors.New("sim dut: closed")

// Clock returns the bench clock.
func (d *DUT) Clock() instruments.Clock { return d.bench.clock }

// Settings returns the parsed DUT settings the fixture derives units with.
func (d *DUT) Settings() DUTSettings { return d.settings }

// Unit returns the parameters of the unit in the fixture (of its channel 1); ok is
// false when the fixture is empty.
func (d *DUT) Unit() (p UnitParams, ok bool) {
	return d.Channel(1)
}

// Channel returns the parameters of channel k (1-based) of the unit in the fixture;
// ok is false when the fixture is empty or the card has no channel k.
func (d *DUT) Channel(k int) (p UnitParams, ok bool) {
	d.bench.mu.Lock()
	defer d.bench.mu.Unlock()
	if !d.loaded || k < 1 || k > len(d.chans) {
		return UnitParams{}, false
	}
	return d.chans[k-1].unit, true
}

// Channels returns the number of channels of the card (the channels setting, 1).
func (d *DUT) Channels() int { return d.card.channels }

// LoadUnit places unit serial in the fixture: the parameters of its channel k come
// from ChannelParams(serial, k, bench seed, settings) and its trim registers and
// coefficients from what it last stored on this bench; a fresh unit starts with the
// no-correction codes (mid-scale 2048 on the demo card), gain coefficient 1 and
// offset coefficient 0. A lock is locked again. The serial must be non-empty and free
// of spaces and control characters.
func (d *DUT) LoadUnit(ctx context.Context, serial string) error {
	var invalid error
	if serial == "" || strings.IndexFunc(serial, func(r rune) bool { return unicode.IsSpace(r) || unicode.IsControl(r) }) >= 0 {
		invalid = fmt.Errorf("sim dut: serial %q: expected a non-empty serial without spaces or control characters", serial)
	}
	b := d.bench
	b.mu.Lock()
	defer b.mu.Unlock()
	if err := d.start(ctx, "load unit", invalid); err != nil {
		return err
	}
	d.loaded, d.serial, d.unlocked = true, serial, false
	d.chans = make([]channel, d.card.channels)
	st, ok := b.stored[serial]
	for i := range d.chans {
		c := &d.chans[i]
		c.unit = ChannelParams(serial, i+1, b.seed, d.settings)
		c.ofs, c.gain = d.card.offsetDAC.NoCorrection(), d.card.gainDAC.NoCorrection()
		c.cGain, c.cOfs = 1, 0
		c.cTCO, c.cTCG = 0, 0
		if ok && i < len(st.regs) {
			c.ofs, c.gain = st.regs[i][0], st.regs[i][1]
			c.cGain, c.cOfs = st.coefs[i][0], st.coefs[i][1]
			c.cTCO, c.cTCG = st.tcs[i][0], st.tcs[i][1]
		}
		c.resid, c.tStep = 0, b.clock.Now()
	}
	return nil
}

// decay returns the settling residual at time t.
func (c *channel) decay(t time.Time) float64 {
	if c.resid == 0 || c.unit.Tau <= 0 {
		return 0
	}
	dt := max(t.Sub(c.tStep).Seconds(), 0)
	return c.resid * math.Exp(-dt/c.unit.Tau)
}

// step records that the input of every channel went from old[k] to new[k] volts
// at time t: the linear output of a channel whose input moved then approaches its
// new value as exp(−(t'−t)/τ).
func (d *DUT) step(t time.Time, old, new []float64) {
	if !d.loaded {
		return
	}
	for i := range d.chans {
		c := &d.chans[i]
		if old[i] == new[i] {
			continue
		}
		dT := d.dT(t)
		cur := c.unit.linearAt(old[i], c.ofs, c.gain, dT) + c.decay(t)
		c.resid, c.tStep = 0, t
		if c.unit.Tau > 0 {
			c.resid = cur - c.unit.linearAt(new[i], c.ofs, c.gain, dT)
		}
	}
}

// output returns channel k's (0-based) output at time t for input x (V, with
// source noise) and a standard normal draw z for the output noise: in V or A as the
// card's output is (a reported card: V at its converter, without the firmware
// correction, which digitise applies). The coefficients act before the rails.
func (d *DUT) output(t time.Time, k int, x, z float64) float64 {
	c := &d.chans[k]
	n := c.unit.Noise * z
	if c.unit.Defect == DefectOpen {
		return n
	}
	y := c.unit.linearAt(x, c.ofs, c.gain, d.dT(t)) + c.decay(t)
	if d.card.output == OutputReported {
		return c.unit.rail(y + n)
	}
	cf := d.card.coef
	if cf.use != "" {
		y = c.cGain*y + cf.offsetSI(c.cOfs, d.card.adcLSB)
	}
	if cf.tcUse != "" {
		y = cf.tcCorrect(y, d.sensor(t), c.cTCO, c.cTCG, d.card.outputAtZero, d.card.adcLSB)
	}
	return c.unit.rail(y + n)
}

// Temperature returns the true temperature of the unit in the fixture in °C (the
// fixture's when empty): it lags the chamber's, or is the ambient setting without
// a chamber.
func (d *DUT) Temperature() float64 {
	d.bench.mu.Lock()
	defer d.bench.mu.Unlock()
	_, _, td := d.bench.therm.at(d.bench.clock.Now())
	return td
}

// dT returns the unit's temperature at t minus TCRef. Called with the bench lock
// held.
func (d *DUT) dT(t time.Time) float64 {
	_, _, td := d.bench.therm.at(t)
	return td - TCRef
}

// sensor returns the reading of the unit's own temperature sensor at t: its
// temperature plus its sensor offset, to 0.01 °C.
func (d *DUT) sensor(t time.Time) float64 {
	return math.Round((d.dT(t)+TCRef+d.chans[0].unit.SensorOffset)*100) / 100
}

// digitise returns the count a reported card answers for channel k's (0-based)
// output y (V at its converter): round((gain·y + offset)/adc_lsb), clamped to the
// converter's signed range.
func (d *DUT) digitise(k int, y float64) int64 {
	c := &d.chans[k]
	if d.card.coef.use != "" {
		y = c.cGain*y + d.card.coef.offsetSI(c.cOfs, d.card.adcLSB)
	}
	if cf := d.card.coef; cf.tcUse != "" {
		y = cf.tcCorrect(y, d.sensor(d.bench.clock.Now()), c.cTCO, c.cTCG, d.card.outputAtZero, d.card.adcLSB)
	}
	n := math.Round(y / d.card.adcLSB)
	lo, hi := -math.Ldexp(1, d.card.adcBits-1), math.Ldexp(1, d.card.adcBits-1)-1
	return int64(max(lo, min(hi, n)))
}

// SetLid opens or closes the fixture lid, the interlock input that LID? reports.
func (d *DUT) SetLid(open bool) {
	d.bench.mu.Lock()
	defer d.bench.mu.Unlock()
	d.lidOpen = open
}

// LidOpen reports whether the fixture lid is open.
func (d *DUT) LidOpen() bool {
	d.bench.mu.Lock()
	defer d.bench.mu.Unlock()
	return d.lidOpen
}

// reply answers one line of the trim port protocol. Called with the bench lock held.
func (d *DUT) reply(line string) string {
	norm := normLine(line)
	if norm == "LID?" {
		if d.lidOpen {
			return "OPEN"
		}
		return "CLOSED"
	}
	if !d.loaded {
		return "ERR no unit in fixture"
	}
	p, c := &d.port, &d.card
	locked := p.unlock.re != nil && !d.unlocked
	is := func(t template) bool { _, _, ok := t.match(norm); return ok }
	switch {
	case is(p.serial):
		return d.serial
	case is(p.temp):
		return strconv.FormatFloat(d.sensor(d.bench.clock.Now()), 'f', 2, 64)
	case is(p.firmware):
		return c.firmware
	case is(p.unlock):
		d.unlocked = true
		return "OK"
	case is(p.store):
		if locked {
			return "ERR locked"
		}
		st := stored{regs: make([][2]int, len(d.chans)), coefs: make([][2]float64, len(d.chans)),
			tcs: make([][2]float64, len(d.chans))}
		for i, ch := range d.chans {
			st.regs[i] = [2]int{ch.ofs, ch.gain}
			st.coefs[i] = [2]float64{ch.cGain, ch.cOfs}
			st.tcs[i] = [2]float64{ch.cTCO, ch.cTCG}
		}
		d.bench.stored[d.serial] = st
		return "OK"
	}
	// Per-channel reads.
	for _, r := range []struct {
		t      template
		answer func(k int) string
	}{
		{p.offsetRead, func(k int) string { return formatCode(c.offsetDAC, c.format, d.chans[k].ofs) }},
		{p.gainRead, func(k int) string { return formatCode(c.gainDAC, c.format, d.chans[k].gain) }},
		{p.coefGainRead, func(k int) string { t, _, _ := c.coef.gain.Encode(d.chans[k].cGain); return t }},
		{p.coefOffsetRead, func(k int) string { t, _, _ := c.coef.offset.Encode(d.chans[k].cOfs); return t }},
		{p.tcoRead, func(k int) string { t, _, _ := c.coef.tcOffset.Encode(d.chans[k].cTCO); return t }},
		{p.tcgRead, func(k int) string { t, _, _ := c.coef.tcGain.Encode(d.chans[k].cTCG); return t }},
		{p.read, func(k int) string {
			t := d.bench.clock.Now()
			return strconv.FormatInt(d.digitise(k, d.bench.sample(t, k)), 10)
		}},
	} {
		if _, ch, ok := r.t.match(norm); ok {
			k, errReply := d.channelOf(ch)
			if errReply != "" {
				return errReply
			}
			return r.answer(k)
		}
	}
	// Per-channel writes.
	for _, w := range []struct {
		t   template
		set func(k int, text string) bool // false: malformed or out of range
		bad string
	}{
		{p.offsetWrite, func(k int, text string) bool {
			reg, ok := parseCode(c.offsetDAC, c.format, text)
			if ok {
				d.chans[k].ofs = reg
			}
			return ok
		}, "ERR code out of range"},
		{p.gainWrite, func(k int, text string) bool {
			reg, ok := parseCode(c.gainDAC, c.format, text)
			if ok {
				d.chans[k].gain = reg
			}
			return ok
		}, "ERR code out of range"},
		{p.coefGainWrite, func(k int, text string) bool {
			v, err := c.coef.gain.Decode(text)
			if err == nil {
				d.chans[k].cGain = v
			}
			return err == nil
		}, "ERR value out of range"},
		{p.coefOffsetWrite, func(k int, text string) bool {
			v, err := c.coef.offset.Decode(text)
			if err == nil {
				d.chans[k].cOfs = v
			}
			return err == nil
		}, "ERR value out of range"},
		{p.tcoWrite, func(k int, text string) bool {
			v, err := c.coef.tcOffset.Decode(text)
			if err == nil {
				d.chans[k].cTCO = v
			}
			return err == nil
		}, "ERR value out of range"},
		{p.tcgWrite, func(k int, text string) bool {
			v, err := c.coef.tcGain.Decode(text)
			if err == nil {
				d.chans[k].cTCG = v
			}
			return err == nil
		}, "ERR value out of range"},
	} {
		text, ch, ok := w.t.match(norm)
		if !ok {
			continue
		}
		if locked {
			return "ERR locked"
		}
		k, errReply := d.channelOf(ch)
		if errReply != "" {
			return errReply
		}
		if !w.set(k, text) {
			return w.bad
		}
		return "OK"
	}
	return fmt.Sprintf("ERR unknown command %q", line)
}

// channelOf returns the 0-based channel a command names ("" when its template has
// no {channel}: the channel the switch routes, channel 1 when none is routed), or
// the reply to a channel the card does not have.
func (d *DUT) channelOf(text string) (int, string) {
	if text == "" {
		return max(d.bench.route, 0), ""
	}
	k, err := strconv.Atoi(text)
	if err != nil || k < 1 || k > len(d.chans) {
		return 0, "ERR channel out of range"
	}
	return k - 1, ""
}

// MisreadCode returns reply, the port's answer to line, with its code one higher
// (wrapping at the register's width) when line is a register read: the served
// simulator's read-back fault. ok is false for any other line or a reply that is no
// code. It reads the fixture's settings only, so it is safe beside any call.
func (d *DUT) MisreadCode(line, reply string) (misread string, ok bool) {
	norm := normLine(line)
	c := &d.card
	for _, r := range []struct {
		t   template
		dac DAC
	}{{d.port.offsetRead, c.offsetDAC}, {d.port.gainRead, c.gainDAC}} {
		if _, _, ok := r.t.match(norm); !ok {
			continue
		}
		reg, ok := parseCode(r.dac, c.format, reply)
		if !ok {
			return "", false
		}
		return formatCode(r.dac, c.format, (reg+1)&r.dac.MaxRegister()), true
	}
	return "", false
}

// exchange sends one line and returns the reply.
func (d *DUT) exchange(ctx context.Context, line string) (string, error) {
	d.bench.mu.Lock()
	defer d.bench.mu.Unlock()
	if err := d.start(ctx, strconv.Quote(line), nil); err != nil {
		return "", err
	}
	return d.reply(line), nil
}

// trimLine removes the line terminator ("\n" or "\r\n") and surrounding spaces.
func trimLine(line string) string { return strings.TrimSpace(line) }

// Command sends one line and returns nil on "OK", a *ReplyError on "ERR …", and an
// error naming the reply on anything else (a query sent as a command).
func (d *DUT) Command(ctx context.Context, line string) error {
	line = trimLine(line)
	r, err := d.exchange(ctx, line)
	switch {
	case err != nil:
		return err
	case r == "OK":
		return nil
	case strings.HasPrefix(r, "ERR"):
		return &ReplyError{Line: line, Reply: r}
	}
	return fmt.Errorf("sim dut: %q: expected OK, got %q", line, r)
}

// Query sends one line and returns the reply line; an "ERR …" reply is a *ReplyError.
func (d *DUT) Query(ctx context.Context, line string) (string, error) {
	line = trimLine(line)
	r, err := d.exchange(ctx, line)
	if err != nil {
		return "", err
	}
	if strings.HasPrefix(r, "ERR") {
		return "", &ReplyError{Line: line, Reply: r}
	}
	return r, nil
}

// Identify returns the identity of the unit in the fixture (serial and firmware from
// the card's serial and firmware commands, SN? and FW? on the demo card); an empty
// fixture is an error.
func (d *DUT) Identify(ctx context.Context) (instruments.Identity, error) {
	sn, err := d.Query(ctx, d.card.proto.Serial)
	if err != nil {
		return instruments.Identity{}, err
	}
	fw, err := d.Query(ctx, d.card.proto.Firmware)
	if err != nil {
		return instruments.Identity{}, err
	}
	return instruments.Identity{Maker: Maker, Model: "BRX-200", Serial: sn, Firmware: fw}, nil
}

// Close closes the fixture; later calls return an error. A second Close returns nil.
func (d *DUT) Close() error {
	d.bench.mu.Lock()
	defer d.bench.mu.Unlock()
	d.closed = true
	return nil
}
