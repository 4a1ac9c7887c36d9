package transport

import (
	"context"
	"errors"
	"fmt"
	"net/url"
	"strconv"
	"sync/atomic"
	"time"

	"go.bug.st/serial"
)

// serialPoll is the longest a serial read blocks before it looks at its deadline and
// at an abort request again; it bounds how late a cancelled read returns.
const serialPoll = 20 * time.Millisecond

// parseSerial returns the port name and mode of a serial:// address.
func parseSerial(u *url.URL) (string, *serial.Mode, error) {
	if u.Opaque != "" || u.User != nil || u.Fragment != "" || u.Port() != "" {
		return "", nil, fmt.Errorf("expected serial:///dev/ttyUSB0?baud=9600 or serial://COM3?baud=9600")
	}
	name := u.Path
	if u.Host != "" {
		if u.Path != "" && u.Path != "/" {
			return "", nil, fmt.Errorf("a host and a path: expected serial:///dev/ttyUSB0 (three slashes) or serial://COM3")
		}
		name = u.Host
	}
	if name == "" || name == "/" {
		return "", nil, fmt.Errorf("no port name: expected serial:///dev/ttyUSB0 or serial://COM3")
	}
	q, err := url.ParseQuery(u.RawQuery)
	if err != nil {
		return "", nil, fmt.Errorf("parameters: %v", err)
	}
	mode := &serial.Mode{BaudRate: 9600, DataBits: 8, Parity: serial.NoParity, StopBits: serial.OneStopBit}
	for k, vs := range q {
		if len(vs) != 1 {
			return "", nil, fmt.Errorf("parameter %q given %d times", k, len(vs))
		}
		v := vs[0]
		switch k {
		case "baud":
			b, err := strconv.Atoi(v)
			if err != nil || b <= 0 {
				return "", nil, fmt.Errorf("baud=%q: expected a positive integer such as 9600 or 115200", v)
			}
			mode.BaudRate = b
		case "data":
			d, err := strconv.Atoi(v)
			if err != nil || d < 5 || d > 8 {
				return "", nil, fmt.Errorf("data=%q: expected 5, 6, 7 or 8 data bits", v)
			}
			mode.DataBits = d
		case "parity":
			p, ok := map[string]serial.Parity{"none": serial.NoParity, "odd": serial.OddParity, "even": serial.EvenParity,
				"mark": serial.MarkParity, "space": serial.SpaceParity}[v]
			if !ok {
				return "", nil, fmt.Errorf("parity=%q: expected none, odd, even, mark or space", v)
			}
			mode.Parity = p
		case "stop":
			s, ok := map[string]serial.StopBits{"1": serial.OneStopBit, "1.5": serial.OnePointFiveStopBits, "2": serial.TwoStopBits}[v]
			if !ok {
				return "", nil, fmt.Errorf("stop=%q: expected 1, 1.5 or 2 stop bits", v)
			}
			mode.StopBits = s
		default:
			return "", nil, fmt.Errorf("unknown parameter %q (known: baud, data, parity, stop)", k)
		}
	}
	return name, mode, nil
}

func dialSerial(ctx context.Context, u *url.URL, opt Options) (Conn, error) {
	name, mode, _ := parseSerial(u)
	p, err := serial.Open(name, mode)
	if err != nil {
		// A missing port is a bare errno from the library: say which port.
		return nil, &Error{Op: "dial", Addr: u.String(), Err: fmt.Errorf("serial port %s: %w", name, err)}
	}
	p.ResetInputBuffer() // bytes from before this session are not replies to it
	return newStreamConn(u.String(), &serialStream{p: p}, opt), nil
}

// serialStream is a serial port. The library's read timeout shows up as n == 0 with
// a nil error; reads poll in slices of serialPoll so that a deadline or an abort is
// seen promptly.
type serialStream struct {
	p        serial.Port
	deadline atomic.Int64 // unix nanoseconds
	aborted  atomic.Bool
}

func (s *serialStream) setReadDeadline(t time.Time) {
	s.deadline.Store(t.UnixNano())
	s.aborted.Store(false)
}

func (s *serialStream) abortRead()  { s.aborted.Store(true) }
func (s *serialStream) abortWrite() {}
func (s *serialStream) peerClosed() bool {
	return false
}

func (s *serialStream) read(p []byte) (int, error) {
	for {
		if s.aborted.Load() {
			return 0, errDeadline
		}
		left := time.Until(time.Unix(0, s.deadline.Load()))
		if left <= 0 {
			return 0, errDeadline
		}
		if err := s.p.SetReadTimeout(min(left, serialPoll)); err != nil {
			return 0, err
		}
		n, err := s.p.Read(p)
		if n > 0 || err != nil {
			return n, err
		}
	}
}

func (s *serialStream) write(p []byte, _ time.Time) (int, error) {
	n, err := s.p.Write(p)
	if err == nil && n < len(p) {
		err = fmt.Errorf("short write: %d of %d bytes", n, len(p))
	}
	return n, err
}

func (s *serialStream) linkErr(err error) bool {
	// Every read or write failure of an open port means the port went away (an
	// unplugged adapter, a closed pseudo-terminal): nothing will come back on it.
	var pe *serial.PortError
	if errors.As(err, &pe) {
		return pe.Code() == serial.PortClosed
	}
	return err != nil
}

func (s *serialStream) close() error { return s.p.Close() }
