package serve_test

import (
	"context"
	"errors"
	"net/url"
	"runtime"
	"strings"
	"testing"
	"time"

	"trimline/instruments"
	"trimline/instruments/sim/serve"
	"trimline/instruments/transport"
)

func specs() []instruments.Spec {
	return []instruments.Spec{
		{Role: "source", Address: "sim://source", Settings: map[string]string{"noise": "0V", "gain_error": "0", "offset": "0V"}},
		{Role: "meter", Address: "sim://meter", Settings: map[string]string{"noise": "0V", "gain_error": "0", "offset": "0V", "nplc": "0.01"}},
		{Role: "dut", Address: "sim://dut", Settings: map[string]string{"seed": "3"}},
	}
}

func start(t *testing.T, opt serve.Options) *serve.Server {
	t.Helper()
	srv, err := serve.Start(context.Background(), specs(), opt)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { srv.Close() })
	return srv
}

// wire is a raw line connection to one endpoint.
type wire struct {
	t *testing.T
	c transport.Conn
}

func connect(t *testing.T, srv *serve.Server, role string) *wire {
	t.Helper()
	u, err := url.Parse(srv.Addresses()[role])
	if err != nil {
		t.Fatal(err)
	}
	c, err := transport.Dial(context.Background(), u, transport.Options{Timeout: 200 * time.Millisecond})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { c.Close() })
	return &wire{t, c}
}

func (w *wire) send(line string) {
	w.t.Helper()
	if err := w.c.WriteLine(context.Background(), line); err != nil {
		w.t.Fatal(err)
	}
}

func (w *wire) ask(line string) string {
	w.t.Helper()
	w.send(line)
	r, err := w.c.ReadLine(context.Background())
	if err != nil {
		w.t.Fatalf("%s: %v", line, err)
	}
	return r
}

func (w *wire) want(line, reply string) {
	w.t.Helper()
	if got := w.ask(line); got != reply {
		w.t.Fatalf("%s → %q, want %q", line, got, reply)
	}
}

// noReply checks that line gets no reply and pushes entry onto the error queue.
func (w *wire) noReply(line, entry string) {
	w.t.Helper()
	w.send(line)
	w.want("SYST:ERR?", entry)
	w.want("SYST:ERR?", `0,"No error"`)
}

func TestSourceCommands(t *testing.T) {
	srv := start(t, serve.Options{})
	w := connect(t, srv, "source")
	w.want("*IDN?", "Trimline Sim,VS-100M,VS000003,1.0")
	w.want("SYST:ERR?", `0,"No error"`)
	w.send("SOURce:VOLTage:LEVel:IMMediate:AMPLitude 0.01")
	w.want("SOUR:VOLT?", "+1.000000000E-02")
	w.want("source:voltage? ; :VOLT?", "+1.000000000E-02;+1.000000000E-02")
	w.want("VOLT -2.5e-3;VOLT?", "-2.500000000E-03")
	w.want("OUTP?", "0")
	w.send("OUTPut:STATe ON")
	w.want("OUTP?", "1")
	if on, level := srv.Bench().Source().State(); !on || level != -2.5e-3 {
		t.Fatalf("bench state on=%v level=%g", on, level)
	}
	w.send("SOUR:CURR:PROT 0.005")
	w.want("SOUR:CURR:PROT?", "+5.000000000E-03")
	w.want("SOUR:VOLT:RANG?", "+1.000000000E-01")
	w.send("SOUR:VOLT:RANG 0.02")
	w.noReply("SOUR:VOLT 0.05", `-222,"Data out of range"`) // beyond the programmed range
	w.noReply("SOUR:VOLT:RANG 1", `-222,"Data out of range"`)
	w.noReply("SOUR:VOLT:RANG 0.001", `-222,"Data out of range"`) // the level would not fit
	w.noReply("SOUR:CURR:PROT 1", `-222,"Data out of range"`)
	w.noReply("SOUR:VOLX 1", `-113,"Undefined header"`)
	w.noReply("SOUR:VOLT", `-109,"Missing parameter"`)
	w.noReply("SOUR:VOLT 1,2", `-108,"Parameter not allowed"`)
	w.noReply("SOUR:VOLT abc", `-104,"Data type error"`)
	w.noReply("OUTP MAYBE", `-224,"Illegal parameter value"`)
	w.noReply("*IDN? x", `-108,"Parameter not allowed"`)
	w.noReply("SOUR:VOLT:RANGX?", `-113,"Undefined header"`)
	w.want("*OPC?", "1")
	w.send("*RST")
	w.want("OUTP?;SOUR:VOLT?;SOUR:CURR:PROT?;SOUR:VOLT:RANG?", "0;+0.000000000E+00;+1.000000000E-02;+1.000000000E-01")

	// The queue holds ten entries; the last becomes an overflow; *CLS empties it.
	for range 12 {
		w.send("BOGUS")
	}
	for i := range 10 {
		want := `-113,"Undefined header"`
		if i == 9 {
			want = `-350,"Queue overflow"`
		}
		w.want("SYST:ERR:NEXT?", want)
	}
	w.want("SYST:ERR?", `0,"No error"`)
	w.send("BOGUS")
	w.send("*CLS")
	w.want("SYST:ERR?", `0,"No error"`)
	if n := srv.Count("source", "BOGUS"); n != 13 {
		t.Fatalf("Count(BOGUS) = %d", n)
	}
}

func TestMeterCommands(t *testing.T) {
	srv := start(t, serve.Options{})
	w := connect(t, srv, "meter")
	w.want("*IDN?", "Trimline Sim,DV-65,DV000003,1.0")
	w.send("CONF:VOLT:DC 10")
	w.send("VOLT:DC:NPLC 0.02")
	w.want("SENS:VOLT:DC:NPLC?", "+2.000000000E-02")
	w.send("ZERO:AUTO OFF")
	w.want("ZERO:AUTO?", "0")
	w.send("SAMP:COUN 3")
	w.want("SAMP:COUN?", "3")
	r := w.ask("READ?")
	if f := strings.Split(r, ","); len(f) != 3 || f[0] != "+0.000000000E+00" {
		t.Fatalf("READ? = %q, want three readings of 0 V (no DUT output without a unit)", r)
	}
	w.send("CONF:VOLT:DC AUTO")
	w.noReply("CONF:VOLT:DC 5000", `-222,"Data out of range"`)
	w.noReply("VOLT:DC:NPLC 1000", `-222,"Data out of range"`)
	w.noReply("SAMP:COUN 0", `-222,"Data out of range"`)
	w.noReply("SAMP:COUN 2.5", `-222,"Data out of range"`)
	w.noReply("READ? 1", `-108,"Parameter not allowed"`)
	w.send("*RST")
	w.want("SAMP:COUN?;ZERO:AUTO?", "1;1")

	srv.SetFault("meter", serve.Fault{Overload: true})
	w.send("SAMP:COUN 2")
	w.want("READ?", "+9.900000000E+37,+9.900000000E+37")
}

func TestDUTPort(t *testing.T) {
	srv := start(t, serve.Options{})
	w := connect(t, srv, "dut")
	w.want("SN?", "ERR no unit in fixture")
	w.want("LID?", "CLOSED")
	w.want("FIXTURE LOAD BRX-000007", "OK")
	w.want("SN?", "BRX-000007")
	w.want("TRIM OFS 2100", "OK")
	w.want("TRIM OFS?", "2100")
	w.want("TRIM OFS 5000", "ERR code out of range")
	w.want("NV STORE", "OK")
	w.want("FIXTURE LOAD two words", `ERR unknown command "FIXTURE LOAD two words"`)
	srv.SetFault("dut", serve.Fault{Garble: true, GarbleAt: 2})
	w.want("SN?", "BRX-000007")
	w.want("FW?", "\xffR\xff2\xff0\xffF\xff \xff.\xff.\xff")
	srv.SetFault("dut", serve.Fault{Truncate: true})
	w.want("SN?", "BRX-0")
}

func TestConfiguredDUTPort(t *testing.T) {
	sp := specs()
	sp[2].Settings = map[string]string{"seed": "3", "offset_bits": "16", "offset_coding": "twos_complement",
		"code_format": "hex", "trim": "offset", "cmd_offset_write": "CAL:OFFS {code}",
		"cmd_offset_read": "CAL:OFFS?", "cmd_store": "CAL:SAVE", "cmd_unlock": "UNLOCK 5A17"}
	srv, err := serve.Start(context.Background(), sp, serve.Options{})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { srv.Close() })
	w := connect(t, srv, "dut")
	w.want("FIXTURE LOAD XA-000001", "OK")
	w.want("CAL:OFFS?", "0000")
	w.want("CAL:OFFS 0xFF9C", "ERR locked")
	w.want("UNLOCK 5A17", "OK")
	w.want("CAL:OFFS 0xFF9C", "OK")
	w.want("CAL:OFFS?", "FF9C")
	w.want("TRIM GAIN?", `ERR unknown command "TRIM GAIN?"`)
	w.want("CAL:SAVE", "OK")
	// The read-back fault follows the card's read command and code format, wrapping
	// at 16 bits (hand-worked: FFFF + 1 = 0000).
	srv.SetFault("dut", serve.Fault{ReadbackMismatch: true})
	w.want("CAL:OFFS?", "FF9D")
	w.want("CAL:OFFS FFFF", "OK")
	w.want("CAL:OFFS?", "0000")
}

func TestDelayAndSilence(t *testing.T) {
	srv := start(t, serve.Options{})
	w := connect(t, srv, "meter")
	srv.SetFault("meter", serve.Fault{Delay: 60 * time.Millisecond})
	t0 := time.Now()
	w.want("*OPC?", "1")
	if el := time.Since(t0); el < 60*time.Millisecond {
		t.Fatalf("reply after %v, want ≥ 60 ms", el)
	}
	srv.SetFault("meter", serve.Fault{NoReply: true, NoReplyAfter: 1})
	w.want("*OPC?", "1")
	w.send("*OPC?")
	if _, err := w.c.ReadLine(context.Background()); !errors.Is(err, transport.ErrTimeout) {
		t.Fatalf("silent endpoint: %v", err)
	}
	if n := len(srv.Received("meter")); n != 3 {
		t.Fatalf("received %d lines, want 3", n)
	}
}

func TestLidOpensAfter(t *testing.T) {
	srv := start(t, serve.Options{LidOpenAfter: 2})
	w := connect(t, srv, "dut")
	w.want("LID?", "CLOSED")
	w.want("LID?", "CLOSED")
	w.want("LID?", "OPEN")
	if !srv.Bench().DUT().LidOpen() {
		t.Fatal("the bench's lid is not open")
	}
}

func TestStartErrors(t *testing.T) {
	ctx := context.Background()
	bad := []struct {
		specs []instruments.Spec
		opt   serve.Options
		want  string
	}{
		{nil, serve.Options{}, "no instruments"},
		{specs(), serve.Options{Transport: "gpib"}, "transport"},
		{[]instruments.Spec{{Role: "meter", Address: "sim://meter", Settings: map[string]string{"time": "simulated"}}}, serve.Options{}, "real time"},
		{[]instruments.Spec{{Role: "meter", Address: "sim://meter"}, {Role: "meter", Address: "sim://source"}}, serve.Options{}, "repeated role"},
		{specs(), serve.Options{Faults: map[string]serve.Fault{"scope": {}}}, "scope"},
		{[]instruments.Spec{{Role: "meter", Address: "sim://meter", Settings: map[string]string{"nplc": "fast"}}}, serve.Options{}, "nplc"},
	}
	for _, c := range bad {
		if srv, err := serve.Start(ctx, c.specs, c.opt); err == nil || !strings.Contains(err.Error(), c.want) {
			if srv != nil {
				srv.Close()
			}
			t.Errorf("Start(%v, %+v) = %v, want an error mentioning %q", c.specs, c.opt, err, c.want)
		}
	}
}

func TestContextClosesServer(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	srv, err := serve.Start(ctx, specs(), serve.Options{})
	if err != nil {
		t.Fatal(err)
	}
	u, _ := url.Parse(srv.Addresses()["meter"])
	cancel()
	deadline := time.Now().Add(2 * time.Second)
	for {
		c, err := transport.Dial(context.Background(), u, transport.Options{Timeout: 100 * time.Millisecond})
		if err != nil {
			break
		}
		c.Close()
		if time.Now().After(deadline) {
			t.Fatal("the server still accepts links after its context was cancelled")
		}
		time.Sleep(10 * time.Millisecond)
	}
	if err := srv.Close(); err != nil {
		t.Fatal(err)
	}
}

func TestAddresses(t *testing.T) {
	srv := start(t, serve.Options{})
	for role, a := range srv.Addresses() {
		if !strings.HasPrefix(a, "tcp://127.0.0.1:") {
			t.Errorf("%s at %s", role, a)
		}
	}
	if runtime.GOOS != "linux" && runtime.GOOS != "darwin" {
		if _, err := serve.Start(context.Background(), specs(), serve.Options{Transport: "serial"}); err == nil {
			t.Error("serial served without pseudo-terminals")
		}
		return
	}
	ser := start(t, serve.Options{Transport: "serial", Baud: 9600})
	for role, a := range ser.Addresses() {
		if !strings.HasPrefix(a, "serial:///dev/") || !strings.HasSuffix(a, "?baud=9600") {
			t.Errorf("%s at %s", role, a)
		}
	}
	w := connect(t, ser, "source")
	w.want("*OPC?", "1")
}

// The source's output watchdog over the wire: armed and queried, it switches the
// output off and programs 0 V when not armed again in time, and queues +301 for it;
// 0, OFF and *RST disarm it; a bad time is out of range.
func TestSourceWatchdogCommands(t *testing.T) {
	srv := start(t, serve.Options{})
	w := connect(t, srv, "source")
	w.want("OUTP:WATC?", "+0.000000000E+00")
	w.noReply("OUTP:WATC -1", `-222,"Data out of range"`)
	w.noReply("OUTP:WATC 7200", `-222,"Data out of range"`)
	w.noReply("OUTP:WATC MAYBE", `-104,"Data type error"`)
	w.send("SOUR:VOLT 0.01;:OUTP ON;:OUTPut:WATChdog:TIMe 0.1")
	w.want("OUTP:WATC?", "+1.000000000E-01")
	time.Sleep(150 * time.Millisecond)
	w.want("OUTP?;SOUR:VOLT?;OUTP:WATC?", "0;+0.000000000E+00;+0.000000000E+00")
	w.want("SYST:ERR?", `+301,"Output watchdog ran out: output off, 0 V"`)
	w.want("SYST:ERR?", `0,"No error"`)
	for _, stop := range []string{"OUTP:WATC 0", "OUTP:WATC OFF", "*RST"} {
		w.send("SOUR:VOLT 0.01;:OUTP ON;:OUTP:WATC 0.1")
		w.send(stop)
		w.want("OUTP:WATC?", "+0.000000000E+00")
		time.Sleep(150 * time.Millisecond)
		if stop != "*RST" {
			w.want("OUTP?", "1")
		}
		w.want("SYST:ERR?", `0,"No error"`)
	}
}

// The served switch and the meter's current function, line by line, on a two-channel
// current card (quiet: 4 mA + 0 offset at zero input, the seed's offset overridden).
func TestSwitchAndCurrentCommands(t *testing.T) {
	sp := specs()
	sp[1].Settings = map[string]string{"noise": "0V", "gain_error": "0", "offset": "0V", "nplc": "0.01",
		"current_noise": "0A", "current_gain_error": "0", "current_offset": "0A"}
	sp[2].Settings = map[string]string{"seed": "3", "output": "current", "channels": "2", "offset": "0A", "noise": "0A"}
	sp = append(sp, instruments.Spec{Role: "mux", Kind: instruments.KindSwitch, Address: "sim://switch"})
	srv, err := serve.Start(context.Background(), sp, serve.Options{})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { srv.Close() })
	if err := srv.LoadUnit(context.Background(), "LP-000001"); err != nil {
		t.Fatal(err)
	}
	sw, m := connect(t, srv, "mux"), connect(t, srv, "meter")
	sw.want("*IDN?", "Trimline Sim,RM-16,RM000003,1.0")
	sw.want("ROUT:CLOS?", "(@)")
	m.send("CONF:CURR:DC")
	m.want("READ?", "+0.000000000E+00") // released: nothing on the meter
	sw.send("ROUT:CLOS (@2)")
	sw.want("ROUTE:CLOSE?", "(@2)")
	time.Sleep(20 * time.Millisecond)   // real time: τ = 1 ms
	m.want("READ?", "+4.000000000E-03") // 4 mA at zero input, offset 0
	m.send("CURR:DC:NPLC 0.02")
	m.want("SENS:CURR:DC:NPLC?", "+2.000000000E-02")
	m.noReply("CONF:CURR:DC 5", `-222,"Data out of range"`)
	m.send("CONF:VOLT:DC")
	m.want("READ?", "+0.000000000E+00") // a current card shows no voltage
	sw.noReply("ROUT:CLOS (@3)", `-222,"Data out of range"`)
	sw.noReply("ROUT:CLOS 2", `-104,"Data type error"`)
	sw.noReply("ROUT:CLOS 2)", `-104,"Data type error"`) // a closing bracket alone is no channel list
	sw.want("ROUT:CLOS?", "(@2)")
	sw.send("ROUT:OPEN:ALL")
	sw.want("ROUT:CLOS?", "(@)")
	sw.send("ROUT:CLOS (@1)")
	sw.send("*RST")
	sw.want("ROUT:CLOS?", "(@)")
}
