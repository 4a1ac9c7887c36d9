package sequencer

// Stand-ins for the soak step (written elsewhere) so that tempco can be tested on
// its own: test_soak records a Soak and counts as a step that sets the
// temperature; test_temp stamps a sweep already taken with a temperature, as a
// soak before it would have. Both are registered in the test binary only.

import (
	"context"
	"time"
)

func init() {
	RegisterStep(StepKind{Name: "test_soak", About: "test stand-in for soak: records a Soak", New: func() Step { return new(testSoak) }})
	RegisterStep(StepKind{Name: "test_temp", About: "test stand-in: stamps an earlier sweep with a temperature", New: func() Step { return new(testTemp) }})
}

type testSoak struct {
	MeanC float64 `yaml:"mean_c"`
	SDC   float64 `yaml:"sd_c"`
	N     int     `yaml:"n"`
}

func (*testSoak) Check(*Checker) {}

func (*testSoak) setsTemperature() {}

func (s *testSoak) Run(_ context.Context, u *Unit) error {
	t0 := time.Date(2026, 1, 1, 0, 0, 0, 0, time.UTC)
	sk := Soak{Step: u.step.Name, SetPoint: s.MeanC, MeanC: s.MeanC, SDC: s.SDC, Stable: t0}
	for i := range s.N {
		sk.Readings = append(sk.Readings, TempReading{Time: t0.Add(time.Duration(i) * time.Second), C: s.MeanC})
	}
	u.Rec.Soaks = append(u.Rec.Soaks, sk)
	return nil
}

type testTemp struct {
	Sweep string  `yaml:"sweep"`
	TempC float64 `yaml:"temp_c"`
}

func (*testTemp) Check(*Checker) {}

func (s *testTemp) Run(_ context.Context, u *Unit) error {
	k, ok := u.Kept(s.Sweep).(sweepKept)
	if !ok {
		return nil
	}
	k.sweep.TempC, k.sweep.TempKnown = s.TempC, true
	u.kept[u.key(s.Sweep)] = k
	for i := range u.Rec.Sweeps {
		if sw := &u.Rec.Sweeps[i]; sw.Name == s.Sweep && sw.Channel == u.channel {
			sw.TempC, sw.TempKnown = s.TempC, true
		}
	}
	return nil
}
