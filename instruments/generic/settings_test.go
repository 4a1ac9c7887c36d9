package generic_test

import (
	"errors"
	"strings"
	"testing"
	"time"

	"trimline/instruments"
	"trimline/instruments/generic"
	"trimline/instruments/scpi"
	"trimline/instruments/sim/serve"
)

func TestCheckSettings(t *testing.T) {
	drv := generic.Driver{}
	addr := "tcp://127.0.0.1:5025"
	bad := []struct {
		spec instruments.Spec
		key  string
	}{
		{instruments.Spec{Role: "source", Templates: map[string]string{"set_levle": "X {volts}"}}, "templates.set_levle"},
		{instruments.Spec{Role: "source", Templates: map[string]string{"set_level": "SOUR:VOLT {amps}"}}, "templates.set_level"},
		{instruments.Spec{Role: "source", Templates: map[string]string{"get_level": "SOUR:VOLT? {volts}"}}, "templates.get_level"},
		{instruments.Spec{Role: "source", Templates: map[string]string{"output_off": ""}}, "templates.output_off"},
		{instruments.Spec{Role: "meter", Templates: map[string]string{"read": "READ?\nREAD?"}}, "templates.read"},
		{instruments.Spec{Role: "meter", Templates: map[string]string{"set_level": "SOUR:VOLT {volts}"}}, "templates.set_level"},
		{instruments.Spec{Role: "dut", Templates: map[string]string{"set_level": "X"}}, "templates.set_level"},
		{instruments.Spec{Role: "dut", Templates: map[string]string{"load_unit": "LOAD {volts}"}}, "templates.load_unit"},
		{instruments.Spec{Role: "source", Settings: map[string]string{"baud": "9600"}}, "baud"},
		{instruments.Spec{Role: "source", Settings: map[string]string{"read_term": `\q`}}, "read_term"},
		{instruments.Spec{Role: "source", Settings: map[string]string{"write_term": ""}}, "write_term"},
		{instruments.Spec{Role: "source", Settings: map[string]string{"timeout": "soon"}}, "timeout"},
		{instruments.Spec{Role: "source", Settings: map[string]string{"timeout": "-1s"}}, "timeout"},
		{instruments.Spec{Role: "source", Settings: map[string]string{"timeout": "1s"}, Timeout: 2 * time.Second}, "timeout"},
		{instruments.Spec{Role: "source", Settings: map[string]string{"retries": "11"}}, "retries"},
		{instruments.Spec{Role: "source", Settings: map[string]string{"reset": "maybe"}}, "reset"},
		{instruments.Spec{Role: "source", Settings: map[string]string{"range": "1A"}}, "range"},
		{instruments.Spec{Role: "meter", Settings: map[string]string{"range": "10V"}}, "range"},
		{instruments.Spec{Role: "meter", Settings: map[string]string{"line_frequency": "0Hz"}}, "line_frequency"},
		{instruments.Spec{Role: "source", Templates: map[string]string{"arm_watchdog": "OUTP:WATC {seconds}"}}, "templates.arm_watchdog"},
		{instruments.Spec{Role: "source", Settings: map[string]string{"watchdog": "5 s"}}, "watchdog"},
		{instruments.Spec{Role: "source", Templates: map[string]string{"arm_watchdog": "OUTP:WATC {seconds}"}, Settings: map[string]string{"watchdog": "2h"}}, "watchdog"},
		{instruments.Spec{Role: "source", Templates: map[string]string{"arm_watchdog": "OUTP:WATC {volts}"}, Settings: map[string]string{"watchdog": "5s"}}, "templates.arm_watchdog"},
		{instruments.Spec{Role: "source", Templates: map[string]string{"disarm_watchdog": "OUTP:WATC OFF"}}, "templates.disarm_watchdog"},
		{instruments.Spec{Role: "meter", Templates: map[string]string{"arm_watchdog": "X {seconds}"}, Settings: map[string]string{"watchdog": "5s"}}, "templates.arm_watchdog"},
		{instruments.Spec{Role: "dut", Settings: map[string]string{"reset": "true"}}, "reset"},
	}
	for _, c := range bad {
		c.spec.Address = addr
		err := drv.CheckSettings(c.spec)
		var se *instruments.SettingError
		if !errors.As(err, &se) || se.Key != c.key {
			t.Errorf("%+v: err = %v, want a SettingError for %q", c.spec, err, c.key)
		}
	}
	for _, c := range []instruments.Spec{
		{Role: "scope", Address: addr},
		{Role: "source", Address: "tcp://127.0.0.1"},
		{Role: "source", Address: "serial:///dev/ttyUSB0?baud=fast"},
	} {
		if err := drv.CheckSettings(c); err == nil {
			t.Errorf("%+v accepted", c)
		}
	}
	good := []instruments.Spec{
		{Role: "source", Address: "serial:///dev/ttyUSB0?baud=115200", Settings: map[string]string{"read_term": `\r\n`, "write_term": "\n",
			"timeout": "500ms", "retries": "0", "reset": "false", "range": "100 mV"}, Templates: map[string]string{"set_level": "VOLT {volts}", "set_range": ""}},
		{Role: "meter", Address: "usbtmc:///dev/usbtmc0", Settings: map[string]string{"timeout": "2 s", "line_frequency": "60 Hz"}, Timeout: 2 * time.Second,
			Templates: map[string]string{"autozero": "", "configure": "CONF:VOLT:DC {range},MIN"}},
		{Role: "dut", Address: addr, Settings: map[string]string{"retries": "3"}, Templates: map[string]string{"load_unit": "FIXTURE LOAD {serial}"}},
	}
	for _, s := range good {
		if err := drv.CheckSettings(s); err != nil {
			t.Errorf("%+v: %v", s, err)
		}
	}
	if d := generic.DefaultTemplates("source"); d["set_level"] != "SOUR:VOLT {volts}" || d["get_output"] != "OUTP?" {
		t.Errorf("DefaultTemplates(source) = %v", d)
	}
	if generic.DefaultTemplates("scope") != nil {
		t.Error("DefaultTemplates(scope) is not nil")
	}
}

func TestTemplatesAndSettings(t *testing.T) {
	srv := start(t, "tcp", serve.Options{})
	ctx := ctxT(t)

	// reset: false sends no *RST; the range setting is programmed at open; a
	// template may leave the optional root node out.
	s := open(t, srv, "source", map[string]string{"reset": "false", "range": "20 mV"},
		map[string]string{"set_level": "VOLT {volts}", "get_level": "VOLT?"}).(*generic.Source)
	if n := srv.Count("source", "*RST"); n != 0 {
		t.Fatalf("*RST sent %d times with reset: false", n)
	}
	if n := srv.Count("source", "SOUR:VOLT:RANG 0.02"); n != 1 {
		t.Fatalf("range sent %d times, want 1 at open", n)
	}
	if err := s.SetLevel(ctx, 0.0123456789012); err != nil {
		t.Fatal(err)
	}
	if n := srv.Count("source", "VOLT 0.0123456789"); n != 1 {
		t.Fatalf("level template not used as given (10 significant digits): %q", srv.Received("source"))
	}
	var ie *scpi.InstrumentError
	if err := s.SetLevel(ctx, 30e-3); !errors.As(err, &ie) || ie.Code != -222 {
		t.Fatalf("level beyond the 20 mV range: %v", err)
	}
	if err := s.Reset(ctx); err != nil || srv.Count("source", "SOUR:VOLT:RANG 0.02") != 2 {
		t.Fatalf("Reset did not program the range again: %v", err)
	}

	// A read that integrates longer than the exchange timeout still succeeds: the
	// timeout is stretched by n apertures.
	m := open(t, srv, "meter", nil, nil).(*generic.Meter)
	if err := m.Configure(ctx, 10, 1); err != nil { // 20 ms per reading at 50 Hz
		t.Fatal(err)
	}
	t0 := time.Now()
	rs, err := m.Read(ctx, 15) // 300 ms > 200 ms
	if err != nil || len(rs) != 15 {
		t.Fatalf("Read(15) at 1 PLC: %d readings, %v", len(rs), err)
	}
	if el := time.Since(t0); el < 300*time.Millisecond {
		t.Fatalf("15 readings at 1 PLC took %v: the served meter does not integrate in real time", el)
	}
	if got := srv.Received("meter"); !contains(got, "CONF:VOLT:DC 10") || !contains(got, "VOLT:DC:NPLC 1") || !contains(got, "ZERO:AUTO ON") || !contains(got, "SAMP:COUN 15") {
		t.Fatalf("meter lines: %q", got)
	}
	if err := m.Configure(ctx, 0, 0.01); err != nil || !contains(srv.Received("meter"), "CONF:VOLT:DC AUTO") {
		t.Fatalf("autorange: %v", err)
	}

	// load_unit makes the port a FixtureLoader.
	p := open(t, srv, "dut", nil, map[string]string{"load_unit": "FIXTURE LOAD {serial}"})
	fl, ok := p.(instruments.FixtureLoader)
	if !ok {
		t.Fatalf("%T with load_unit is not a FixtureLoader", p)
	}
	if err := fl.LoadUnit(ctx, "BRX-000099"); err != nil {
		t.Fatal(err)
	}
	if sn, err := p.(instruments.TrimPort).Query(ctx, "SN?"); err != nil || sn != "BRX-000099" {
		t.Fatalf("SN? = %q, %v", sn, err)
	}
	if _, ok := open(t, srv, "dut", nil, nil).(instruments.FixtureLoader); ok {
		t.Fatal("a port without load_unit is a FixtureLoader")
	}
	var re *generic.ReplyError
	if err := p.(instruments.TrimPort).Command(ctx, "TRIM OFS 9999"); !errors.As(err, &re) || !strings.Contains(re.Reply, "out of range") {
		t.Fatalf("Command refused: %v", err)
	}
	if err := p.(instruments.TrimPort).Command(ctx, "SN?"); err == nil || errors.As(err, &re) {
		t.Fatalf("a query sent as a command: %v, want an error naming the reply", err)
	}
}

func contains(list []string, s string) bool {
	for _, x := range list {
		if x == s {
			return true
		}
	}
	return false
}

// A station names its roles as it likes: the kind says which instrument the
// generic driver opens, and a spec without one (an older caller) is taken by its
// role's name.
func TestCheckSettingsByKind(t *testing.T) {
	drv := generic.Driver{}
	addr := "tcp://127.0.0.1:5025"
	for _, s := range []instruments.Spec{
		{Role: "input", Kind: instruments.KindSource, Settings: map[string]string{"range": "100 mV"}},
		{Role: "dmm", Kind: instruments.KindMeter, Settings: map[string]string{"line_frequency": "60 Hz"}},
		{Role: "card", Kind: instruments.KindPort, Templates: map[string]string{"load_unit": "FIXTURE LOAD {serial}"}},
		{Role: "meter", Settings: map[string]string{"line_frequency": "60 Hz"}},
	} {
		s.Address = addr
		if err := drv.CheckSettings(s); err != nil {
			t.Errorf("%+v: %v", s, err)
		}
	}
	for _, c := range []struct {
		spec instruments.Spec
		want string
	}{
		// The kind decides, not the name: a meter named source takes no range.
		{instruments.Spec{Role: "source", Kind: instruments.KindMeter, Settings: map[string]string{"range": "1 V"}}, "unknown setting for a meter"},
		{instruments.Spec{Role: "dmm", Settings: map[string]string{}}, `role "dmm": the generic driver opens a source, a meter, a dut, a switch or a thermal`},
		{instruments.Spec{Role: "scope", Kind: "scope"}, `kind "scope"`},
	} {
		c.spec.Address = addr
		if err := drv.CheckSettings(c.spec); err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%+v: err = %v, want %q", c.spec, err, c.want)
		}
	}
}
