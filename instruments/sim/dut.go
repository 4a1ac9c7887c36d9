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

// DUT is the simulated fixture at sim://dut holding one BRX-200 bridge amplifier card
// at a time. Its trim port speaks the line protocol in the package doc; until
// LoadUnit places a unit, every command answers "ERR no unit in fixture".
type DUT struct {
	wiring
	settings DUTSettings
	lidOpen  bool // the fixture lid (interlock input) is open

	loaded bool
	unit   UnitParams
	ofs    int       // offset trim register
	gain   int       // gain trim register
	resid  float64   // V, settling residual of the linear output at tStep
	tStep  time.Time // time of the last source step
}

var (
	_ instruments.TrimPort      = (*DUT)(nil)
	_ instruments.Identifier    = (*DUT)(nil)
	_ instruments.FixtureLoader = (*DUT)(nil)
	_ instruments.ClockSource   = (*DUT)(nil)
)

// Firmware is the firmware id every simulated unit reports to FW?.
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
// stored with NV STORE on this bench, mid-scale (2048) for a fresh unit. The serial
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
	d.ofs, d.gain = MidScale, MidScale
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
	return rail(d.unit.linear(x, d.ofs, d.gain) + d.decay(t) + n)
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
	if f := strings.Fields(line); len(f) == 1 && f[0] == "LID?" {
		if d.lidOpen {
			return "OPEN"
		}
		return "CLOSED"
	}
	if !d.loaded {
		return "ERR no unit in fixture"
	}
	f := strings.Fields(line)
	unknown := fmt.Sprintf("ERR unknown command %q", line)
	switch {
	case len(f) == 1 && f[0] == "SN?":
		return d.unit.Serial
	case len(f) == 1 && f[0] == "FW?":
		return Firmware
	case len(f) == 2 && f[0] == "NV" && f[1] == "STORE":
		d.bench.stored[d.unit.Serial] = [2]int{d.ofs, d.gain}
		return "OK"
	case len(f) >= 2 && f[0] == "TRIM" && (f[1] == "OFS" || f[1] == "GAIN" || f[1] == "OFS?" || f[1] == "GAIN?"):
		reg := &d.ofs
		if strings.HasPrefix(f[1], "GAIN") {
			reg = &d.gain
		}
		if strings.HasSuffix(f[1], "?") {
			if len(f) != 2 {
				return unknown
			}
			return strconv.Itoa(*reg)
		}
		if len(f) != 3 {
			return unknown
		}
		c, err := strconv.Atoi(f[2])
		if err != nil || c < 0 || c > MaxCode {
			return "ERR code out of range"
		}
		*reg = c
		return "OK"
	}
	return unknown
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

// Identify returns the identity of the unit in the fixture (serial from SN?,
// firmware from FW?); an empty fixture is an error.
func (d *DUT) Identify(ctx context.Context) (instruments.Identity, error) {
	sn, err := d.Query(ctx, "SN?")
	if err != nil {
		return instruments.Identity{}, err
	}
	fw, err := d.Query(ctx, "FW?")
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
