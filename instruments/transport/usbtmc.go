package transport

import (
	"context"
	"errors"
	"fmt"
	"io"
	"net/url"
	"os"
	"strings"
	"sync"
	"time"
)

// parseUSBTMC returns the device path of a usbtmc:// address.
func parseUSBTMC(u *url.URL) (string, error) {
	if u.Opaque != "" || u.User != nil || u.Host != "" || u.RawQuery != "" || u.Fragment != "" || u.Path == "" || u.Path == "/" {
		return "", fmt.Errorf("expected usbtmc:///dev/usbtmc0 (a device path and nothing else)")
	}
	return u.Path, nil
}

// device is the opened character device: one write sends one message, one read
// returns (the start of) one response.
type device interface {
	io.ReadWriteCloser
	SetReadDeadline(t time.Time) error
	SetWriteDeadline(t time.Time) error
}

// msgConn is a Conn over a message device (USBTMC): a response is a line. Reads
// run on a helper goroutine, so that a cancelled or timed-out exchange returns
// promptly even where the driver's read cannot be interrupted (the driver's own
// timeout, set to the exchange timeout at open, ends it later). After such an
// abandoned read the Conn is unusable (ErrLinkDown): a late response would be
// taken for the next one; the caller redials.
type msgConn struct {
	addr string
	opt  Options
	f    device

	mu      sync.Mutex // one exchange step at a time
	cmu     sync.Mutex
	closed  bool
	broken  error // set after an aborted read
	pending chan readResult
}

type readResult struct {
	b   []byte
	err error
}

func newMsgConn(addr string, f device, opt Options) *msgConn {
	return &msgConn{addr: addr, opt: opt, f: f}
}

func (c *msgConn) state() (closed bool, broken error) {
	c.cmu.Lock()
	defer c.cmu.Unlock()
	return c.closed, c.broken
}

func (c *msgConn) WriteLine(ctx context.Context, s string) error {
	c.mu.Lock()
	defer c.mu.Unlock()
	if closed, broken := c.state(); closed {
		return &Error{Op: "write", Addr: c.addr, Kind: ErrClosed, NotSent: true}
	} else if broken != nil {
		return &Error{Op: "write", Addr: c.addr, Kind: ErrLinkDown, Err: broken, NotSent: true}
	}
	if err := ctx.Err(); err != nil {
		return &Error{Op: "write", Addr: c.addr, Kind: err, NotSent: true}
	}
	dl, fromCtx := deadline(ctx, c.opt.Timeout)
	c.f.SetWriteDeadline(dl)
	stop := onCancel(ctx, func() { c.f.SetWriteDeadline(time.Unix(1, 0)) })
	defer stop()
	n, err := c.f.Write([]byte(s + c.opt.WriteTerm))
	if err != nil {
		return c.fail("write", ctx, fromCtx, err, n == 0)
	}
	return nil
}

func (c *msgConn) ReadLine(ctx context.Context) (string, error) {
	c.mu.Lock()
	defer c.mu.Unlock()
	if closed, broken := c.state(); closed {
		return "", &Error{Op: "read", Addr: c.addr, Kind: ErrClosed}
	} else if broken != nil {
		return "", &Error{Op: "read", Addr: c.addr, Kind: ErrLinkDown, Err: broken}
	}
	if err := ctx.Err(); err != nil {
		return "", &Error{Op: "read", Addr: c.addr, Kind: err}
	}
	dl, fromCtx := deadline(ctx, c.opt.Timeout)
	c.f.SetReadDeadline(dl) // effective where the device can be polled
	ch := make(chan readResult, 1)
	go func() { b, err := c.readMessage(); ch <- readResult{b, err} }()
	t := time.NewTimer(time.Until(dl))
	defer t.Stop()
	select {
	case r := <-ch:
		if r.err != nil {
			return "", c.fail("read", ctx, fromCtx, r.err, false)
		}
		line := string(r.b)
		if strings.HasSuffix(line, c.opt.ReadTerm) {
			line = strings.TrimSuffix(line, c.opt.ReadTerm)
			if c.opt.ReadTerm == "\n" {
				line = strings.TrimSuffix(line, "\r")
			}
		}
		return line, nil
	case <-ctx.Done():
	case <-t.C:
	}
	// Where the device can be polled, the past deadline ends the read at once; a
	// response that slipped in meanwhile is late, hence stale, and dropped. Where it
	// cannot, the read is abandoned and the Conn is unusable.
	c.f.SetReadDeadline(time.Unix(1, 0))
	select {
	case <-ch:
	case <-time.After(abandonGrace):
		c.cmu.Lock()
		c.broken = errors.New("an earlier read was abandoned")
		c.cmu.Unlock()
	}
	return "", c.fail("read", ctx, fromCtx, errDeadline, false)
}

// abandonGrace is how long an aborted read may take to end before it is abandoned.
const abandonGrace = 20 * time.Millisecond

// readMessage reads one response: a read that fills the buffer is continued.
func (c *msgConn) readMessage() ([]byte, error) {
	var out []byte
	buf := make([]byte, 64<<10)
	for {
		n, err := c.f.Read(buf)
		out = append(out, buf[:n]...)
		if err != nil {
			return out, err
		}
		if n < len(buf) {
			return out, nil
		}
		if len(out) > MaxLine {
			return nil, ErrLineTooLong
		}
	}
}

func (c *msgConn) fail(op string, ctx context.Context, fromCtx bool, err error, notSent bool) error {
	e := &Error{Op: op, Addr: c.addr, NotSent: notSent}
	closed, _ := c.state()
	switch {
	case closed:
		e.Kind = ErrClosed
	case ctx.Err() != nil:
		e.Kind = ctx.Err()
	case errors.Is(err, errDeadline) && fromCtx:
		e.Kind = context.DeadlineExceeded
	case errors.Is(err, errDeadline) || errors.Is(err, os.ErrDeadlineExceeded) || isDriverTimeout(err):
		e.Kind = ErrTimeout
	case errors.Is(err, ErrLineTooLong):
		e.Kind = ErrLineTooLong
	default:
		// EOF, EIO, ENODEV: the device went away.
		e.Kind, e.Err = ErrLinkDown, err
	}
	if e.Err == errDeadline {
		e.Err = nil
	}
	return e
}

// Close closes the device; a second call returns nil. It does not wait for an
// abandoned read.
func (c *msgConn) Close() error {
	c.cmu.Lock()
	if c.closed {
		c.cmu.Unlock()
		return nil
	}
	c.closed = true
	c.cmu.Unlock()
	c.f.SetReadDeadline(time.Unix(1, 0))
	c.f.SetWriteDeadline(time.Unix(1, 0))
	done := make(chan error, 1)
	go func() { done <- c.f.Close() }()
	select {
	case err := <-done:
		if err != nil && !errors.Is(err, os.ErrClosed) {
			return &Error{Op: "close", Addr: c.addr, Err: err}
		}
	case <-time.After(100 * time.Millisecond):
		// an abandoned driver read holds the file; it is released when that ends
	}
	return nil
}
