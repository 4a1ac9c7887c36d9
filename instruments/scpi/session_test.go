package scpi_test

import (
	"context"
	"errors"
	"strings"
	"sync"
	"testing"

	"trimline/instruments/scpi"
	"trimline/instruments/transport"
)

// fakeInstrument stands behind every fakeConn of a test: it logs the lines that
// reached it and answers through reply. fail, when set, decides per line what goes
// wrong with a link: "drop-before" (the link is down before the line is sent),
// "drop-after" (the line arrives, then the link drops), "timeout" (the line
// arrives, no reply comes).
type fakeInstrument struct {
	mu       sync.Mutex
	received []string
	reply    func(line string) (string, bool)
	fail     func(line string, link int) string
	links    int
}

func (f *fakeInstrument) count(line string) int {
	f.mu.Lock()
	defer f.mu.Unlock()
	n := 0
	for _, l := range f.received {
		if l == line {
			n++
		}
	}
	return n
}

type fakeConn struct {
	f       *fakeInstrument
	link    int
	queue   []string
	failure string
	closed  bool
}

func (f *fakeInstrument) dial(context.Context) (transport.Conn, error) {
	f.mu.Lock()
	defer f.mu.Unlock()
	f.links++
	return &fakeConn{f: f, link: f.links}, nil
}

func (c *fakeConn) WriteLine(ctx context.Context, s string) error {
	if err := ctx.Err(); err != nil {
		return &transport.Error{Op: "write", Kind: err, NotSent: true}
	}
	if c.failure == "drop-after" || c.failure == "drop-before" {
		return &transport.Error{Op: "write", Kind: transport.ErrLinkDown, NotSent: true}
	}
	f := c.f
	if f.fail != nil {
		c.failure = f.fail(s, c.link)
	}
	if c.failure == "drop-before" {
		return &transport.Error{Op: "write", Kind: transport.ErrLinkDown, NotSent: true}
	}
	f.mu.Lock()
	f.received = append(f.received, s)
	f.mu.Unlock()
	if c.failure != "" {
		return nil
	}
	if r, ok := f.reply(s); ok {
		c.queue = append(c.queue, r)
	}
	return nil
}

func (c *fakeConn) ReadLine(ctx context.Context) (string, error) {
	if err := ctx.Err(); err != nil {
		return "", &transport.Error{Op: "read", Kind: err}
	}
	switch c.failure {
	case "drop-after":
		return "", &transport.Error{Op: "read", Kind: transport.ErrLinkDown}
	case "timeout":
		c.failure = ""
		return "", &transport.Error{Op: "read", Kind: transport.ErrTimeout}
	}
	if len(c.queue) == 0 {
		return "", &transport.Error{Op: "read", Kind: transport.ErrTimeout}
	}
	r := c.queue[0]
	c.queue = c.queue[1:]
	return r, nil
}

func (c *fakeConn) Close() error { c.closed = true; return nil }

// newFake returns an instrument answering queries with "ok:<line>" and an empty
// error queue, and a session to it with two retries.
func newFake(t *testing.T) (*fakeInstrument, *scpi.Session) {
	f := &fakeInstrument{reply: func(l string) (string, bool) {
		switch {
		case l == "SYST:ERR?":
			return `0,"No error"`, true
		case strings.Contains(l, "?"):
			return "ok:" + l, true
		}
		return "", false
	}}
	c, _ := f.dial(context.Background())
	s := scpi.NewSession(c, scpi.Options{Redial: f.dial, Retries: 2})
	t.Cleanup(func() { s.Close() })
	return f, s
}

func TestQueryRetriedAcrossDroppedLink(t *testing.T) {
	f, s := newFake(t)
	f.fail = func(line string, link int) string {
		if link == 1 {
			return "drop-after"
		}
		return ""
	}
	r, err := s.Query(context.Background(), "*IDN?")
	if err != nil || r != "ok:*IDN?" {
		t.Fatalf("Query = %q, %v", r, err)
	}
	if s.Reconnects() != 1 || f.count("*IDN?") != 2 {
		t.Fatalf("reconnects %d, *IDN? received %d times; want 1 and 2", s.Reconnects(), f.count("*IDN?"))
	}
}

func TestRetriesBounded(t *testing.T) {
	f, s := newFake(t)
	f.fail = func(string, int) string { return "timeout" }
	_, err := s.Query(context.Background(), "SOUR:VOLT?")
	if !errors.Is(err, transport.ErrTimeout) || f.count("SOUR:VOLT?") != 3 {
		t.Fatalf("err %v after %d tries; want ErrTimeout after 3 (1 + 2 retries)", err, f.count("SOUR:VOLT?"))
	}
}

func TestNonIdempotentQueryNotRetried(t *testing.T) {
	for _, q := range []string{"SYST:ERR?", "MEAS:VOLT:DC?", "*TST?"} {
		f, s := newFake(t)
		f.fail = func(string, int) string { return "drop-after" }
		if _, err := s.Query(context.Background(), q); !errors.Is(err, transport.ErrLinkDown) || f.count(q) != 1 {
			t.Errorf("%s: err %v, received %d times; want ErrLinkDown after 1", q, err, f.count(q))
		}
	}
}

func TestWriteNeverRepeated(t *testing.T) {
	f, s := newFake(t)
	// The command reaches the instrument, then the link drops: Write cannot know,
	// the drain after it (Exec) must say so, and nothing is sent twice.
	f.fail = func(line string, link int) string {
		if line == "OUTP ON" {
			return "drop-after"
		}
		return ""
	}
	err := s.Exec(context.Background(), "OUTP ON")
	var lost *scpi.LostError
	if !errors.As(err, &lost) || lost.Command != "OUTP ON" || !errors.Is(err, transport.ErrLinkDown) {
		t.Fatalf("Exec across a drop = %v, want a *LostError for OUTP ON", err)
	}
	if f.count("OUTP ON") != 1 || f.count("SYST:ERR?") != 0 {
		t.Fatalf("OUTP ON received %d times, SYST:ERR? %d times; want 1 and 0 (no drain over a new link)", f.count("OUTP ON"), f.count("SYST:ERR?"))
	}
	// A Write that is followed by an idempotent query on a failing link: the query
	// is not retried either, because it would hide the command's fate.
	f.fail = func(line string, link int) string {
		if line == "SOUR:VOLT?" && link == 2 {
			return "drop-after"
		}
		return ""
	}
	if err := s.Write(context.Background(), "SOUR:VOLT 1"); err != nil {
		t.Fatal(err)
	}
	if _, err := s.Query(context.Background(), "SOUR:VOLT?"); !errors.As(err, &lost) || lost.Command != "SOUR:VOLT 1" {
		t.Fatalf("query after an unconfirmed command = %v, want a *LostError for it", err)
	}
	if f.count("SOUR:VOLT 1") != 1 || f.count("SOUR:VOLT?") != 1 {
		t.Fatal("something was sent twice")
	}
	// Afterwards the session reconnects as usual.
	f.fail = nil
	if r, err := s.Query(context.Background(), "SOUR:VOLT?"); err != nil || r != "ok:SOUR:VOLT?" {
		t.Fatalf("Query after the lost command = %q, %v", r, err)
	}
}

func TestLineThatNeverLeftIsSentOnce(t *testing.T) {
	f, s := newFake(t)
	// The link is known down before the command is written (the peer closed while
	// idle): it is sent once on a new link. That is not a repetition.
	f.fail = func(line string, link int) string {
		if link == 1 {
			return "drop-before"
		}
		return ""
	}
	if err := s.Exec(context.Background(), "OUTP OFF"); err != nil {
		t.Fatalf("Exec = %v", err)
	}
	if f.count("OUTP OFF") != 1 || s.Reconnects() != 1 {
		t.Fatalf("OUTP OFF received %d times over %d reconnects", f.count("OUTP OFF"), s.Reconnects())
	}
}

func TestDrainErrors(t *testing.T) {
	f, s := newFake(t)
	queue := []string{`-113,"Undefined header"`, `-222,"Data out of range"`}
	f.reply = func(l string) (string, bool) {
		if l == "SYST:ERR?" {
			if len(queue) == 0 {
				return `+0,"No error"`, true
			}
			e := queue[0]
			queue = queue[1:]
			return e, true
		}
		return "", false
	}
	err := s.Exec(context.Background(), "SOUR:VOLX 1")
	var ie *scpi.InstrumentError
	if !errors.As(err, &ie) || ie.Code != -113 || ie.Text != "Undefined header" || ie.Command != "SOUR:VOLX 1" {
		t.Fatalf("Exec = %v, want the first entry as *InstrumentError", err)
	}
	if !strings.Contains(err.Error(), "1 more") || f.count("SYST:ERR?") != 3 {
		t.Fatalf("err %q after %d reads of the queue", err, f.count("SYST:ERR?"))
	}
	// A queue that never empties is bounded.
	f.reply = func(l string) (string, bool) { return `-350,"Queue overflow"`, true }
	s2 := scpi.NewSession(&fakeConn{f: f}, scpi.Options{MaxErrors: 5})
	if err := s2.DrainErrors(context.Background()); err == nil || !errors.As(err, &ie) || f.count("SYST:ERR?") != 3+5 {
		t.Fatalf("endless queue: %v after %d reads", err, f.count("SYST:ERR?")-3)
	}
	// A malformed entry is an error of its own.
	f.reply = func(l string) (string, bool) { return "garbage", true }
	if err := s2.DrainErrors(context.Background()); !errors.Is(err, scpi.ErrMalformed) {
		t.Fatalf("malformed entry: %v", err)
	}
}

func TestSessionHelpers(t *testing.T) {
	f, s := newFake(t)
	ctx := context.Background()
	answers := map[string]string{"*IDN?": "Trimline Sim,VS-100M,VS000001,1.0", "*OPC?": "1", "V?": "+1.5E-03",
		"O?": "9.9E37", "L?": "1,-9.9E37,9.91E37", "B?": "1,x"}
	f.reply = func(l string) (string, bool) { r, ok := answers[l]; return r, ok }
	if id, err := s.IDN(ctx); err != nil || id.Model != "VS-100M" {
		t.Fatalf("IDN = %+v, %v", id, err)
	}
	if err := s.Sync(ctx); err != nil {
		t.Fatal(err)
	}
	answers["*OPC?"] = "0"
	if err := s.Sync(ctx); !errors.Is(err, scpi.ErrMalformed) {
		t.Fatalf("Sync answered 0: %v", err)
	}
	if v, err := s.QueryFloat(ctx, "V?"); err != nil || v != 1.5e-3 {
		t.Fatalf("QueryFloat = %v, %v", v, err)
	}
	if _, err := s.QueryFloat(ctx, "O?"); !errors.Is(err, scpi.ErrFlagged) {
		t.Fatalf("QueryFloat of an overload = %v, want ErrFlagged", err)
	}
	if v, fl, err := s.QueryFloats(ctx, "L?"); err != nil || len(v) != 3 || fl[1].String() != "overload" || fl[2].String() != "nan" {
		t.Fatalf("QueryFloats = %v, %v, %v", v, fl, err)
	}
	if _, _, err := s.QueryFloats(ctx, "B?"); !errors.Is(err, scpi.ErrMalformed) {
		t.Fatalf("QueryFloats with junk = %v", err)
	}
	if err := s.Reset(ctx); err != nil || f.count("*RST") != 1 {
		t.Fatal(err)
	}
	if err := s.Clear(ctx); err != nil || f.count("*CLS") != 1 {
		t.Fatal(err)
	}
	cctx, cancel := context.WithCancel(ctx)
	cancel()
	if _, err := s.Query(cctx, "*IDN?"); !errors.Is(err, context.Canceled) || f.count("*IDN?") != 1 {
		t.Fatalf("cancelled Query = %v (sent %d times)", err, f.count("*IDN?"))
	}
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
	if err := s.Close(); err != nil {
		t.Fatalf("second Close = %v", err)
	}
	if _, err := s.Query(ctx, "*IDN?"); !errors.Is(err, scpi.ErrSessionClosed) {
		t.Fatalf("Query after Close = %v", err)
	}
}
