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
	unit     UnitParams
	unlocked bool      // the unlock command was received since the unit was loaded
	ofs      int       // offset trim register
	gain     int       // gain trim register
	resid    float64   // V, settling residual of the linear output at tStep
	tStep    time.Time // time of the last source step
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

// Unit returns the parameters of the unit in the fixture; ok is false when the
// fixture is empty.
func (d *DUT) Unit() (p UnitParams, ok bool) {
	d.bench.mu.Lock()
	defer d.bench.mu.Unlock()
	return d.unit, d.loaded
}

// LoadUnit places unit serial in the fixture: its parameters come from
// Params(serial, bench seed, settings) and its trim registers from the codes last
// stored on this bench, the no-correction codes for a fresh unit (mid-scale 2048 on
// the demo card); a lock is locked again. The serial
// must be non-empty and free of spaces and control characters.
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
	d.unit = Params(serial, b.seed, d.settings)
	d.loaded = true
	d.unlocked = false
	d.ofs, d.gain = d.card.offsetDAC.NoCorrection(), d.card.gainDAC.NoCorrection()
	if c, ok := b.stored[serial]; ok {
		d.ofs, d.gain = c[0], c[1]
	}
	d.resid, d.tStep = 0, b.clock.Now()
	return nil
}

// decay returns the settling residual in V at time t.
func (d *DUT) decay(t time.Time) float64 {
	if d.resid == 0 || d.unit.Tau <= 0 {
		return 0
	}
	dt := max(t.Sub(d.tStep).Seconds(), 0)
	return d.resid * math.Exp(-dt/d.unit.Tau)
}

// step records that the DUT input went from old to new volts at time t: the linear
// output then approaches its new value as exp(−(t'−t)/τ).
func (d *DUT) step(t time.Time, old, new float64) {
	if !d.loaded || old == new {
		return
	}
	cur := d.unit.linear(old, d.ofs, d.gain) + d.decay(t)
	d.resid, d.tStep = 0, t
	if d.unit.Tau > 0 {
		d.resid = cur - d.unit.linear(new, d.ofs, d.gain)
	}
}

// output returns the output in V at time t for input x (V, with source noise) and a
// standard normal draw z for the output noise.
func (d *DUT) output(t time.Time, x, z float64) float64 {
	n := d.unit.Noise * z
	if d.unit.Defect == DefectOpen {
		return n
	}
	return d.unit.rail(d.unit.linear(x, d.ofs, d.gain) + d.decay(t) + n)
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
	locked := p.unlock.prefix != "" && !d.unlocked
	switch {
	case p.serial.is(norm):
		return d.unit.Serial
	case p.firmware.is(norm):
		return c.firmware
	case p.unlock.is(norm):
		d.unlocked = true
		return "OK"
	case p.store.is(norm):
		if locked {
			return "ERR locked"
		}
		d.bench.stored[d.unit.Serial] = [2]int{d.ofs, d.gain}
		return "OK"
	case p.offsetRead.is(norm):
		return formatCode(c.offsetDAC, c.format, d.ofs)
	case p.gainRead.is(norm):
		return formatCode(c.gainDAC, c.format, d.gain)
	}
	for _, w := range []struct {
		t   template
		dac DAC
		reg *int
	}{{p.offsetWrite, c.offsetDAC, &d.ofs}, {p.gainWrite, c.gainDAC, &d.gain}} {
		text, ok := w.t.match(norm)
		if !ok {
			continue
		}
		if locked {
			return "ERR locked"
		}
		reg, ok := parseCode(w.dac, c.format, text)
		if !ok {
			return "ERR code out of range"
		}
		*w.reg = reg
		return "OK"
	}
	return fmt.Sprintf("ERR unknown command %q", line)
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
		if !r.t.is(norm) {
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
