package transport

import (
	"context"
	"errors"
	"fmt"
	"io"
	"net"
	"net/url"
	"os"
	"strconv"
	"syscall"
	"time"
)

// parseTCP returns host:port of a tcp:// address.
func parseTCP(u *url.URL) (string, error) {
	if u.Opaque != "" || u.User != nil || (u.Path != "" && u.Path != "/") || u.RawQuery != "" || u.Fragment != "" {
		return "", fmt.Errorf("expected tcp://host:port and nothing else")
	}
	host, port := u.Hostname(), u.Port()
	if host == "" {
		return "", fmt.Errorf("no host: expected tcp://host:port")
	}
	if port == "" {
		return "", fmt.Errorf("no port: expected tcp://host:port (raw SCPI sockets often listen on 5025, but the instrument's manual says)")
	}
	if p, err := strconv.Atoi(port); err != nil || p < 1 || p > 65535 {
		return "", fmt.Errorf("port %q: expected 1..65535", port)
	}
	return net.JoinHostPort(host, port), nil
}

func dialTCP(ctx context.Context, u *url.URL, opt Options) (Conn, error) {
	hp, _ := parseTCP(u)
	d := net.Dialer{Timeout: opt.Timeout, KeepAlive: 15 * time.Second}
	nc, err := d.DialContext(ctx, "tcp", hp)
	if err != nil {
		e := &Error{Op: "dial", Addr: u.String(), Err: err}
		if ctx.Err() != nil {
			e.Kind = ctx.Err()
		} else if errors.Is(err, os.ErrDeadlineExceeded) {
			e.Kind = ErrTimeout
		}
		return nil, e
	}
	if tc, ok := nc.(*net.TCPConn); ok {
		tc.SetNoDelay(true)
	}
	return newStreamConn(u.String(), &tcpStream{c: nc}, opt), nil
}

// tcpStream is a raw TCP socket.
type tcpStream struct{ c net.Conn }

func (s *tcpStream) setReadDeadline(t time.Time) { s.c.SetReadDeadline(t) }
func (s *tcpStream) abortRead()                  { s.c.SetReadDeadline(time.Unix(1, 0)) }
func (s *tcpStream) abortWrite()                 { s.c.SetWriteDeadline(time.Unix(1, 0)) }
func (s *tcpStream) close() error                { return s.c.Close() }

func (s *tcpStream) read(p []byte) (int, error) {
	n, err := s.c.Read(p)
	if errors.Is(err, os.ErrDeadlineExceeded) {
		err = errDeadline
	}
	return n, err
}

func (s *tcpStream) write(p []byte, t time.Time) (int, error) {
	s.c.SetWriteDeadline(t)
	n, err := s.c.Write(p)
	if errors.Is(err, os.ErrDeadlineExceeded) {
		err = errDeadline
	}
	return n, err
}

func (s *tcpStream) linkErr(err error) bool {
	return errors.Is(err, io.EOF) || errors.Is(err, syscall.ECONNRESET) || errors.Is(err, syscall.EPIPE) ||
		errors.Is(err, syscall.ECONNABORTED) || errors.Is(err, net.ErrClosed)
}

func (s *tcpStream) peerClosed() bool {
	s.c.SetReadDeadline(time.Time{}) // a past deadline would skip the peek
	return peerClosed(s.c)
}
