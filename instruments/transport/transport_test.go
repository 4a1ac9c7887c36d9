package transport_test

import (
	"context"
	"errors"
	"io/fs"
	"net"
	"net/url"
	"runtime"
	"strings"
	"testing"
	"time"

	"trimline/instruments"
	"trimline/instruments/sim/serve"
	"trimline/instruments/transport"
	"trimline/instruments/transport/transporttest"
)

const timeout = 200 * time.Millisecond

func mustURL(t *testing.T, s string) *url.URL {
	t.Helper()
	u, err := url.Parse(s)
	if err != nil {
		t.Fatal(err)
	}
	return u
}

func TestCheckAddress(t *testing.T) {
	good := []string{
		"tcp://127.0.0.1:5025", "tcp://[::1]:40000", "tcp://bench-dmm.local:5025/",
		"serial:///dev/ttyUSB0", "serial:///dev/ttyUSB0?baud=115200&parity=none&data=8&stop=1",
		"serial://COM3?baud=9600", "serial:///dev/ttyS1?parity=even&data=7&stop=2", "serial:///dev/ttyS1?stop=1.5",
		"usbtmc:///dev/usbtmc0",
	}
	for _, a := range good {
		if err := transport.CheckAddress(mustURL(t, a)); err != nil {
			t.Errorf("%s: %v", a, err)
		}
	}
	bad := map[string]string{
		"tcp://127.0.0.1":                     "no port",
		"tcp://:5025":                         "no host",
		"tcp://127.0.0.1:0":                   "port",
		"tcp://127.0.0.1:5025/x":              "nothing else",
		"tcp://127.0.0.1:5025?a=1":            "nothing else",
		"serial://":                           "no port name",
		"serial:///dev/ttyUSB0?baud=fast":     "baud",
		"serial:///dev/ttyUSB0?baud=-9600":    "baud",
		"serial:///dev/ttyUSB0?data=9":        "data",
		"serial:///dev/ttyUSB0?parity=maybe":  "parity",
		"serial:///dev/ttyUSB0?stop=3":        "stop",
		"serial:///dev/ttyUSB0?flow=rtscts":   "unknown parameter",
		"serial:///dev/ttyUSB0?baud=1&baud=2": "2 times",
		"serial://host/dev/ttyUSB0":           "three slashes",
		"usbtmc://":                           "device path",
		"usbtmc:///dev/usbtmc0?timeout=1":     "device path",
		"gpib://0/22":                         "scheme",
	}
	for a, want := range bad {
		err := transport.CheckAddress(mustURL(t, a))
		if err == nil || !strings.Contains(err.Error(), want) {
			t.Errorf("%s: err = %v, want one mentioning %q", a, err, want)
		}
	}
}

// serveBench serves a quiet bench over tr and returns it.
func serveBench(t *testing.T, tr string) *serve.Server {
	t.Helper()
	if tr != "tcp" && runtime.GOOS != "linux" && !(tr == "serial" && runtime.GOOS == "darwin") {
		t.Skipf("no %s endpoints on %s", tr, runtime.GOOS)
	}
	specs := []instruments.Spec{
		{Role: "meter", Address: "sim://meter", Settings: map[string]string{"nplc": "0.01"}},
		{Role: "dut", Address: "sim://dut"},
	}
	srv, err := serve.Start(context.Background(), specs, serve.Options{Transport: tr})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { srv.Close() })
	return srv
}

func dial(t *testing.T, addr string, opt transport.Options) transport.Conn {
	t.Helper()
	if opt.Timeout == 0 {
		opt.Timeout = timeout
	}
	c, err := transport.Dial(context.Background(), mustURL(t, addr), opt)
	if err != nil {
		t.Fatalf("Dial(%s): %v", addr, err)
	}
	t.Cleanup(func() { c.Close() })
	return c
}

func exchange(t *testing.T, c transport.Conn, line string) string {
	t.Helper()
	ctx := context.Background()
	if err := c.WriteLine(ctx, line); err != nil {
		t.Fatalf("WriteLine(%q): %v", line, err)
	}
	r, err := c.ReadLine(ctx)
	if err != nil {
		t.Fatalf("ReadLine after %q: %v", line, err)
	}
	return r
}

// contract checks one transport against the served simulator: an exchange, a
// timeout, a per-call timeout, a cancelled read, close twice.
func contract(t *testing.T, tr string) {
	srv := serveBench(t, tr)
	addr := srv.Addresses()["meter"]
	c := dial(t, addr, transport.Options{})
	if r := exchange(t, c, "*IDN?"); !strings.HasPrefix(r, "Trimline Sim,DV-65,") {
		t.Fatalf("*IDN? = %q", r)
	}
	if r := exchange(t, c, "SAMP:COUN 3;SAMP:COUN?"); r != "3" {
		t.Fatalf("SAMP:COUN? = %q", r)
	}

	// The peer stays silent: ErrTimeout after the exchange timeout.
	srv.SetFault("meter", serve.Fault{NoReply: true})
	ctx := context.Background()
	if err := c.WriteLine(ctx, "*IDN?"); err != nil {
		t.Fatal(err)
	}
	start := time.Now()
	_, err := c.ReadLine(ctx)
	if el := time.Since(start); !errors.Is(err, transport.ErrTimeout) || el < timeout*9/10 || el > timeout+500*time.Millisecond {
		t.Fatalf("silent peer: ReadLine = %v after %v, want ErrTimeout after %v", err, el, timeout)
	}
	// WithTimeout shortens one call.
	start = time.Now()
	_, err = c.ReadLine(transport.WithTimeout(ctx, 50*time.Millisecond))
	if el := time.Since(start); !errors.Is(err, transport.ErrTimeout) || el >= timeout*9/10 {
		t.Fatalf("WithTimeout(50 ms): ReadLine = %v after %v", err, el)
	}
	// A context deadline shorter than the timeout reports the context's error.
	dctx, cancel := context.WithTimeout(ctx, 30*time.Millisecond)
	_, err = c.ReadLine(dctx)
	cancel()
	if !errors.Is(err, context.DeadlineExceeded) || errors.Is(err, transport.ErrTimeout) {
		t.Fatalf("ctx deadline: ReadLine = %v, want context.DeadlineExceeded", err)
	}
	// A cancel aborts a blocked read at once.
	cctx, cancel := context.WithCancel(ctx)
	time.AfterFunc(30*time.Millisecond, cancel)
	start = time.Now()
	_, err = c.ReadLine(cctx)
	if el := time.Since(start); !errors.Is(err, context.Canceled) || el >= timeout*9/10 {
		t.Fatalf("cancelled ReadLine = %v after %v, want context.Canceled promptly", err, el)
	}

	if err := c.Close(); err != nil {
		t.Fatalf("Close: %v", err)
	}
	if err := c.Close(); err != nil {
		t.Fatalf("second Close = %v, want nil", err)
	}
	if _, err := c.ReadLine(ctx); !errors.Is(err, transport.ErrClosed) {
		t.Fatalf("ReadLine after Close = %v, want ErrClosed", err)
	}
	if err := c.WriteLine(ctx, "*IDN?"); !errors.Is(err, transport.ErrClosed) || !transport.NotSent(err) {
		t.Fatalf("WriteLine after Close = %v, want ErrClosed, not sent", err)
	}

	// The DUT port over the same transport.
	srv.LoadUnit(ctx, "BRX-000042")
	d := dial(t, srv.Addresses()["dut"], transport.Options{})
	if r := exchange(t, d, "SN?"); r != "BRX-000042" {
		t.Fatalf("SN? = %q", r)
	}
	if r := exchange(t, d, "LID?"); r != "CLOSED" {
		t.Fatalf("LID? = %q", r)
	}
}

func TestTCP(t *testing.T)    { contract(t, "tcp") }
func TestSerial(t *testing.T) { contract(t, "serial") }
func TestUSBTMC(t *testing.T) { contract(t, "usbtmc") }

func TestTCPLinkDown(t *testing.T) {
	srv := serveBench(t, "tcp")
	c := dial(t, srv.Addresses()["meter"], transport.Options{})
	exchange(t, c, "*IDN?")
	srv.SetFault("meter", serve.Fault{DropAfter: 1})
	ctx := context.Background()
	if err := c.WriteLine(ctx, "*IDN?"); err != nil {
		t.Fatal(err)
	}
	_, err := c.ReadLine(ctx)
	if !errors.Is(err, transport.ErrLinkDown) {
		t.Fatalf("ReadLine on a dropped link = %v, want ErrLinkDown", err)
	}
	// The peer's close is seen before the next write: nothing is sent.
	err = c.WriteLine(ctx, "*IDN?")
	if !errors.Is(err, transport.ErrLinkDown) || !transport.NotSent(err) {
		t.Fatalf("WriteLine on a dropped link = %v, want ErrLinkDown, not sent", err)
	}
}

func TestSerialLinkDown(t *testing.T) {
	srv := serveBench(t, "serial")
	c := dial(t, srv.Addresses()["meter"], transport.Options{})
	exchange(t, c, "*IDN?")
	srv.SetFault("meter", serve.Fault{DropAfter: 1})
	ctx := context.Background()
	if err := c.WriteLine(ctx, "*IDN?"); err != nil {
		t.Fatal(err)
	}
	if _, err := c.ReadLine(ctx); !errors.Is(err, transport.ErrLinkDown) {
		t.Fatalf("ReadLine on a hung-up terminal = %v, want ErrLinkDown", err)
	}
}

func TestMissingDevice(t *testing.T) {
	for _, a := range []string{"serial:///dev/trimline-no-such-port?baud=9600", "usbtmc:///dev/trimline-no-such-usbtmc"} {
		if strings.HasPrefix(a, "usbtmc") && runtime.GOOS != "linux" {
			continue
		}
		_, err := transport.Dial(context.Background(), mustURL(t, a), transport.Options{})
		if err == nil || !errors.Is(err, fs.ErrNotExist) || !strings.Contains(err.Error(), "/dev/trimline-no-such-") {
			t.Errorf("Dial(%s) = %v, want an error naming the device that wraps fs.ErrNotExist", a, err)
		}
	}
	// A TCP port nobody listens on.
	ln, _ := net.Listen("tcp", "127.0.0.1:0")
	addr := ln.Addr().String()
	ln.Close()
	if _, err := transport.Dial(context.Background(), mustURL(t, "tcp://"+addr), transport.Options{}); err == nil {
		t.Errorf("Dial to a closed port succeeded")
	}
}

// lineServer is a raw TCP peer: answer maps each line received (terminated by
// "\r") to the bytes to send.
func lineServer(t *testing.T, answer func(line string) string) string {
	t.Helper()
	return "tcp://" + transporttest.LineServer(t, '\r', func(l []byte) []byte { return []byte(answer(string(l))) })
}

func TestTerminatorsAndFraming(t *testing.T) {
	addr := lineServer(t, func(l string) string {
		switch l {
		case "TWO?":
			return "first\r\nsecond\r\n"
		case "LONG?":
			return strings.Repeat("x", transport.MaxLine+10)
		}
		return "re:" + l + "\r\n"
	})
	c := dial(t, addr, transport.Options{ReadTerm: "\r\n", WriteTerm: "\r"})
	if r := exchange(t, c, "A?"); r != "re:A?" {
		t.Fatalf("reply %q", r)
	}
	// Two lines in one segment are two replies; a reply still unread when a line is
	// written is stale and dropped.
	if r := exchange(t, c, "TWO?"); r != "first" {
		t.Fatalf("first of two = %q", r)
	}
	if r := exchange(t, c, "B?"); r != "re:B?" {
		t.Fatalf("after a stale line: %q, want re:B?", r)
	}
	ctx := context.Background()
	c.WriteLine(ctx, "LONG?")
	if _, err := c.ReadLine(ctx); !errors.Is(err, transport.ErrLineTooLong) {
		t.Fatalf("an endless line: %v, want ErrLineTooLong", err)
	}
	// "\n" as terminator also removes a "\r" before it.
	c2 := dial(t, addr, transport.Options{WriteTerm: "\r"})
	if r := exchange(t, c2, "C?"); r != "re:C?" {
		t.Fatalf("CRLF reply with LF terminator: %q", r)
	}
}

func TestCancelledBeforeStart(t *testing.T) {
	addr := lineServer(t, func(l string) string { return "" })
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := transport.Dial(ctx, mustURL(t, addr), transport.Options{}); !errors.Is(err, context.Canceled) {
		t.Fatalf("Dial with a cancelled ctx = %v", err)
	}
	c := dial(t, addr, transport.Options{})
	if err := c.WriteLine(ctx, "X"); !errors.Is(err, context.Canceled) || !transport.NotSent(err) {
		t.Fatalf("WriteLine with a cancelled ctx = %v", err)
	}
	if _, err := c.ReadLine(ctx); !errors.Is(err, context.Canceled) {
		t.Fatalf("ReadLine with a cancelled ctx = %v", err)
	}
}

func transportTimeout(err error) bool { return errors.Is(err, transport.ErrTimeout) }
