package sim_test

import (
	"context"
	"errors"
	"math"
	"testing"
	"time"

	"trimline/instruments"
)

func TestMeterResolution(t *testing.T) {
	ctx := context.Background()
	b := bench(t, nil, with(quietMeter, "offset", "1.23456789mV"), nil)
	m := b.Meter()
	// 10 V range: 1 µV resolution, 1234.56789 µV rounds to 1235 µV (hand-worked).
	if got := read1(t, b); math.Abs(got-1.235e-3) > 1e-12 {
		t.Errorf("10 V range reads %.12g, want 1.235e-3", got)
	}
	// 1 V range: 0.1 µV resolution (range·1e-7), rounds to 1234.6 µV (hand-worked).
	if err := m.Configure(ctx, 1, 1); err != nil {
		t.Fatal(err)
	}
	if got := read1(t, b); math.Abs(got-1.2346e-3) > 1e-12 {
		t.Errorf("1 V range reads %.12g, want 1.2346e-3", got)
	}
	if r := m.Resolution(); math.Abs(r-1e-7) > 1e-20 {
		t.Errorf("resolution on 1 V = %g, want 1e-7", r) // brief: range·1e-7
	}
	// Auto range is the 10 V range; 5 V selects the 10 V range (smallest that holds it).
	for _, req := range []float64{0, 5} {
		if err := m.Configure(ctx, req, 1); err != nil {
			t.Fatal(err)
		}
		if m.Range() != 10 {
			t.Errorf("Configure(%g) gave range %g, want 10", req, m.Range())
		}
	}
	for _, bad := range [][2]float64{{-1, 1}, {2000, 1}, {10, 0}, {10, 1000}, {math.NaN(), 1}} {
		if err := m.Configure(ctx, bad[0], bad[1]); err == nil {
			t.Errorf("Configure(%g, %g) accepted", bad[0], bad[1])
		}
	}
	// Reset returns to the power-on 10 V range.
	m.Configure(ctx, 0.1, 1)
	if err := m.Reset(ctx); err != nil || m.Range() != 10 {
		t.Errorf("after Reset: range %g, err %v", m.Range(), err)
	}
}

func TestMeterOverload(t *testing.T) {
	ctx := context.Background()
	for _, c := range []struct {
		offset string
		rng    float64
		flag   instruments.Flag
	}{
		{"1.19V", 1, instruments.FlagNone},      // brief: valid up to 1.2·range
		{"1.21V", 1, instruments.FlagOverload},  // brief: above 1.2·range
		{"-1.21V", 1, instruments.FlagOverload}, // brief: either sign
		{"1.21V", 10, instruments.FlagNone},
		{"12.1V", 10, instruments.FlagOverload},
	} {
		b := bench(t, nil, with(quietMeter, "offset", c.offset), nil)
		if err := b.Meter().Configure(ctx, c.rng, 1); err != nil {
			t.Fatal(err)
		}
		rs, err := b.Meter().Read(ctx, 1)
		if err != nil {
			t.Fatal(err)
		}
		r := rs[0]
		if r.Flag != c.flag {
			t.Errorf("%s on %g V range: flag %v, want %v", c.offset, c.rng, r.Flag, c.flag)
		}
		if r.Flag == instruments.FlagOverload && (math.Abs(r.Value) != 9.9e37 || r.Valid()) { // SCPI 9.9E37
			t.Errorf("overload reading %+v", r)
		}
	}
}

func TestMeterForceFlag(t *testing.T) {
	for _, c := range []struct {
		setting string
		flag    instruments.Flag
	}{{"nan", instruments.FlagNaN}, {"overload", instruments.FlagOverload}} {
		b := bench(t, quietSource, with(quietMeter, "force_flag", c.setting), quietDUT)
		load(t, b, "F1")
		rs, err := b.Meter().Read(context.Background(), 5)
		if err != nil {
			t.Fatal(err)
		}
		for _, r := range rs {
			if r.Flag != c.flag || r.Valid() {
				t.Errorf("force_flag %s: reading %+v", c.setting, r)
			}
		}
	}
}

func TestMeterClock(t *testing.T) {
	ctx := context.Background()
	start := time.Date(2030, 1, 2, 3, 4, 5, 0, time.UTC) // invented date
	b := bench(t, nil, with(quietMeter, "start", start.Format(time.RFC3339)), nil)
	clk := b.Clock()
	if !clk.Now().Equal(start) {
		t.Fatalf("clock starts at %v, want %v", clk.Now(), start)
	}
	if err := b.Meter().Configure(ctx, 10, 10); err != nil {
		t.Fatal(err)
	}
	rs, err := b.Meter().Read(ctx, 5)
	if err != nil {
		t.Fatal(err)
	}
	aperture := 200 * time.Millisecond // common practice: 10 PLC at 50 Hz = 10·20 ms
	for i, r := range rs {
		if want := start.Add(time.Duration(i) * aperture); !r.Time.Equal(want) {
			t.Errorf("reading %d at %v, want %v", i, r.Time, want)
		}
	}
	if got := clk.Now().Sub(start); got != 5*aperture {
		t.Errorf("clock advanced %v by 5 readings, want 1 s", got)
	}
	// 60 Hz mains: 1 PLC = 16.667 ms (common practice).
	b60 := bench(t, nil, with(quietMeter, "line_frequency", "60Hz"), nil)
	if a := b60.Meter().Aperture(); a != 16666667*time.Nanosecond {
		t.Errorf("1 PLC at 60 Hz = %v", a)
	}
	// Latency advances the clock per command.
	bl := bench(t, with(quietSource, "latency", "5ms"), nil, nil)
	t0 := bl.Clock().Now()
	bl.Source().SetLevel(ctx, 1e-3)
	if d := bl.Clock().Now().Sub(t0); d != 5*time.Millisecond {
		t.Errorf("source latency advanced the clock %v, want 5 ms", d)
	}
	// Sleep honours a cancelled context.
	cctx, cancel := context.WithCancel(ctx)
	cancel()
	before := clk.Now()
	if err := clk.Sleep(cctx, time.Second); !errors.Is(err, context.Canceled) || !clk.Now().Equal(before) {
		t.Errorf("Sleep with a cancelled ctx: err %v, advanced %v", err, clk.Now().Sub(before))
	}
	// Default start is now, truncated to the millisecond.
	bn := bench(t, nil, quietMeter, nil)
	if now := bn.Clock().Now(); now.Nanosecond()%1e6 != 0 || time.Since(now) > time.Minute {
		t.Errorf("default start %v is not now truncated to the millisecond", now)
	}
	if _, ok := bench(t, nil, with(quietMeter, "time", "real"), nil).Clock().(instruments.RealClock); !ok {
		t.Error("time: real did not give the real clock")
	}
}

func TestMeterCancel(t *testing.T) {
	b := bench(t, nil, quietMeter, nil)
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	before := b.Clock().Now()
	if _, err := b.Meter().Read(ctx, 3); !errors.Is(err, context.Canceled) {
		t.Errorf("Read with a cancelled ctx = %v, want context.Canceled", err)
	}
	if !b.Clock().Now().Equal(before) {
		t.Error("a cancelled Read advanced the clock")
	}
}

func TestMeterNoise(t *testing.T) {
	ctx := context.Background()
	for _, c := range []struct {
		nplc, want float64
	}{
		{1, 1.5e-6},                    // brief: 1.5 µV rms at 1 PLC
		{100, 1.5e-6 / math.Sqrt(100)}, // brief: scales as 1/√NPLC
	} {
		b := bench(t, nil, with(quietMeter, "noise", "1.5uV", "resolution", "0V"), nil)
		if err := b.Meter().Configure(ctx, 10, c.nplc); err != nil {
			t.Fatal(err)
		}
		rs, err := b.Meter().Read(ctx, 4000)
		if err != nil {
			t.Fatal(err)
		}
		v := make([]float64, len(rs))
		for i, r := range rs {
			v[i] = r.Value
		}
		// Statistical tolerance: σ of a σ estimate from 4000 samples is 1.1 %; ±5 %.
		near(t, "meter noise", stddev(v), c.want, 0.05*c.want)
	}
}
