package sequencer

// Sweeps: stepping the source across a plan and reading the meter at each level.

import (
	"context"
	"fmt"
	"math"

	"trimline/instruments"
)

// sweep steps the source across p and reads the meter at each level. The output is
// switched on after the first level is programmed and off again at the end. After
// each point's readings every instrument's error queue is read: an entry (say, a
// meter that flags its reading as stale) stops the run as a station fault.
func (e *Engine) sweep(ctx context.Context, name string, p SweepPlan) (Sweep, error) {
	sw := Sweep{Name: name}
	for i, x := range p.Levels() {
		err := e.step(ctx, func(ctx context.Context) error {
			if err := e.checkInterlock(ctx); err != nil {
				return err
			}
			if err := e.setLevel(ctx, x); err != nil {
				return err
			}
			if i == 0 {
				if err := e.source.SetOutput(ctx, true); err != nil {
					return fmt.Errorf("%s sweep: source output on: %w", name, err)
				}
			}
			if err := e.clock.Sleep(ctx, p.Settle); err != nil {
				return err
			}
			rs, err := e.meter.Read(ctx, p.Readings)
			if err != nil {
				return fmt.Errorf("%s sweep at %s: read meter: %w", name, fmtV(x), err)
			}
			sw.Points = append(sw.Points, point(x, rs))
			// The unit's output cannot leave its supply rails, so an overload or
			// not-a-number on the meter's range is the station's problem (range,
			// wiring, a failing meter), not a measurement of the unit.
			for j, r := range rs {
				if !r.Valid() {
					return &stop{Fault, fmt.Sprintf("%s sweep at %s: meter reported %s (reading %d of %d): check the meter range and the wiring",
						name, fmtV(x), firstBad(rs[j:j+1]), j+1, len(rs))}
				}
			}
			return e.checkErrors(ctx, func() string { return fmt.Sprintf("%s sweep at %s", name, fmtV(x)) })
		})
		if err != nil {
			return sw, err
		}
		e.log.Debug().Str("sweep", name).Float64("x", x).Float64("y", sw.Points[i].Mean).Msg("point")
	}
	if err := e.step(ctx, func(ctx context.Context) error { return e.source.SetOutput(ctx, false) }); err != nil {
		return sw, fmt.Errorf("%s sweep: source output off: %w", name, err)
	}
	return sw, nil
}

// point summarises the readings at one level. Mean and SD are over the valid
// readings; a point with any invalid reading cannot be fitted.
func point(x float64, rs []instruments.Reading) Point {
	p := Point{Stimulus: x, Readings: rs}
	var sum float64
	for _, r := range rs {
		if r.Valid() {
			p.Valid++
			sum += r.Value
		}
	}
	if p.Valid == 0 {
		p.Mean, p.SD = math.NaN(), math.NaN()
		return p
	}
	p.Mean = sum / float64(p.Valid)
	if p.Valid > 1 {
		var ss float64
		for _, r := range rs {
			if r.Valid() {
				ss += (r.Value - p.Mean) * (r.Value - p.Mean)
			}
		}
		p.SD = math.Sqrt(ss / float64(p.Valid-1))
	}
	return p
}
