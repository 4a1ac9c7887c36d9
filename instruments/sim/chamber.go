package sim

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/cmplx"
	"math/rand/v2"
	"time"

	"trimline/instruments"
	"trimline/instruments/units"
)

// chamberConfig is the parsed settings of sim://chamber.
type chamberConfig struct {
	ambient   float64 // °C, power-on temperature and set point; 25 °C
	tau       float64 // s, time constant of the response's envelope; 90 s
	overshoot float64 // fraction of a step the response overshoots by, 0 < overshoot < 1; 0.08
	noise     float64 // °C rms per read; 0.05 °C
	min, max  float64 // °C, the set points it accepts; −40 °C … 150 °C
	band      float64 // °C, the band its stable flag judges; 0.3 °C
}

func defaultChamber() chamberConfig {
	return chamberConfig{ambient: 25, tau: 90, overshoot: 0.08, noise: 0.05, min: -40, max: 150, band: 0.3}
}

// Damping returns the damping ratio ζ of a second-order response whose step
// overshoots by the fraction mp (0 < mp < 1): mp = exp(−ζπ/√(1−ζ²)), so
// ζ = −ln mp / √(π² + ln² mp). 0.08 gives ζ ≈ 0.6266.
func Damping(mp float64) float64 {
	l := math.Log(mp)
	return -l / math.Sqrt(math.Pi*math.Pi+l*l)
}

// thermal is the temperature state of a bench: the chamber's second-order response
// and the DUT's first-order lag behind it, kept as their values at t0 and worked
// out in closed form for any later time.
type thermal struct {
	t0     time.Time
	sp     float64 // °C, the set point since t0
	e0, v0 float64 // chamber temperature − sp (°C) and its rate (°C/s) at t0
	dut0   float64 // °C, the DUT's temperature at t0
	sigma  float64 // 1/s, the envelope's decay rate 1/tau
	omega  float64 // rad/s, the damped angular frequency
	dutTau float64 // s, the DUT's lag; 0 = it follows at once
}

// at returns the chamber's temperature (°C), its rate (°C/s) and the DUT's
// temperature (°C) at time t (not before t0).
//
// With λ = −σ + iω the chamber's deviation from the set point is e(t) = Re(A·e^{λt}),
// A = e0 − i·(v0 + σ·e0)/ω. The DUT obeys T' = (sp + e − T)/τd, whose solution is
// T(t) = sp + Re(K·e^{λt}) + (T0 − sp − Re K)·e^{−t/τd} with K = A/(1 + λτd).
func (s *thermal) at(t time.Time) (chamber, rate, dut float64) {
	dt := max(t.Sub(s.t0).Seconds(), 0)
	lam := complex(-s.sigma, s.omega)
	a := complex(s.e0, -(s.v0+s.sigma*s.e0)/s.omega)
	ex := cmplx.Exp(lam * complex(dt, 0))
	chamber = s.sp + real(a*ex)
	rate = real(a * lam * ex)
	if s.dutTau <= 0 {
		return chamber, rate, chamber
	}
	k := a / (1 + lam*complex(s.dutTau, 0))
	dut = s.sp + real(k*ex) + (s.dut0-s.sp-real(k))*math.Exp(-dt/s.dutTau)
	return chamber, rate, dut
}

// envelope returns the bound e^{−σt}·|A| on the chamber's deviation from its set
// point from t on.
func (s *thermal) envelope(t time.Time) float64 {
	dt := max(t.Sub(s.t0).Seconds(), 0)
	a := complex(s.e0, -(s.v0+s.sigma*s.e0)/s.omega)
	return cmplx.Abs(a) * math.Exp(-s.sigma*dt)
}

// retarget rebases the state at t on a new set point sp: the chamber's temperature
// and rate and the DUT's temperature carry on from where they are.
func (s *thermal) retarget(t time.Time, sp float64) {
	c, v, d := s.at(t)
	s.t0, s.sp, s.e0, s.v0, s.dut0 = t, sp, c-sp, v, d
}

// Chamber is the simulated temperature chamber at sim://chamber (model TC-150). It
// holds the unit in the fixture at its set point with a damped second-order
// response on the bench clock; see the package doc.
type Chamber struct {
	wiring
	cfg   chamberConfig
	noise *rand.Rand
}

var (
	_ instruments.Thermal        = (*Chamber)(nil)
	_ instruments.StableReporter = (*Chamber)(nil)
	_ instruments.Identifier     = (*Chamber)(nil)
	_ instruments.ClockSource    = (*Chamber)(nil)
	_ instruments.Resetter       = (*Chamber)(nil)
)

var errChamberClosed = errors.New("sim chamber: closed")

func newChamber(b *Bench, c config) *Chamber {
	return &Chamber{
		wiring: wiring{bench: b, latency: c.latency, name: "sim chamber", errClosed: errChamberClosed},
		cfg:    c.chamber,
		noise:  streamRand("chamber", b.seed),
	}
}

// Clock returns the bench clock.
func (c *Chamber) Clock() instruments.Clock { return c.bench.clock }

// SetTemperature programs the set point; one outside min..max is refused and the
// set point stays. Setting the temperature works after Close too, like a source's
// switch-off, so the engine can always return the chamber to a safe temperature.
func (c *Chamber) SetTemperature(ctx context.Context, celsius float64) error {
	var invalid error
	if math.IsNaN(celsius) || celsius < c.cfg.min || celsius > c.cfg.max {
		invalid = fmt.Errorf("sim chamber: set point %g °C: expected %g °C to %g °C", celsius, c.cfg.min, c.cfg.max)
	}
	b := c.bench
	b.mu.Lock()
	defer b.mu.Unlock()
	if c.closed {
		if invalid != nil {
			return invalid
		}
		b.therm.retarget(b.clock.Now(), celsius)
		return nil
	}
	if err := c.start(ctx, fmt.Sprintf("set point %g °C", celsius), invalid); err != nil {
		return err
	}
	b.therm.retarget(b.clock.Now(), celsius)
	return nil
}

// SetPoint returns the present set point in °C.
func (c *Chamber) SetPoint() float64 {
	c.bench.mu.Lock()
	defer c.bench.mu.Unlock()
	return c.bench.therm.sp
}

// Temperature reads the chamber's temperature in °C with its read noise.
func (c *Chamber) Temperature(ctx context.Context) (float64, error) {
	b := c.bench
	b.mu.Lock()
	defer b.mu.Unlock()
	if err := c.start(ctx, "temperature", nil); err != nil {
		return 0, err
	}
	tc, _, _ := b.therm.at(b.clock.Now())
	return tc + c.cfg.noise*c.noise.NormFloat64(), nil
}

// True returns the chamber's and the DUT's noiseless temperatures in °C now.
func (c *Chamber) True() (chamber, dut float64) {
	b := c.bench
	b.mu.Lock()
	defer b.mu.Unlock()
	tc, _, td := b.therm.at(b.clock.Now())
	return tc, td
}

// Stable reports whether the chamber has settled: the bound on its deviation from
// the set point (the decaying envelope of its response) is inside band, so it will
// not leave the band again.
func (c *Chamber) Stable(ctx context.Context) (bool, error) {
	b := c.bench
	b.mu.Lock()
	defer b.mu.Unlock()
	if err := c.start(ctx, "stable", nil); err != nil {
		return false, err
	}
	return b.therm.envelope(b.clock.Now()) <= c.cfg.band, nil
}

// Reset programs the set point to ambient.
func (c *Chamber) Reset(ctx context.Context) error { return c.SetTemperature(ctx, c.cfg.ambient) }

// Identify returns the chamber's invented identity.
func (c *Chamber) Identify(ctx context.Context) (instruments.Identity, error) {
	return c.identify(ctx, "TC-150", "TC")
}

// Close closes the chamber; later calls but SetTemperature return an error. A
// second Close returns nil.
func (c *Chamber) Close() error {
	c.bench.mu.Lock()
	defer c.bench.mu.Unlock()
	c.closed = true
	return nil
}

// newThermal returns the resting thermal state of a bench at time t: without a
// chamber the DUT sits at ambient (the DUT's setting).
func newThermal(t time.Time, ch *chamberConfig, ambient, dutTau float64) thermal {
	s := thermal{t0: t, sp: ambient, dut0: ambient, sigma: 1, omega: 1, dutTau: dutTau}
	if ch != nil {
		z := Damping(ch.overshoot)
		s.sp, s.dut0 = ch.ambient, ch.ambient
		s.sigma = 1 / ch.tau
		s.omega = s.sigma * math.Sqrt(1-z*z) / z
	}
	return s
}

func (c *chamberConfig) setters() map[string]setter {
	return map[string]setter{
		"ambient": quantityOf(&c.ambient, units.Celsius),
		"tau":     positiveOf(&c.tau, units.Second),
		"overshoot": func(k, val string) (err error) {
			// A plain fraction (0.08) or a ratio with its unit (8 %).
			if c.overshoot, err = plain(k, val); err != nil {
				c.overshoot, err = quantity(k, val, units.Ratio)
			}
			return err
		},
		"noise": nonNegativeOf(&c.noise, units.Celsius),
		"min":   quantityOf(&c.min, units.Celsius),
		"max":   quantityOf(&c.max, units.Celsius),
		"band":  positiveOf(&c.band, units.Celsius),
	}
}

// check checks what no single key can.
func (c *chamberConfig) check() error {
	switch {
	case !(c.overshoot > 0 && c.overshoot < 1):
		return settingErr("overshoot", "%g: expected a fraction more than 0 and less than 1 (e.g. 8 %%)", c.overshoot)
	case !(c.min < c.max):
		return settingErr("max", "%g °C: expected more than min (%g °C)", c.max, c.min)
	case c.ambient < c.min || c.ambient > c.max:
		return settingErr("ambient", "%g °C: expected inside min..max (%g °C to %g °C)", c.ambient, c.min, c.max)
	}
	return nil
}
