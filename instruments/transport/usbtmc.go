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
	connState // broken is set after an abandoned read
	f         device

	mu      sync.Mutex // one exchange step at a time
	pending chan readResult
}

type readResult struct {
	b   []byte
	err error
}

func newMsgConn(addr string, f device, opt Options) *msgConn {
	c := &msgConn{f: f}
	c.addr, c.opt, c.kindOf = addr, opt, msgKind
	return c
}

// msgKind sorts a device error: the device's own timeouts are ErrTimeout; anything
// else (EOF, EIO, ENODEV) means the device went away.
func msgKind(err error) error {
	if errors.Is(err, os.ErrDeadlineExceeded) || isDriverTimeout(err) {
		return ErrTimeout
	}
	return ErrLinkDown
}

func (c *msgConn) WriteLine(ctx context.Context, s string) error {
	c.mu.Lock()
	defer c.mu.Unlock()
	if err := c.refuse(ctx, "write"); err != nil {
		return err
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
	if err := c.refuse(ctx, "read"); err != nil {
		return "", err
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

// Close closes the device; a second call returns nil. It does not wait for an
// abandoned read.
func (c *msgConn) Close() error {
	if !c.markClosed() {
		return nil
	}
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
