package sequencer

// The soak step: a thermal role is set to a temperature and the run waits until
// the chamber has stayed within a band of it for a dwell time. The sweeps after
// it carry the temperature it left the unit at.

import (
	"context"
	"fmt"
	"math"
	"strconv"
	"strings"
	"time"

	"trimline/instruments"
	"trimline/instruments/units"
)

func init() {
	RegisterStep(StepKind{Name: "soak", About: "sets a temperature chamber to a set point and waits until it has stayed within a band of it for a dwell time",
		New: func() Step { return new(soakStep) }})
}

// Bounds of a soak step.
const (
	MaxSoakDwell   = 4 * time.Hour
	MaxSoakTimeout = 8 * time.Hour
	MinSoakEvery   = time.Second
	MaxSoakEvery   = 10 * time.Minute
	// DefaultSoakEvery is how often a soak reads the chamber unless every: says.
	DefaultSoakEvery = 10 * time.Second
	// absoluteZero is the lowest temperature there is, °C.
	absoluteZero = -273.15
)

// soakStep is soak as the file writes it.
type soakStep struct {
	Thermal    string          `yaml:"thermal"`
	SetPoint   *units.Quantity `yaml:"set_point"`
	Band       *units.Quantity `yaml:"band"`
	Dwell      *units.Duration `yaml:"dwell"`
	Timeout    *units.Duration `yaml:"timeout"`
	Every      *units.Duration `yaml:"every"`
	UnitSensor *struct {
		Port  string `yaml:"port"`
		Query string `yaml:"query"`
	} `yaml:"unit_sensor"`

	setPoint, band        float64 // °C
	dwell, timeout, every time.Duration
	setPointAt            string // "file:line:col" of set_point, for the caps check
}

// SetPoint is one temperature a step sets a thermal role to, for the station's
// temperature caps.
type SetPoint struct {
	Role    string
	Celsius float64
	Where   string // "file:line:col" of the set point
	Step    string
}

// Thermostat is a step that sets a thermal role: SetPoints lists every
// temperature it will set, so that the station's caps are checked at load.
type Thermostat interface {
	SetPoints() []SetPoint
}

var (
	_ Thermostat = (*soakStep)(nil)
	_ Timed      = (*soakStep)(nil)
)

// SetPoints is the soak's set point.
func (s *soakStep) SetPoints() []SetPoint {
	return []SetPoint{{Role: s.Thermal, Celsius: s.setPoint, Where: s.setPointAt}}
}

// Least is 0: every read of the chamber is an engine step of its own (one
// query), and the waits between them are not under the step deadline.
func (s *soakStep) Least() time.Duration { return 0 }

// Budget is the soak's timeout, the longest it can take; it takes no meter
// readings.
func (s *soakStep) Budget() (time.Duration, int) { return s.timeout, 0 }

func (s *soakStep) Check(c *Checker) {
	if s.Thermal == "" {
		c.Errorf("", "missing required key \"thermal\": the role of the chamber, as the station file binds it (kind: thermal)")
	} else {
		c.Use(s.Thermal, ThermalRole)
	}
	temp := func(key string, q *units.Quantity, example string) (float64, bool) {
		if q == nil {
			c.Errorf("", "missing required key %q, e.g. %s: %s", key, key, example)
			return 0, false
		}
		if q.Dim != units.Celsius || !finite(q.Value) {
			c.Errorf(key, "expected a temperature such as %s", example)
			return 0, false
		}
		return q.Value, true
	}
	if v, ok := temp("set_point", s.SetPoint, "85 °C"); ok {
		if v < absoluteZero {
			c.Errorf("set_point", "expected a temperature above absolute zero (%s), found %s", fmtC(absoluteZero), fmtC(v))
		}
		s.setPoint = v
		s.setPointAt = c.Pos("set_point")
	}
	if v, ok := temp("band", s.Band, "0.5 °C"); ok {
		if !(v > 0) {
			c.Errorf("band", "expected a positive band such as 0.5 °C (the chamber counts as there within ± band of the set point), found %s", fmtC(v))
		}
		s.band = v
	}
	dur := func(key string, d *units.Duration, lo, hi time.Duration, example string) time.Duration {
		if d == nil {
			c.Errorf("", "missing required key %q, e.g. %s: %s", key, key, example)
			return 0
		}
		v := d.D()
		if v < lo || v > hi || v <= 0 {
			c.Errorf(key, "expected a %s from %s to %s, found %s", key, lo, hi, v)
		}
		return v
	}
	s.dwell = dur("dwell", s.Dwell, time.Nanosecond, MaxSoakDwell, "5 min")
	s.timeout = dur("timeout", s.Timeout, time.Nanosecond, MaxSoakTimeout, "1 h")
	s.every = DefaultSoakEvery
	if s.Every != nil {
		s.every = dur("every", s.Every, MinSoakEvery, MaxSoakEvery, "10 s")
	}
	if s.Dwell != nil && s.Timeout != nil && s.timeout <= s.dwell {
		c.Errorf("timeout", "expected a timeout longer than the dwell (%s): the chamber must reach the band and stay there, found %s", s.dwell, s.timeout)
	}
	if s.Dwell != nil && s.every > s.dwell && s.dwell > 0 {
		c.Errorf("every", "expected reads at least as often as the dwell (%s), found every %s: the dwell could not be watched", s.dwell, s.every)
	}
	if us := s.UnitSensor; us != nil {
		us.Port = orDefault(us.Port, RoleDUT)
		c.Use(us.Port, DUTPort)
		if strings.TrimSpace(us.Query) == "" {
			c.Errorf("unit_sensor", "missing required key \"query\": the command that reads the unit's own temperature, e.g. \"TEMP?\"")
		}
	}
}

// Temperature returns the unit's temperature as the last soak before the
// running step left it (°C), and whether there was one.
func (u *Unit) Temperature() (float64, bool) { return u.tempC, u.tempKnown }

func (s *soakStep) Run(ctx context.Context, u *Unit) error {
	switch {
	case u.Predicting():
		// On paper the chamber is where it was set.
		u.tempC, u.tempKnown = s.setPoint, true
		return nil
	case u.Replaying():
		// The temperatures read are facts of the run.
		for _, k := range u.stored.Soaks {
			if k.Step == u.step.Name {
				u.Rec.Soaks = append(u.Rec.Soaks, k)
				u.tempC, u.tempKnown = soakTemperature(k), true
				return nil
			}
		}
		u.End("") // the recorded run ended before this step
		return nil
	}
	k, err := s.soak(ctx, u)
	if k.Started.IsZero() {
		return err
	}
	u.Rec.Soaks = append(u.Rec.Soaks, k)
	if err != nil {
		return err
	}
	if k.TimedOut {
		last := "nothing"
		if n := len(k.Readings); n > 0 {
			last = fmtC(k.Readings[n-1].C)
		}
		return u.Fault("step %q: the %s did not hold %s ± %s for %s within the timeout of %s (last read %s)",
			u.step.Name, s.Thermal, fmtC(s.setPoint), fmtC(s.band), s.dwell, s.timeout, last)
	}
	u.tempC, u.tempKnown = soakTemperature(k), true
	return nil
}

// soakTemperature is the unit's temperature a soak leaves for the sweeps after
// it: its own sensor's mean over the dwell when the soak read it (the reading
// its firmware corrects by), else the chamber's.
func soakTemperature(k Soak) float64 {
	if k.UnitMeanC != nil {
		return *k.UnitMeanC
	}
	return k.MeanC
}

// soak sets the chamber and reads it every s.every on the bench clock until it
// has been within the band for the dwell, or the timeout has passed since the
// set point was programmed. Stable is the time of the first read of the last
// run of reads within the band; the dwell is complete at the first read at
// least s.dwell after it. MeanC and SDC are over that run of reads. Every
// instrument's error queue is read after each read.
func (s *soakStep) soak(ctx context.Context, u *Unit) (Soak, error) {
	k := Soak{Step: u.step.Name, Role: s.Thermal, SetPoint: s.setPoint, Band: s.band, Dwell: s.dwell.Seconds()}
	th, ok := u.e.thermals[s.Thermal]
	if !ok {
		return k, fmt.Errorf("%s is not a temperature chamber", s.Thermal)
	}
	var port instruments.TrimPort
	if s.UnitSensor != nil {
		p, err := u.Port(s.UnitSensor.Port)
		if err != nil {
			return k, err
		}
		port = p
	}
	clock := u.e.clock
	err := u.Do(ctx, func(ctx context.Context) error {
		if err := th.SetTemperature(ctx, s.setPoint); err != nil {
			return u.e.blame(s.Thermal, err.Error(), fmt.Errorf("%s: set %s: %w", s.Thermal, fmtC(s.setPoint), err))
		}
		return nil
	})
	if err != nil {
		return k, err
	}
	k.Started = clock.Now().UTC()
	in := -1 // index of the first read of the run of reads in the band; -1 = out
	for {
		var r TempReading
		err := u.Do(ctx, func(ctx context.Context) error {
			c, err := th.Temperature(ctx)
			if err != nil {
				return u.e.blame(s.Thermal, err.Error(), fmt.Errorf("%s: read temperature: %w", s.Thermal, err))
			}
			r = TempReading{Time: clock.Now().UTC(), C: c}
			if port != nil {
				q := s.UnitSensor.Query
				reply, err := port.Query(ctx, q)
				if err != nil {
					return u.e.blame(s.UnitSensor.Port, err.Error(), fmt.Errorf("%s: %q: %w", s.UnitSensor.Port, q, err))
				}
				v, err := strconv.ParseFloat(strings.TrimSpace(reply), 64)
				if err != nil || !finite(v) {
					return u.Fault("step %q: %s answered %q to %q, expected a temperature in °C", u.step.Name, s.UnitSensor.Port, strings.TrimSpace(reply), q)
				}
				r.UnitC = &v
			}
			// As after a sweep point: an entry in any error queue (a chamber
			// that tripped on over-temperature) is a station fault.
			return u.e.checkErrors(ctx, func() string {
				return fmt.Sprintf("step %q, temperature read %d", u.step.Name, len(k.Readings)+1)
			})
		})
		if err != nil {
			k.Ended = clock.Now().UTC()
			return k, err
		}
		k.Readings = append(k.Readings, r)
		switch {
		case !finite(r.C) || math.Abs(r.C-s.setPoint) > s.band:
			in = -1
		case in < 0:
			in = len(k.Readings) - 1
		case r.UnitC != nil && k.Readings[in].UnitC != nil && math.Abs(*r.UnitC-*k.Readings[in].UnitC) > s.band:
			// The chamber holds, but the unit, which lags it, is still moving:
			// its dwell starts again from here.
			in = len(k.Readings) - 1
		}
		if in >= 0 && r.Time.Sub(k.Readings[in].Time) >= s.dwell {
			k.Stable, k.Ended = k.Readings[in].Time, r.Time
			k.MeanC, k.SDC = meanSD(k.Readings[in:])
			k.UnitMeanC = unitMean(k.Readings[in:])
			return k, nil
		}
		if r.Time.Sub(k.Started) >= s.timeout {
			k.Ended, k.TimedOut = r.Time, true
			return k, nil
		}
		if err := u.Wait(ctx, s.every); err != nil {
			k.Ended = clock.Now().UTC()
			return k, err
		}
	}
}

// unitMean is the mean of the unit's own sensor over rs, nil when the soak did
// not read it.
func unitMean(rs []TempReading) *float64 {
	var sum float64
	for _, r := range rs {
		if r.UnitC == nil {
			return nil
		}
		sum += *r.UnitC
	}
	m := sum / float64(len(rs))
	return &m
}

// meanSD is the mean and the sample standard deviation (n − 1) of the
// chamber's temperatures; the deviation is 0 for one reading.
func meanSD(rs []TempReading) (mean, sd float64) {
	for _, r := range rs {
		mean += r.C
	}
	mean /= float64(len(rs))
	if len(rs) < 2 {
		return mean, 0
	}
	var ss float64
	for _, r := range rs {
		ss += (r.C - mean) * (r.C - mean)
	}
	return mean, math.Sqrt(ss / float64(len(rs)-1))
}
