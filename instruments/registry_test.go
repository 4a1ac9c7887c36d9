package instruments_test

import (
	"context"
	"errors"
	"fmt"
	"math"
	"net/url"
	"reflect"
	"slices"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"trimline/instruments"
)

// The registry is process-wide and has no way to forget a driver, so every test
// registers schemes of its own, fresh on every run (go test -count=N).
var schemeSeq atomic.Int64

func newScheme(t *testing.T) string {
	t.Helper()
	return fmt.Sprintf("regtest%d", schemeSeq.Add(1))
}

// inst is an opened fake instrument; it counts its Close calls.
type inst struct {
	spec   instruments.Spec
	closes *atomic.Int32
}

func (i inst) Close() error { i.closes.Add(1); return nil }

// driver opens fakes; it fails for addresses whose host is "broken".
type driver struct {
	closes *atomic.Int32
	opened []string // addresses, in the order Open saw them
}

func (d *driver) Open(ctx context.Context, addr *url.URL, spec instruments.Spec) (instruments.Instrument, error) {
	if addr.Host == "broken" {
		return nil, errors.New("no answer")
	}
	d.opened = append(d.opened, spec.Address)
	return inst{spec, d.closes}, nil
}

// groupDriver opens every spec of its scheme at once.
type groupDriver struct {
	driver
	groups [][]instruments.Spec
	fail   error
}

func (g *groupDriver) OpenGroup(ctx context.Context, specs []instruments.Spec) ([]instruments.Instrument, error) {
	g.groups = append(g.groups, specs)
	if g.fail != nil {
		return nil, g.fail
	}
	out := make([]instruments.Instrument, len(specs))
	for i, s := range specs {
		out[i] = inst{s, g.closes}
	}
	return out, nil
}

// checkingDriver refuses any setting named "bad".
type checkingDriver struct{ *driver }

func (checkingDriver) CheckSettings(spec instruments.Spec) error {
	if v, ok := spec.Settings["bad"]; ok {
		return &instruments.SettingError{Key: "bad", Msg: fmt.Sprintf("%q is not allowed", v)}
	}
	return nil
}

func newDriver() *driver { return &driver{closes: new(atomic.Int32)} }

func TestRegisterLookup(t *testing.T) {
	a, b := newScheme(t), newScheme(t)
	da, db := newDriver(), newDriver()
	instruments.Register(a, da)
	instruments.Register(b, db)
	for _, tc := range []struct {
		addr string
		want instruments.Driver
		host string
	}{
		{a + "://meter", da, "meter"},
		{b + "://192.0.2.7:5025", db, "192.0.2.7:5025"},
		{a + ":///dev/ttyUSB0?baud=9600", da, ""},
		{strings.ToUpper(a) + "://meter", da, "meter"}, // schemes are case-insensitive (RFC 3986)
	} {
		drv, u, err := instruments.Lookup(tc.addr)
		if err != nil {
			t.Fatalf("Lookup(%q): %v", tc.addr, err)
		}
		if drv != tc.want {
			t.Errorf("Lookup(%q) returned the wrong driver", tc.addr)
		}
		if u == nil || u.Host != tc.host {
			t.Errorf("Lookup(%q) URL = %v, want host %q", tc.addr, u, tc.host)
		}
	}
	if _, u, _ := instruments.Lookup(a + ":///dev/ttyUSB0?baud=9600"); u.Path != "/dev/ttyUSB0" || u.Query().Get("baud") != "9600" {
		t.Errorf("Lookup kept path %q and query %q, want /dev/ttyUSB0 and baud=9600", u.Path, u.RawQuery)
	}
}

func TestSchemesSorted(t *testing.T) {
	a, b := newScheme(t), newScheme(t)
	instruments.Register(b, newDriver()) // out of order on purpose
	instruments.Register(a, newDriver())
	got := instruments.Schemes()
	if !slices.IsSorted(got) {
		t.Errorf("Schemes() = %v, want sorted", got)
	}
	for _, s := range []string{a, b} {
		if !slices.Contains(got, s) {
			t.Errorf("Schemes() = %v, want it to hold %q", got, s)
		}
	}
}

func mustPanic(t *testing.T, what, want string, f func()) {
	t.Helper()
	defer func() {
		t.Helper()
		r := recover()
		if r == nil {
			t.Fatalf("%s did not panic", what)
		}
		if msg := fmt.Sprint(r); !strings.Contains(msg, want) {
			t.Errorf("%s panicked with %q, want it to mention %q", what, msg, want)
		}
	}()
	f()
}

func TestRegisterNilPanics(t *testing.T) {
	s := newScheme(t)
	mustPanic(t, "Register(nil)", "nil", func() { instruments.Register(s, nil) })
	if slices.Contains(instruments.Schemes(), s) {
		t.Errorf("a refused nil driver was registered as %q", s)
	}
}

func TestRegisterDuplicatePanics(t *testing.T) {
	s := newScheme(t)
	first := newDriver()
	instruments.Register(s, first)
	mustPanic(t, "Register twice", s, func() { instruments.Register(s, newDriver()) })
	if drv, _, err := instruments.Lookup(s + "://x"); err != nil || drv != first {
		t.Errorf("after a refused second Register, Lookup = %v, %v: want the first driver", drv, err)
	}
}

func TestLookupUnknownScheme(t *testing.T) {
	instruments.Register(newScheme(t), newDriver())
	known := "(known: " + strings.Join(instruments.Schemes(), ", ") + ")"
	for _, addr := range []string{"nosuch://meter", "/dev/ttyUSB0", "meter"} {
		drv, u, err := instruments.Lookup(addr)
		if !errors.Is(err, instruments.ErrUnknownScheme) {
			t.Errorf("Lookup(%q) err = %v, want one wrapping ErrUnknownScheme", addr, err)
			continue
		}
		if drv != nil || u != nil {
			t.Errorf("Lookup(%q) returned a driver or URL with its error", addr)
		}
		if msg := err.Error(); !strings.Contains(msg, known) || !strings.Contains(msg, fmt.Sprintf("%q", addr)) {
			t.Errorf("Lookup(%q) err = %q, want it to name the address and the known schemes %s", addr, msg, known)
		}
	}
	if _, _, err := instruments.Lookup("nosuch://meter"); !strings.Contains(err.Error(), `scheme "nosuch"`) {
		t.Errorf("Lookup(nosuch://meter) err = %q, want it to name the scheme", err)
	}
}

func TestLookupMalformed(t *testing.T) {
	s := newScheme(t)
	instruments.Register(s, newDriver())
	for _, addr := range []string{
		s + "://[::1",       // unclosed IPv6 literal
		s + "://host:port",  // port not a number
		s + "://h\x7fst",    // control character
		"://meter",          // empty scheme before "://"
		s + "://ex%zzample", // bad escape
	} {
		drv, u, err := instruments.Lookup(addr)
		if err == nil {
			t.Errorf("Lookup(%q) accepted a malformed address", addr)
			continue
		}
		if drv != nil || u != nil {
			t.Errorf("Lookup(%q) returned a driver or URL with its error", addr)
		}
		if !strings.Contains(err.Error(), fmt.Sprintf("%q", addr)) {
			t.Errorf("Lookup(%q) err = %q, want it to name the address", addr, err)
		}
		if errors.Is(err, instruments.ErrUnknownScheme) {
			t.Errorf("Lookup(%q) err = %q wraps ErrUnknownScheme; a malformed address is not an unknown scheme", addr, err)
		}
	}
}

func TestRegisterConcurrent(t *testing.T) {
	var wg sync.WaitGroup
	schemes := make([]string, 8)
	for i := range schemes {
		schemes[i] = newScheme(t)
	}
	for _, s := range schemes {
		wg.Add(1)
		go func() {
			defer wg.Done()
			instruments.Register(s, newDriver())
			instruments.Schemes()
			if _, _, err := instruments.Lookup(s + "://x"); err != nil {
				t.Errorf("Lookup right after Register(%q): %v", s, err)
			}
		}()
	}
	wg.Wait()
}

func TestCheck(t *testing.T) {
	s := newScheme(t)
	instruments.Register(s, checkingDriver{newDriver()})
	plain := newScheme(t)
	instruments.Register(plain, newDriver())

	good := []instruments.Spec{
		{Role: "source", Address: s + "://source", Settings: map[string]string{"range": "1"}},
		{Role: "meter", Address: plain + "://meter", Settings: map[string]string{"bad": "ignored by a driver that checks nothing"}},
	}
	if err := instruments.Check(good); err != nil {
		t.Errorf("Check(good) = %v", err)
	}

	err := instruments.Check([]instruments.Spec{good[0], {Role: "dut", Address: s + "://dut", Settings: map[string]string{"bad": "x"}}})
	var se *instruments.SettingError
	if !errors.As(err, &se) || se.Key != "bad" {
		t.Fatalf("Check(bad setting) = %v, want a *SettingError for key \"bad\"", err)
	}
	if !strings.HasPrefix(err.Error(), "dut: ") || !strings.Contains(err.Error(), `setting "bad": "x" is not allowed`) {
		t.Errorf("Check(bad setting) = %q, want the role first and the key and message", err)
	}

	err = instruments.Check([]instruments.Spec{{Role: "meter", Address: "nosuch://meter"}})
	if !errors.Is(err, instruments.ErrUnknownScheme) || !strings.HasPrefix(err.Error(), "meter: ") {
		t.Errorf("Check(unknown scheme) = %v, want the role first and ErrUnknownScheme", err)
	}
}

func TestOpenAll(t *testing.T) {
	ctx := context.Background()
	g, p := newScheme(t), newScheme(t)
	gd := &groupDriver{driver: *newDriver()}
	pd := newDriver()
	instruments.Register(g, gd)
	instruments.Register(p, pd)

	specs := []instruments.Spec{
		{Role: "source", Address: g + "://source"},
		{Role: "meter", Address: p + "://meter"},
		{Role: "dut", Address: g + "://dut"},
	}
	all, err := instruments.OpenAll(ctx, specs)
	if err != nil {
		t.Fatalf("OpenAll: %v", err)
	}
	for _, s := range specs {
		in, ok := all[s.Role].(inst)
		if !ok || in.spec.Address != s.Address {
			t.Errorf("OpenAll()[%q] = %v, want the instrument opened for %s", s.Role, all[s.Role], s.Address)
		}
	}
	if len(all) != len(specs) {
		t.Errorf("OpenAll returned %d instruments, want %d", len(all), len(specs))
	}
	// The group driver sees its specs together, in order; Open is not called for them.
	if want := [][]instruments.Spec{{specs[0], specs[2]}}; !reflect.DeepEqual(gd.groups, want) {
		t.Errorf("OpenGroup calls = %v, want one with %v", gd.groups, want[0])
	}
	if len(gd.opened) != 0 {
		t.Errorf("a GroupDriver's Open was called for %v", gd.opened)
	}
	if want := []string{p + "://meter"}; !slices.Equal(pd.opened, want) {
		t.Errorf("Open calls = %v, want %v", pd.opened, want)
	}
}

func TestOpenAllClosesOnError(t *testing.T) {
	ctx := context.Background()
	p, g := newScheme(t), newScheme(t)
	pd := newDriver()
	instruments.Register(p, pd)
	gd := &groupDriver{driver: *newDriver(), fail: errors.New("bench on fire")}
	instruments.Register(g, gd)

	for _, tc := range []struct {
		name  string
		specs []instruments.Spec
		want  string
	}{
		{"open fails", []instruments.Spec{
			{Role: "source", Address: p + "://source"},
			{Role: "meter", Address: p + "://broken"},
		}, "open meter at " + p + "://broken: no answer"},
		{"unknown scheme", []instruments.Spec{
			{Role: "source", Address: p + "://source"},
			{Role: "dut", Address: "nosuch://dut"},
		}, "dut: address \"nosuch://dut\""},
		{"group fails", []instruments.Spec{
			{Role: "source", Address: p + "://source"},
			{Role: "meter", Address: g + "://meter"},
		}, "open " + g + " instruments: bench on fire"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			pd.closes.Store(0)
			pd.opened = nil
			all, err := instruments.OpenAll(ctx, tc.specs)
			if err == nil || all != nil {
				t.Fatalf("OpenAll = %v, %v: want nil and an error", all, err)
			}
			if !strings.Contains(err.Error(), tc.want) {
				t.Errorf("OpenAll err = %q, want it to contain %q", err, tc.want)
			}
			if opened, closed := len(pd.opened), int(pd.closes.Load()); opened == 0 || closed != opened {
				t.Errorf("OpenAll opened %d instruments and closed %d after the error, want every one closed", opened, closed)
			}
		})
	}
}

func TestSettingError(t *testing.T) {
	err := error(&instruments.SettingError{Key: "baud", Msg: "\"fast\" is not a number"})
	if got, want := err.Error(), `setting "baud": "fast" is not a number`; got != want {
		t.Errorf("Error() = %q, want %q", got, want)
	}
}

func TestReadingValid(t *testing.T) {
	inf, nan := math.Inf(1), math.NaN()
	for _, tc := range []struct {
		r    instruments.Reading
		want bool
	}{
		{instruments.Reading{Value: 1.5}, true},
		{instruments.Reading{Value: 0}, true},
		{instruments.Reading{Value: 9.9e37, Flag: instruments.FlagOverload}, false},
		{instruments.Reading{Value: 1, Flag: instruments.FlagNaN}, false},
		{instruments.Reading{Value: nan}, false},
		{instruments.Reading{Value: inf}, false},
		{instruments.Reading{Value: -inf}, false},
	} {
		if got := tc.r.Valid(); got != tc.want {
			t.Errorf("%+v.Valid() = %v, want %v", tc.r, got, tc.want)
		}
	}
}

func TestFlagAndIdentityStrings(t *testing.T) {
	for f, want := range map[instruments.Flag]string{
		instruments.FlagNone: "ok", instruments.FlagOverload: "overload", instruments.FlagNaN: "nan", 7: "flag(7)",
	} {
		if got := f.String(); got != want {
			t.Errorf("Flag(%d).String() = %q, want %q", int(f), got, want)
		}
	}
	id := instruments.Identity{Maker: "ACME", Model: "DV-65", Serial: "0", Firmware: "1.0"}
	if got, want := id.String(), "ACME,DV-65,0,1.0"; got != want {
		t.Errorf("Identity.String() = %q, want %q", got, want)
	}
}

func TestRealClockSleep(t *testing.T) {
	var c instruments.Clock = instruments.RealClock{}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	start := time.Now()
	if err := c.Sleep(ctx, time.Minute); !errors.Is(err, context.Canceled) {
		t.Errorf("Sleep with a cancelled context = %v, want context.Canceled", err)
	}
	if err := c.Sleep(ctx, 0); !errors.Is(err, context.Canceled) {
		t.Errorf("Sleep(0) with a cancelled context = %v, want context.Canceled", err)
	}
	if el := time.Since(start); el > time.Second {
		t.Errorf("Sleep with a cancelled context took %v", el)
	}
	if err := c.Sleep(context.Background(), time.Millisecond); err != nil {
		t.Errorf("Sleep(1 ms) = %v", err)
	}
	if now := c.Now(); now.Before(start) {
		t.Errorf("Now() = %v, before %v", now, start)
	}
}
