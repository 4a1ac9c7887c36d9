// Package scpi is a command/reply session with an instrument that speaks SCPI (or
// any line protocol with one reply per query) over a transport.Conn: strict parsing
// of numbers, identities and error-queue entries, error-queue draining, and bounded
// retries of idempotent queries with a reconnect after a dropped link.
//
// # Retry rules
//
// A query for which Options.Idempotent (default IsIdempotent) is true is sent again
// after a timeout or a dropped link, at most Options.Retries times, on a new link
// when Options.Redial is set. A command (Write) or any other query is never sent
// twice: when its exchange fails, the error is returned and the instrument's state
// is unknown to the caller. The one exception is a line that provably never left
// (the link was known to be down before a byte was written, transport.NotSent):
// it is sent once on a new link, which is not a repetition.
//
// A command counts as unconfirmed until a reply arrives on the same link (SCPI
// carries out a link's lines in order). When the link fails while a command is
// unconfirmed, the failing call returns a *LostError naming it, without retrying
// or reconnecting; so Exec (a command, then the error-queue drain) never confirms
// a command over a different link than the one that carried it.
//
// After a timeout, a cancelled exchange or a dropped link the session discards the
// link (a late reply would otherwise be taken for the next one) and, if it can
// redial, opens a new one before the next exchange.
package scpi

import (
	"context"
	"errors"
	"fmt"
	"sync"

	"trimline/instruments"
	"trimline/instruments/transport"
)

// Options tune a Session. The zero value means: no redial, no retries, SYST:ERR?
// as the error query, at most 32 entries drained.
type Options struct {
	// Redial opens a new link after the old one failed; nil means the session keeps
	// using (and failing on) the link it has.
	Redial func(ctx context.Context) (transport.Conn, error)
	// Retries is how many more times an idempotent query is sent after a timeout or
	// a dropped link; 0 means none. The generic drivers use 2.
	Retries int
	// Idempotent decides which queries may be repeated; nil means IsIdempotent.
	Idempotent func(line string) bool
	// ErrorQuery reads one error-queue entry; "" means "SYST:ERR?".
	ErrorQuery string
	// MaxErrors bounds DrainErrors; 0 means 32.
	MaxErrors int
}

// InstrumentError is an entry of the instrument's error queue other than 0: the
// instrument's own code and text, and the last line sent before it was read.
type InstrumentError struct {
	Code    int
	Text    string
	Command string
	more    int // further entries drained with it
}

// Error returns the code, the text and the command.
func (e *InstrumentError) Error() string {
	s := fmt.Sprintf("instrument error %d, %q", e.Code, e.Text)
	if e.Command != "" {
		s += fmt.Sprintf(" (after %q)", e.Command)
	}
	if e.more > 0 {
		s += fmt.Sprintf(" and %d more", e.more)
	}
	return s
}

// LostError reports that the link failed after Command had been written and before
// any reply confirmed that the instrument received it: the command may or may not
// have been carried out. It wraps the link error (errors.Is(err,
// transport.ErrLinkDown) or ErrTimeout).
type LostError struct {
	Command string
	Err     error
}

// Error names the command whose effect is unknown and the link error.
func (e *LostError) Error() string {
	return fmt.Sprintf("link failed after %q was sent, before the instrument confirmed it (its effect is unknown): %v", e.Command, e.Err)
}

// Unwrap returns the link error.
func (e *LostError) Unwrap() error { return e.Err }

// Session is a command/reply session. Its methods are safe for concurrent use; each
// exchange (a line and its reply) holds the session for its duration. Every method
// returns promptly with an error wrapping ctx.Err() when ctx is done.
type Session struct {
	mu         sync.Mutex
	conn       transport.Conn // nil after a failure when a redial is possible
	opt        Options
	last       string // the last line sent other than the error query
	pending    string // the last command written without a reply since on this link
	reconnects int
	closed     bool
}

// NewSession starts a session on conn.
func NewSession(conn transport.Conn, opt Options) *Session {
	if opt.Idempotent == nil {
		opt.Idempotent = IsIdempotent
	}
	if opt.ErrorQuery == "" {
		opt.ErrorQuery = "SYST:ERR?"
	}
	if opt.MaxErrors <= 0 {
		opt.MaxErrors = 32
	}
	opt.Retries = max(opt.Retries, 0)
	return &Session{conn: conn, opt: opt}
}

// ErrSessionClosed is returned by every method after Close.
var ErrSessionClosed = errors.New("scpi: session closed")

// Reconnects returns how many times the session opened a new link.
func (s *Session) Reconnects() int {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.reconnects
}

// link returns the link, redialling if the last one was discarded. Called with s.mu.
func (s *Session) link(ctx context.Context) (transport.Conn, error) {
	if s.closed {
		return nil, ErrSessionClosed
	}
	if s.conn != nil {
		return s.conn, nil
	}
	c, err := s.opt.Redial(ctx)
	if err != nil {
		return nil, fmt.Errorf("reconnect: %w", err)
	}
	s.conn = c
	s.reconnects++
	return c, nil
}

// discard drops the link after err if it can no longer be trusted.
func (s *Session) discard(err error) {
	if s.opt.Redial == nil || s.conn == nil {
		return
	}
	if errors.Is(err, transport.ErrLinkDown) || errors.Is(err, transport.ErrTimeout) ||
		errors.Is(err, context.Canceled) || errors.Is(err, context.DeadlineExceeded) ||
		errors.Is(err, transport.ErrLineTooLong) {
		s.conn.Close()
		s.conn = nil
	}
}

// send writes line. A line that provably never left is sent once on a new link,
// unless a command sent earlier on the old link is still unconfirmed: its effect
// is then unknown and the caller must hear of it.
func (s *Session) send(ctx context.Context, line string) error {
	if s.conn == nil && s.pending != "" {
		return s.lost(nil)
	}
	c, err := s.link(ctx)
	if err != nil {
		return err
	}
	err = c.WriteLine(ctx, line)
	if err != nil && transport.NotSent(err) && errors.Is(err, transport.ErrLinkDown) && s.opt.Redial != nil {
		s.discard(err)
		if s.pending != "" {
			return s.lost(err)
		}
		if c, err = s.link(ctx); err != nil {
			return err
		}
		err = c.WriteLine(ctx, line)
	}
	if err != nil && (!transport.NotSent(err) || errors.Is(err, transport.ErrLinkDown)) {
		s.discard(err) // a write refused before sending (a done ctx) leaves the link sound
	}
	return err
}

// lost reports that the link failed after the unconfirmed command s.pending was
// written, and forgets it (the caller now knows; later calls may reconnect).
func (s *Session) lost(err error) error {
	p := s.pending
	s.pending = ""
	if err == nil {
		err = transport.ErrLinkDown
	}
	return &LostError{Command: p, Err: err}
}

// Write sends a command and returns once it is written; it expects no reply and is
// never repeated.
func (s *Session) Write(ctx context.Context, cmd string) error {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.write(ctx, cmd)
}

// write sends cmd once and leaves it pending: written, no reply seen yet. Called
// with s.mu held.
func (s *Session) write(ctx context.Context, cmd string) error {
	s.last = cmd
	if err := s.send(ctx, cmd); err != nil {
		return fmt.Errorf("write %q: %w", cmd, err)
	}
	s.pending = cmd
	return nil
}

// Query sends q and returns the reply line. An idempotent query is repeated after a
// timeout or a dropped link, up to Options.Retries times; others are sent once.
func (s *Session) Query(ctx context.Context, q string) (string, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	tries := 1
	if s.opt.Idempotent(q) {
		tries += s.opt.Retries
	}
	return s.query(ctx, q, tries)
}

// QueryOnce sends q once, whatever Options.Idempotent says.
func (s *Session) QueryOnce(ctx context.Context, q string) (string, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.query(ctx, q, 1)
}

func (s *Session) query(ctx context.Context, q string, tries int) (string, error) {
	if q != s.opt.ErrorQuery {
		s.last = q
	}
	var err error
	for try := 1; ; try++ {
		var r string
		if err = s.send(ctx, q); err == nil {
			r, err = s.conn.ReadLine(ctx)
			if err == nil {
				s.pending = "" // a reply: every earlier command was received
				return r, nil
			}
			s.discard(err)
		}
		var le *LostError
		if s.pending != "" && s.conn == nil && !errors.As(err, &le) {
			// The link failed while a command written before q was unconfirmed:
			// repeating q on a new link would hide that the command may be lost.
			err = s.lost(err)
			break
		}
		retriable := errors.Is(err, transport.ErrLinkDown) || errors.Is(err, transport.ErrTimeout)
		if ctx.Err() != nil || !retriable || try >= tries || errors.Is(err, ErrSessionClosed) || errors.As(err, &le) {
			break
		}
	}
	return "", fmt.Errorf("query %q: %w", q, err)
}

// QueryFloat sends q and parses the reply with ParseNumber. A flagged reply
// (overload, not-a-number) is an error wrapping ErrFlagged.
func (s *Session) QueryFloat(ctx context.Context, q string) (float64, error) {
	r, err := s.Query(ctx, q)
	if err != nil {
		return 0, err
	}
	v, f, err := ParseNumber(r)
	if err != nil {
		return 0, fmt.Errorf("query %q: %w", q, err)
	}
	if f != instruments.FlagNone {
		return 0, fmt.Errorf("query %q: %w (%s)", q, ErrFlagged, f)
	}
	return v, nil
}

// QueryFloats sends q and parses a comma-separated reply with ParseNumbers: values
// and their flags, in order.
func (s *Session) QueryFloats(ctx context.Context, q string) ([]float64, []instruments.Flag, error) {
	r, err := s.Query(ctx, q)
	if err != nil {
		return nil, nil, err
	}
	v, f, err := ParseNumbers(r)
	if err != nil {
		return nil, nil, fmt.Errorf("query %q: %w", q, err)
	}
	return v, f, nil
}

// IDN sends *IDN? and parses the reply with ParseIDN.
func (s *Session) IDN(ctx context.Context) (instruments.Identity, error) {
	r, err := s.Query(ctx, "*IDN?")
	if err != nil {
		return instruments.Identity{}, err
	}
	id, err := ParseIDN(r)
	if err != nil {
		return instruments.Identity{}, fmt.Errorf("query %q: %w", "*IDN?", err)
	}
	return id, nil
}

// Reset sends *RST.
func (s *Session) Reset(ctx context.Context) error { return s.Write(ctx, "*RST") }

// Clear sends *CLS (clears the error queue and the status registers).
func (s *Session) Clear(ctx context.Context) error { return s.Write(ctx, "*CLS") }

// Sync sends *OPC? and waits for the reply, which must be 1: every earlier command
// has then been carried out.
func (s *Session) Sync(ctx context.Context) error {
	r, err := s.Query(ctx, "*OPC?")
	if err != nil {
		return err
	}
	if v, f, err := ParseNumber(r); err != nil || f != instruments.FlagNone || v != 1 {
		return fmt.Errorf("query %q: %w: reply %q, want 1", "*OPC?", ErrMalformed, r)
	}
	return nil
}

// DrainErrors reads the error queue (Options.ErrorQuery, never repeated, because a
// lost reply would lose an entry) until it answers code 0. The first other entry is
// returned as an *InstrumentError naming the last line sent; the loop stops after
// Options.MaxErrors entries with an error. A malformed entry wraps ErrMalformed.
func (s *Session) DrainErrors(ctx context.Context) error {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.drain(ctx)
}

func (s *Session) drain(ctx context.Context) error {
	var first *InstrumentError
	for range s.opt.MaxErrors {
		r, err := s.query(ctx, s.opt.ErrorQuery, 1)
		if err != nil {
			return err
		}
		code, text, err := ParseErrorEntry(r)
		if err != nil {
			return fmt.Errorf("query %q: %w", s.opt.ErrorQuery, err)
		}
		if code == 0 {
			if first != nil {
				return first
			}
			return nil
		}
		if first == nil {
			first = &InstrumentError{Code: code, Text: text, Command: s.last}
		} else {
			first.more++
		}
	}
	if first == nil {
		first = &InstrumentError{Text: "?", Command: s.last}
	}
	return fmt.Errorf("error queue still not empty after %d entries: %w", s.opt.MaxErrors, first)
}

// Exec sends a command and then drains the error queue: the command's own failure,
// a failure of the drain (the command's fate is then unknown) or the first
// *InstrumentError. Neither part is repeated.
func (s *Session) Exec(ctx context.Context, cmd string) error {
	s.mu.Lock()
	defer s.mu.Unlock()
	if err := s.write(ctx, cmd); err != nil {
		return err
	}
	if err := s.drain(ctx); err != nil {
		var ie *InstrumentError
		var le *LostError
		if errors.As(err, &ie) || errors.As(err, &le) {
			return err // both name the command already
		}
		return fmt.Errorf("after %q: %w", cmd, err)
	}
	return nil
}

// Close closes the link; a second call returns nil. Later calls of other methods
// return ErrSessionClosed.
func (s *Session) Close() error {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.closed {
		return nil
	}
	s.closed = true
	if s.conn != nil {
		return s.conn.Close()
	}
	return nil
}
