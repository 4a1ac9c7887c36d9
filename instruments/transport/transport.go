// Package transport is trimline's line-oriented link to an instrument: one command
// line out, one reply line back, over a serial port, a raw TCP socket or the Linux
// USBTMC class driver's character device.
//
// Addresses:
//
//	serial:///dev/ttyUSB0?baud=115200&parity=none&data=8&stop=1
//	serial://COM3?baud=9600                  (Windows port names go in the host part)
//	tcp://192.0.2.7:5025                     (the port is required; none is assumed)
//	usbtmc:///dev/usbtmc0                    (Linux only)
//
// Serial parameters and their defaults: baud (9600), parity (none|odd|even|mark|space,
// none), data (5..8, 8), stop (1|1.5|2, 1). Any other query key is an error.
//
// Every failure is an *Error that wraps one of the sentinels ErrTimeout, ErrClosed or
// ErrLinkDown where one applies, so callers test with errors.Is. A cancelled context
// aborts a blocked read or write promptly and returns an error wrapping ctx.Err().
package transport

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"net/url"
	"strings"
	"sync"
	"time"
)

// Sentinels wrapped by the errors of this package.
var (
	// ErrTimeout: the peer did not answer (or accept a write) within the exchange timeout.
	ErrTimeout = errors.New("timeout")
	// ErrClosed: the Conn was closed by its own Close.
	ErrClosed = errors.New("connection closed")
	// ErrLinkDown: the peer closed or dropped the link (EOF, reset, device gone).
	ErrLinkDown = errors.New("link down")
	// ErrLineTooLong: a reply exceeded MaxLine bytes without a terminator.
	ErrLineTooLong = errors.New("reply line too long")
)

// MaxLine is the longest reply line in bytes a Conn accepts.
const MaxLine = 1 << 20

// DefaultTimeout is the exchange timeout used when Options.Timeout is 0.
const DefaultTimeout = 2 * time.Second

// Options tune a Conn. The zero value means "\n" terminators and a 2 s timeout.
type Options struct {
	// ReadTerm ends every reply line; default "\n". With "\n", a "\r" just before it
	// is removed as well.
	ReadTerm string
	// WriteTerm is appended to every line written; default "\n".
	WriteTerm string
	// Timeout bounds each ReadLine, and each WriteLine where the link can give up a
	// write (TCP, USBTMC; a serial write goes straight to the driver's buffer);
	// default 2 s. A context made by WithTimeout overrides it for one call.
	Timeout time.Duration
}

func (o Options) withDefaults() Options {
	if o.ReadTerm == "" {
		o.ReadTerm = "\n"
	}
	if o.WriteTerm == "" {
		o.WriteTerm = "\n"
	}
	if o.Timeout <= 0 {
		o.Timeout = DefaultTimeout
	}
	return o
}

// Conn is a line-oriented connection to one instrument (package transport's own
// implementations are returned by Dial).
//
// WriteLine sends s followed by the write terminator. ReadLine returns the next reply
// line without its terminator. Both return within the exchange timeout (ErrTimeout)
// and return promptly with an error wrapping ctx.Err() when ctx is done. Input that
// is still unread when a line is written is stale (a late reply) and is dropped.
// Close releases the link; it is idempotent (later calls return nil) and makes later
// reads and writes return ErrClosed. A Conn is safe for concurrent use, but a command
// and its reply belong together, so callers serialise exchanges (scpi.Session does).
type Conn interface {
	WriteLine(ctx context.Context, s string) error
	ReadLine(ctx context.Context) (string, error)
	Close() error
}

// Error is the error type of this package.
type Error struct {
	Op   string // "dial", "read" or "write"
	Addr string // the address, as given
	Kind error  // ErrTimeout, ErrClosed, ErrLinkDown, ErrLineTooLong, a ctx error, or nil
	Err  error  // the underlying cause, or nil
	// NotSent is true for a failed write of which no byte left this side, so the
	// command cannot have reached the instrument.
	NotSent bool
}

// Error returns the address, the operation, the kind and the cause.
func (e *Error) Error() string {
	var b strings.Builder
	b.WriteString(e.Addr)
	b.WriteString(": ")
	b.WriteString(e.Op)
	if e.Kind != nil {
		b.WriteString(": ")
		b.WriteString(e.Kind.Error())
	}
	if e.Err != nil && e.Err != e.Kind {
		b.WriteString(": ")
		b.WriteString(e.Err.Error())
	}
	return b.String()
}

// Unwrap returns the kind and the cause, for errors.Is and errors.As.
func (e *Error) Unwrap() []error {
	var out []error
	if e.Kind != nil {
		out = append(out, e.Kind)
	}
	if e.Err != nil && e.Err != e.Kind {
		out = append(out, e.Err)
	}
	return out
}

// NotSent reports whether err is a write failure after which the command cannot have
// reached the instrument (nothing was sent), so sending it again on a new link is
// not a repetition.
func NotSent(err error) bool {
	var e *Error
	return errors.As(err, &e) && e.Op == "write" && e.NotSent
}

type timeoutKey struct{}

// WithTimeout returns a context that makes the next WriteLine or ReadLine use d as
// its exchange timeout instead of Options.Timeout (e.g. for a reading that takes
// long to integrate). d ≤ 0 leaves the default.
func WithTimeout(ctx context.Context, d time.Duration) context.Context {
	return context.WithValue(ctx, timeoutKey{}, d)
}

// deadline returns when an exchange started now must end, and whether that is the
// context's own deadline (then expiry reports ctx.Err(), not ErrTimeout).
func deadline(ctx context.Context, def time.Duration) (time.Time, bool) {
	d := def
	if v, ok := ctx.Value(timeoutKey{}).(time.Duration); ok && v > 0 {
		d = v
	}
	t := time.Now().Add(d)
	if cd, ok := ctx.Deadline(); ok && !cd.After(t) {
		return cd, true
	}
	return t, false
}

// onCancel runs f when ctx is done. The returned stop prevents that, or waits until
// f has finished, so that an abort meant for one call cannot hit the next.
func onCancel(ctx context.Context, f func()) (stop func()) {
	done := make(chan struct{})
	s := context.AfterFunc(ctx, func() { f(); close(done) })
	return func() {
		if !s() {
			<-done
		}
	}
}

// CheckAddress validates an address without opening anything: a known scheme and
// well-formed scheme-specific parts (serial parameters, a TCP port, a device path).
func CheckAddress(addr *url.URL) error {
	var err error
	switch addr.Scheme {
	case "serial":
		_, _, err = parseSerial(addr)
	case "tcp":
		_, err = parseTCP(addr)
	case "usbtmc":
		_, err = parseUSBTMC(addr)
	default:
		err = fmt.Errorf("scheme %q: expected serial, tcp or usbtmc", addr.Scheme)
	}
	if err != nil {
		return fmt.Errorf("address %q: %w", addr.String(), err)
	}
	return nil
}

// Dial opens a Conn to addr. ctx bounds the dial (and opt.Timeout bounds a TCP
// connect); it is not retained. A missing serial port or device file gives an error
// naming it that wraps the system error (errors.Is(err, fs.ErrNotExist)).
func Dial(ctx context.Context, addr *url.URL, opt Options) (Conn, error) {
	if err := CheckAddress(addr); err != nil {
		return nil, err
	}
	if err := ctx.Err(); err != nil {
		return nil, &Error{Op: "dial", Addr: addr.String(), Kind: err}
	}
	opt = opt.withDefaults()
	switch addr.Scheme {
	case "serial":
		return dialSerial(ctx, addr, opt)
	case "tcp":
		return dialTCP(ctx, addr, opt)
	default:
		return dialUSBTMC(ctx, addr, opt)
	}
}

// stream is a byte stream under a streamConn (a TCP socket or a serial port).
type stream interface {
	// setReadDeadline makes read return errDeadline once t has passed.
	setReadDeadline(t time.Time)
	// read reads at least one byte, or returns errDeadline at the deadline or after
	// abortRead, or another error.
	read(p []byte) (int, error)
	// abortRead makes a pending or the next read return errDeadline at once.
	abortRead()
	// write writes all of p or fails; it gives up at deadline t where it can.
	write(p []byte, t time.Time) (int, error)
	// abortWrite makes a pending write give up where it can.
	abortWrite()
	// peerClosed reports, without blocking, whether the peer is known to have
	// closed the link.
	peerClosed() bool
	// linkErr classifies an error of read or write as ErrLinkDown (true) or not.
	linkErr(err error) bool
	close() error
}

var errDeadline = errors.New("deadline")

// connState is what both kinds of Conn (streamConn, msgConn) keep about
// themselves: the address their errors name, their options, and whether they are
// closed or their link is known to be broken.
type connState struct {
	addr string
	opt  Options
	// kindOf sorts an error of the underlying link that is none of this package's
	// own: ErrTimeout, ErrLinkDown (the error is kept as the cause), or nil (the
	// error is the cause, with no kind).
	kindOf func(err error) error

	cmu    sync.Mutex // guards closed and broken
	closed bool
	broken error // why the link cannot be used any more, or nil
}

func (c *connState) state() (closed bool, broken error) {
	c.cmu.Lock()
	defer c.cmu.Unlock()
	return c.closed, c.broken
}

func (c *connState) isClosed() bool {
	closed, _ := c.state()
	return closed
}

// markClosed marks the Conn closed and reports whether this call closed it (false
// when it was closed already).
func (c *connState) markClosed() bool {
	c.cmu.Lock()
	defer c.cmu.Unlock()
	if c.closed {
		return false
	}
	c.closed = true
	return true
}

// refuse returns why a read or write must not start (the Conn is closed, its link
// is known to be broken, or ctx is done) as an *Error for op, or nil. A refused write
// sent nothing.
func (c *connState) refuse(ctx context.Context, op string) error {
	closed, broken := c.state()
	var kind, cause error
	switch {
	case closed:
		kind = ErrClosed
	case broken != nil:
		kind, cause = ErrLinkDown, broken
	default:
		kind = ctx.Err()
	}
	if kind == nil {
		return nil
	}
	return &Error{Op: op, Addr: c.addr, Kind: kind, Err: cause, NotSent: op == "write"}
}

// fail turns the error of a read or write that started into an *Error for op:
// ErrClosed once the Conn is closed, ctx.Err() once ctx is done,
// context.DeadlineExceeded when the exchange deadline was the context's own,
// ErrTimeout at the exchange timeout, ErrLineTooLong, and otherwise what kindOf
// says. fromCtx is deadline's second result; notSent says no byte of a write left.
func (c *connState) fail(op string, ctx context.Context, fromCtx bool, err error, notSent bool) error {
	e := &Error{Op: op, Addr: c.addr, NotSent: notSent}
	switch {
	case c.isClosed():
		e.Kind = ErrClosed
	case ctx.Err() != nil:
		e.Kind = ctx.Err()
	case errors.Is(err, errDeadline) && fromCtx:
		e.Kind = context.DeadlineExceeded
	case errors.Is(err, errDeadline):
		e.Kind = ErrTimeout
	case errors.Is(err, ErrLineTooLong):
		e.Kind = ErrLineTooLong
	default:
		if e.Kind = c.kindOf(err); e.Kind != ErrTimeout {
			e.Err = err
		}
	}
	if e.Err == errDeadline || e.Err == ErrLinkDown {
		e.Err = nil
	}
	return e
}

// streamConn splits a byte stream into lines.
type streamConn struct {
	connState
	s stream

	rmu sync.Mutex // one reader at a time; guards buf
	buf []byte
	tmp []byte
	wmu sync.Mutex // one writer at a time
}

func newStreamConn(addr string, s stream, opt Options) *streamConn {
	c := &streamConn{s: s, tmp: make([]byte, 4096)}
	c.addr, c.opt = addr, opt
	c.kindOf = func(err error) error {
		if errors.Is(err, ErrLinkDown) || s.linkErr(err) {
			return ErrLinkDown
		}
		return nil
	}
	return c
}

// WriteLine sends s and the write terminator. Unread input is dropped first.
func (c *streamConn) WriteLine(ctx context.Context, s string) error {
	c.wmu.Lock()
	defer c.wmu.Unlock()
	if err := c.refuse(ctx, "write"); err != nil {
		return err
	}
	if c.rmu.TryLock() { // no reader waits for a reply: unread input is stale
		c.buf = c.buf[:0]
		closed := c.s.peerClosed()
		c.rmu.Unlock()
		if closed {
			return &Error{Op: "write", Addr: c.addr, Kind: ErrLinkDown, Err: errors.New("peer closed the link"), NotSent: true}
		}
	}
	dl, fromCtx := deadline(ctx, c.opt.Timeout)
	stop := onCancel(ctx, c.s.abortWrite)
	defer stop()
	n, err := c.s.write([]byte(s+c.opt.WriteTerm), dl)
	if err != nil {
		return c.fail("write", ctx, fromCtx, err, n == 0)
	}
	return nil
}

// ReadLine returns the next line without its terminator.
func (c *streamConn) ReadLine(ctx context.Context) (string, error) {
	c.rmu.Lock()
	defer c.rmu.Unlock()
	if err := c.refuse(ctx, "read"); err != nil {
		return "", err
	}
	term := []byte(c.opt.ReadTerm)
	if line, ok := c.cut(term); ok {
		return line, nil
	}
	dl, fromCtx := deadline(ctx, c.opt.Timeout)
	c.s.setReadDeadline(dl)
	stop := onCancel(ctx, c.s.abortRead)
	defer stop()
	for {
		scanFrom := max(len(c.buf)-len(term)+1, 0)
		n, err := c.s.read(c.tmp)
		c.buf = append(c.buf, c.tmp[:n]...)
		if i := bytes.Index(c.buf[scanFrom:], term); i >= 0 {
			line, _ := c.cut(term)
			return line, nil
		}
		if len(c.buf) > MaxLine {
			c.buf = c.buf[:0]
			return "", c.fail("read", ctx, fromCtx, ErrLineTooLong, false)
		}
		if err != nil {
			return "", c.fail("read", ctx, fromCtx, err, false)
		}
	}
}

// cut removes the first complete line from buf.
func (c *streamConn) cut(term []byte) (string, bool) {
	i := bytes.Index(c.buf, term)
	if i < 0 {
		return "", false
	}
	line := string(c.buf[:i])
	c.buf = append(c.buf[:0], c.buf[i+len(term):]...)
	if c.opt.ReadTerm == "\n" {
		line = strings.TrimSuffix(line, "\r")
	}
	return line, true
}

// Close closes the link; a second call returns nil.
func (c *streamConn) Close() error {
	if !c.markClosed() {
		return nil
	}
	c.s.abortRead()
	c.s.abortWrite()
	if err := c.s.close(); err != nil {
		return &Error{Op: "close", Addr: c.addr, Err: err}
	}
	return nil
}
