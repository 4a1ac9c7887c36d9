package serve

import (
	"bufio"
	"context"
	"io"
	"strings"
	"sync"
	"time"
)

// handler carries out the lines of one instrument.
type handler interface {
	// handle carries out line, the endpoint's command number n (0-based, counted
	// from Start), and returns the reply, or ok = false for none.
	handle(ctx context.Context, line string, f Fault, n int) (reply string, ok bool)
	// inject is the ErrorAfter fault: run carries the line out; inject may run it
	// and push entry (SCPI) or not run it and answer an error (DUT).
	inject(entry string, run func() (string, bool)) (string, bool)
}

// maxLog bounds Server.Received.
const maxLog = 1 << 16

// endpoint is one served instrument: its handler, its fault and its links.
type endpoint struct {
	srv  *Server
	role string
	h    handler

	mu           sync.Mutex
	fault        Fault
	cmds         int // commands received since Start or SetFault
	total        int // commands received since Start
	replies      int // replies sent since Start or SetFault
	errorMatches int // commands matching Fault.ErrorAfter since Start or SetFault
	errorFired   bool
	log          []string
	links        map[io.Closer]bool
	closers      []func() error
	down         bool
}

// addCloser registers something to close at shutdown (a listener, a terminal).
func (ep *endpoint) addCloser(f func() error) {
	ep.mu.Lock()
	defer ep.mu.Unlock()
	ep.closers = append(ep.closers, f)
}

// track registers a link; it returns false when the endpoint is shutting down.
func (ep *endpoint) track(c io.Closer) bool {
	ep.mu.Lock()
	defer ep.mu.Unlock()
	if ep.down {
		return false
	}
	if ep.links == nil {
		ep.links = map[io.Closer]bool{}
	}
	ep.links[c] = true
	return true
}

func (ep *endpoint) untrack(c io.Closer) {
	ep.mu.Lock()
	defer ep.mu.Unlock()
	delete(ep.links, c)
}

func (ep *endpoint) shutdown() {
	ep.mu.Lock()
	ep.down = true
	closers := ep.closers
	var links []io.Closer
	for c := range ep.links {
		links = append(links, c)
	}
	ep.mu.Unlock()
	for _, f := range closers {
		f()
	}
	for _, c := range links {
		c.Close()
	}
}

// serve answers the lines of one link until it fails or is closed.
func (ep *endpoint) serve(link io.ReadWriteCloser) {
	ctx := ep.srv.ctx
	sc := bufio.NewScanner(link)
	sc.Buffer(make([]byte, 4096), 1<<16)
	perLink := 0
	for sc.Scan() {
		line := strings.TrimRight(sc.Text(), "\r")
		ep.mu.Lock()
		f, n, total := ep.fault, ep.cmds, ep.total
		ep.cmds++
		ep.total++
		if len(ep.log) >= maxLog {
			ep.log = append(ep.log[:0], ep.log[len(ep.log)/2:]...)
		}
		ep.log = append(ep.log, line)
		perLink++
		drop := f.DropAfter > 0 && perLink > f.DropAfter
		silent := f.NoReply && n >= f.NoReplyAfter
		inject := false
		if !drop && !silent && f.ErrorAfter != "" && !ep.errorFired && strings.HasPrefix(strings.TrimSpace(line), f.ErrorAfter) {
			ep.errorMatches++
			inject = ep.errorMatches >= max(f.ErrorAt, 1)
			ep.errorFired = inject
		}
		ep.mu.Unlock()
		if drop {
			link.Close()
			return
		}
		if silent {
			continue
		}
		run := func() (string, bool) { return ep.h.handle(ctx, line, f, total) }
		var reply string
		var ok bool
		if inject {
			entry := f.ErrorEntry
			if entry == "" {
				entry = `-300,"Device-specific error"`
			}
			reply, ok = ep.h.inject(entry, run)
		} else {
			reply, ok = run()
		}
		if !ok {
			continue
		}
		ep.mu.Lock()
		ep.replies++
		r := ep.replies
		ep.mu.Unlock()
		if r == max(f.GarbleAt, 1) {
			switch {
			case f.Garble:
				reply = garble(reply)
			case f.Truncate:
				reply = reply[:len(reply)/2]
			}
		}
		if f.Delay > 0 {
			t := time.NewTimer(f.Delay)
			select {
			case <-t.C:
			case <-ctx.Done():
				t.Stop()
				return
			}
		}
		if _, err := io.WriteString(link, reply+"\n"); err != nil {
			return
		}
	}
}

// garble replaces every other byte of s, starting with the first, by 0xFF.
func garble(s string) string {
	b := []byte(s)
	for i := 0; i < len(b); i += 2 {
		b[i] = 0xff
	}
	if len(b) == 0 {
		b = []byte{0xff}
	}
	return string(b)
}
