package sim_test

import (
	"context"
	"errors"
	"math"
	"net/url"
	"strings"
	"testing"
	"time"

	"trimline/instruments"
	"trimline/instruments/sim"
)

func TestCheckSettings(t *testing.T) {
	drv, _, err := instruments.Lookup("sim://meter")
	if err != nil {
		t.Fatal(err)
	}
	checker := drv.(instruments.SettingsChecker)
	for _, c := range []struct {
		addr, key, val string
	}{
		{"sim://meter", "bogus", "1"},           // unknown key
		{"sim://source", "nplc", "1"},           // a meter key on the source
		{"sim://dut", "noise", "5 ppm"},         // bad unit
		{"sim://dut", "tau", "1mV"},             // bad unit
		{"sim://dut", "tau", "-1ms"},            // negative time
		{"sim://source", "range", "1A"},         // bad unit
		{"sim://meter", "nplc", "fast"},         // not a number
		{"sim://meter", "nplc", "0"},            // out of range
		{"sim://meter", "range", "5000V"},       // no such range
		{"sim://meter", "force_flag", "maybe"},  // not a choice
		{"sim://dut", "defect", "broken"},       // not a choice
		{"sim://dut", "defect_rate", "150 %"},   // above 100 %
		{"sim://dut", "offset_trim", "middle"},  // not a choice
		{"sim://dut", "seed", "-1"},             // not an unsigned integer
		{"sim://dut", "time", "fast"},           // not a choice
		{"sim://dut", "start", "yesterday"},     // not RFC 3339
		{"sim://dut", "latency", "3"},           // no unit
		{"sim://meter", "spec_ppm_range", "-4"}, // negative
		{"sim://dut", "gain_error", "0.01"},     // a ratio with no unit: 1 %? 0.01 ppm?
		{"sim://dut", "gain_lsb", "10"},         // a ratio with no unit
		{"sim://source", "gain_error", "3"},     // a ratio with no unit
	} {
		err := checker.CheckSettings(instruments.Spec{Address: c.addr, Settings: map[string]string{c.key: c.val}})
		var se *instruments.SettingError
		if !errors.As(err, &se) || se.Key != c.key {
			t.Errorf("%s %s=%q: err = %v, want a SettingError for %q", c.addr, c.key, c.val, err, c.key)
		}
	}
	good := []instruments.Spec{
		{Address: "sim://source", Settings: map[string]string{"noise": "50nV", "gain_error": "3 ppm", "offset": "1uV",
			"spec_ppm_reading": "20", "spec_ppm_range": "5 ppm", "range": "100mV", "latency": "1ms", "seed": "42"}},
		{Address: "sim://meter", Settings: map[string]string{"nplc": "10", "range": "10V", "resolution": "1uV",
			"force_flag": "none", "line_frequency": "60Hz", "time": "simulated", "start": "2030-01-02T03:04:05Z"}},
		{Address: "sim://dut", Settings: map[string]string{"offset": "3.1mV", "gain_error": "-2500 ppm", "noise": "0V",
			"tau": "1ms", "crossover_step": "0uV", "crossover_at": "3mV", "dnl": "0.05 LSB", "open_loop_gain": "1e7",
			"offset_lsb": "12.2uV", "gain_lsb": "10 ppm", "offset_trim": "after", "defect": "none",
			"defect_rate": "2 %", "offset_sigma": "3mV", "gain_sigma": "0.4 %"}},
	}
	for _, s := range good {
		if err := checker.CheckSettings(s); err != nil {
			t.Errorf("%s: %v", s.Address, err)
		}
	}
	if err := instruments.Check(good); err != nil {
		t.Errorf("instruments.Check: %v", err)
	}
	// The parsed values: spec_ppm with a bare number is ppm, ratios are fractions.
	s, err := sim.ParseDUTSettings(good[2].Settings)
	if err != nil {
		t.Fatal(err)
	}
	// Hand-worked conversions of the strings above.
	near(t, "gain_error", *s.GainError, -2500e-6, 1e-15)
	near(t, "offset", *s.Offset, 3.1e-3, 1e-15)
	near(t, "defect_rate", s.DefectRate, 0.02, 1e-15)
	near(t, "open_loop_gain", s.OpenLoopGain, 1e7, 0)
	near(t, "gain_lsb", s.GainLSB, 10e-6, 1e-18)
	src, err := sim.NewBench(good[:1])
	if err != nil {
		t.Fatal(err)
	}
	g, o := src.Source().Errors()
	near(t, "source gain_error", g, 3e-6, 1e-18)
	near(t, "source offset", o, 1e-6, 1e-18)
}

func TestConflictingBenchKeys(t *testing.T) {
	spec := func(addr string, kv ...string) instruments.Spec {
		return instruments.Spec{Address: addr, Settings: with(nil, kv...)}
	}
	for _, c := range []struct {
		key   string
		specs []instruments.Spec
	}{
		{"seed", []instruments.Spec{spec("sim://source", "seed", "1"), spec("sim://dut", "seed", "2")}},
		{"time", []instruments.Spec{spec("sim://meter", "time", "real"), spec("sim://dut", "time", "simulated")}},
		{"start", []instruments.Spec{spec("sim://meter", "start", "2030-01-01T00:00:00Z"), spec("sim://dut", "start", "2030-01-02T00:00:00Z")}},
		{"start", []instruments.Spec{spec("sim://meter", "start", "2030-01-01T00:00:00Z"), spec("sim://dut", "time", "real")}},
	} {
		_, err := sim.NewBench(c.specs)
		var se *instruments.SettingError
		if !errors.As(err, &se) || se.Key != c.key {
			t.Errorf("%v: err = %v, want a SettingError for %q", c.specs, err, c.key)
		}
		if _, err := (sim.Driver{}).OpenGroup(context.Background(), c.specs); err == nil {
			t.Errorf("OpenGroup accepted %v", c.specs)
		}
	}
	// The same seed written twice is no conflict; seed reaches the units.
	b, err := sim.NewBench([]instruments.Spec{spec("sim://source", "seed", "9"), spec("sim://dut", "seed", "9")})
	if err != nil {
		t.Fatal(err)
	}
	if b.Seed() != 9 {
		t.Errorf("seed %d, want 9", b.Seed())
	}
}

func TestAddresses(t *testing.T) {
	for _, addr := range []string{"sim://psu", "sim://meter:5025", "sim://meter/x", "sim://meter?x=1", "sim:meter"} {
		_, err := sim.NewBench([]instruments.Spec{{Address: addr}})
		if err == nil || !strings.Contains(err.Error(), "sim://source, sim://meter, sim://dut, sim://switch or sim://chamber") {
			t.Errorf("%s: err = %v, want one naming the five addresses", addr, err)
		}
	}
	if _, err := sim.NewBench([]instruments.Spec{{Address: "sim://source"}, {Address: "sim://source"}}); err == nil {
		t.Error("two sources on one bench accepted")
	}
	if _, err := sim.NewBench([]instruments.Spec{{Address: "sim://switch"}, {Address: "sim://switch"}}); err == nil {
		t.Error("two switches on one bench accepted")
	}
	if _, err := sim.NewBench(nil); err == nil {
		t.Error("empty bench accepted")
	}
}

func TestOpenAllWiring(t *testing.T) {
	ctx := context.Background()
	specs := []instruments.Spec{
		{Role: "dut", Address: "sim://dut", Settings: with(quietDUT, "seed", "3")},
		{Role: "source", Address: "sim://source", Settings: quietSource},
		{Role: "meter", Address: "sim://meter", Settings: quietMeter},
	}
	ins, err := instruments.OpenAll(ctx, specs)
	if err != nil {
		t.Fatal(err)
	}
	defer func() {
		for _, in := range ins {
			in.Close()
		}
	}()
	src := ins["source"].(instruments.Source)
	mtr := ins["meter"].(instruments.Meter)
	dut := ins["dut"].(instruments.TrimPort)
	if err := dut.(instruments.FixtureLoader).LoadUnit(ctx, "W1"); err != nil {
		t.Fatal(err)
	}
	clk := mtr.(instruments.ClockSource).Clock()
	if clk != src.(instruments.ClockSource).Clock() || clk != dut.(instruments.ClockSource).Clock() {
		t.Error("the instruments of one bench do not share a clock")
	}
	src.SetLevel(ctx, 5e-3)
	src.SetOutput(ctx, true)
	clk.Sleep(ctx, 50*time.Millisecond)
	rs, err := mtr.Read(ctx, 1)
	if err != nil {
		t.Fatal(err)
	}
	u := dut.(*sim.DUT)
	p, _ := u.Unit()
	near(t, "wired reading at 5 mV", rs[0].Value, p.Output(5e-3, 2048, 2048), res) // the model
	near(t, "wired reading at 5 mV", rs[0].Value, 2.5031+0.997480050, res)         // hand-worked: 2.5031 + 5 mV·199.49601

	// Output off shorts the DUT input: the reading returns to the zero-input value.
	src.SetOutput(ctx, false)
	clk.Sleep(ctx, 50*time.Millisecond)
	rs, _ = mtr.Read(ctx, 1)
	near(t, "reading with the source off", rs[0].Value, 2.5031, res) // hand-worked: 2.5 + 3.1 mV

	// A source that is closed still accepts output off; other calls fail.
	src.Close()
	if err := src.SetOutput(ctx, false); err != nil {
		t.Errorf("SetOutput(false) after Close: %v", err)
	}
	if err := src.SetLevel(ctx, 0); err == nil {
		t.Error("SetLevel after Close succeeded")
	}
	if err := src.Close(); err != nil {
		t.Errorf("second Close: %v", err)
	}
}

func TestOpenAlone(t *testing.T) {
	ctx := context.Background()
	drv := sim.Driver{}
	open := func(addr string, settings map[string]string) instruments.Instrument {
		t.Helper()
		_, u, err := instruments.Lookup(addr)
		if err != nil {
			t.Fatal(err)
		}
		in, err := drv.Open(ctx, u, instruments.Spec{Address: addr, Settings: settings})
		if err != nil {
			t.Fatal(err)
		}
		t.Cleanup(func() { in.Close() })
		return in
	}
	m := open("sim://meter", nil).(*sim.Meter)
	rs, err := m.Read(ctx, 10)
	if err != nil {
		t.Fatal(err)
	}
	for _, r := range rs {
		// Unwired: 0 V + offset (≤ 0.6·4 ppm·10 V = 24 µV) + noise (1.5 µV rms); hand-worked bound 40 µV.
		if !r.Valid() || math.Abs(r.Value) > 40e-6 {
			t.Errorf("unwired meter reads %+v", r)
		}
	}
	id, err := m.Identify(ctx)
	if err != nil || id.Maker != sim.Maker {
		t.Errorf("meter identity %v, %v", id, err)
	}

	s := open("sim://source", nil).(*sim.Source)
	g, o := s.Errors()
	// Drawn inside ±60 % of 20 ppm and of 5 ppm·100 mV (brief defaults).
	if math.Abs(g) > 0.6*20e-6 || math.Abs(o) > 0.6*5e-6*0.1 {
		t.Errorf("source errors %g, %g V outside ±60 %% of spec", g, o)
	}
	if err := s.SetLevel(ctx, 0.2); err == nil {
		t.Error("source accepted 200 mV on its 100 mV range")
	}
	if err := s.SetCompliance(ctx, 1e-3); err != nil {
		t.Error(err)
	}
	if err := s.SetCompliance(ctx, -1); err == nil {
		t.Error("negative compliance accepted")
	}
	if err := s.Reset(ctx); err != nil || s.Compliance() != 10e-3 {
		t.Errorf("reset: %v, compliance %g", err, s.Compliance())
	}

	d := open("sim://dut", nil).(*sim.DUT)
	if err := d.LoadUnit(ctx, "A1"); err != nil {
		t.Fatal(err)
	}
	if got, err := d.Query(ctx, "SN?"); err != nil || got != "A1" {
		t.Errorf("SN? = %q, %v", got, err)
	}

	// A DUT with a meter and no source sees 0 V at its input.
	b := bench(t, nil, quietMeter, quietDUT)
	load(t, b, "A2")
	b.Clock().Sleep(ctx, 50*time.Millisecond)
	near(t, "DUT with no source", read1(t, b), 2.5031, res) // hand-worked: 2.5 + 3.1 mV

	if _, err := drv.Open(ctx, mustURL(t, "sim://psu"), instruments.Spec{Address: "sim://psu"}); err == nil {
		t.Error("sim://psu opened")
	}
}

func mustURL(t *testing.T, addr string) *url.URL {
	t.Helper()
	_, u, err := instruments.Lookup(addr)
	if err != nil {
		t.Fatal(err)
	}
	return u
}
