package generic

import (
	"context"
	"fmt"
	"strings"
	"sync"
	"unicode"

	"trimline/instruments"
)

// Switch is a relay multiplexer driven by templates: route (with {channel}) closes
// one channel's path and opens the others, release opens every path. Each is
// followed by a drain of the error queue, so a channel the instrument refuses is an
// error (its own *scpi.InstrumentError).
type Switch struct {
	base

	mu     sync.Mutex
	closed bool
}

var (
	_ instruments.Switch     = (*Switch)(nil)
	_ instruments.Identifier = (*Switch)(nil)
	_ instruments.Resetter   = (*Switch)(nil)
	_ instruments.ErrorQueue = (*Switch)(nil)
	_ Querier                = (*Switch)(nil)
)

// Route sends the route template with {channel} replaced by channel (non-empty,
// without spaces, commas, parentheses or control characters) and drains the error
// queue.
func (s *Switch) Route(ctx context.Context, channel string) error {
	if channel == "" || strings.IndexFunc(channel, func(r rune) bool {
		return unicode.IsSpace(r) || unicode.IsControl(r) || strings.ContainsRune(",;()@", r)
	}) >= 0 {
		return fmt.Errorf("%s: route %q: expected a channel name without spaces or punctuation", s.addr, channel)
	}
	return s.exec(ctx, "route", "{channel}", channel)
}

// Release sends the release template and drains the error queue. It is tried
// whatever happened before, on a fresh context bounded by three exchange timeouts
// when ctx is already done, as a source's switch-off is.
func (s *Switch) Release(ctx context.Context) error {
	if ctx.Err() != nil {
		var cancel context.CancelFunc
		ctx, cancel = context.WithTimeout(context.WithoutCancel(ctx), 3*s.timeout)
		defer cancel()
	}
	return s.exec(ctx, "release")
}

// Identify sends the identify template (*IDN?) and parses the reply strictly.
func (s *Switch) Identify(ctx context.Context) (instruments.Identity, error) { return s.identify(ctx) }

// Reset clears the instrument, sends the reset template (*RST), waits for it and
// drains the error queue.
func (s *Switch) Reset(ctx context.Context) error { return s.prepare(ctx, true) }

// CheckErrors reads the error queue until it is empty; see Meter.CheckErrors.
func (s *Switch) CheckErrors(ctx context.Context) error { return s.checkErrors(ctx) }

// Close closes the link; a second call returns nil.
func (s *Switch) Close() error {
	s.mu.Lock()
	if s.closed {
		s.mu.Unlock()
		return nil
	}
	s.closed = true
	s.mu.Unlock()
	return s.sess.Close()
}
