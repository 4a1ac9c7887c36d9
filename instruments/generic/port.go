package generic

import (
	"context"
	"fmt"
	"strings"
	"sync"

	"trimline/instruments"
)

// ReplyError is an "ERR …" reply of a DUT trim port.
type ReplyError struct {
	Line  string // the line sent
	Reply string // the reply, e.g. "ERR code out of range"
}

// Error returns the reply and the line.
func (e *ReplyError) Error() string { return fmt.Sprintf("dut answered %q to %q", e.Reply, e.Line) }

// Port is a DUT's line trim port: one line out, one reply line back. It sends no
// *IDN? or error-queue queries.
type Port struct {
	base

	mu     sync.Mutex
	closed bool
}

var (
	_ instruments.TrimPort = (*Port)(nil)
	_ Querier              = (*Port)(nil)
)

// Command sends line and expects the reply OK. An "ERR …" reply is a *ReplyError;
// any other reply is an error naming it. A command is never repeated.
func (p *Port) Command(ctx context.Context, line string) error {
	r, err := p.sess.QueryOnce(ctx, line)
	if err != nil {
		return fmt.Errorf("%s: %w", p.addr, err)
	}
	switch r = strings.TrimSpace(r); {
	case r == "OK":
		return nil
	case strings.HasPrefix(r, "ERR"):
		return &ReplyError{Line: line, Reply: r}
	}
	return fmt.Errorf("%s: %q answered %q, want OK", p.addr, line, r)
}

// Query sends line and returns the reply without its terminator; an "ERR …" reply is
// a *ReplyError. A line ending in '?' is retried after a timeout or a dropped link.
func (p *Port) Query(ctx context.Context, line string) (string, error) {
	r, err := p.base.Query(ctx, line)
	if err != nil {
		return "", err
	}
	if strings.HasPrefix(strings.TrimSpace(r), "ERR") {
		return "", &ReplyError{Line: line, Reply: strings.TrimSpace(r)}
	}
	return r, nil
}

// Close closes the link; a second call returns nil.
func (p *Port) Close() error {
	p.mu.Lock()
	if p.closed {
		p.mu.Unlock()
		return nil
	}
	p.closed = true
	p.mu.Unlock()
	return p.sess.Close()
}

// LoaderPort is a Port whose fixture can be told which unit it holds: the
// load_unit template with {serial} is sent as a command.
type LoaderPort struct{ *Port }

var _ instruments.FixtureLoader = (*LoaderPort)(nil)

// LoadUnit sends the load_unit template with {serial} filled in and expects OK.
func (p *LoaderPort) LoadUnit(ctx context.Context, serial string) error {
	if serial == "" || strings.ContainsAny(serial, " \t\r\n") {
		return fmt.Errorf("%s: load unit %q: expected a serial without spaces", p.addr, serial)
	}
	return p.Command(ctx, p.expand("load_unit", "{serial}", serial))
}
