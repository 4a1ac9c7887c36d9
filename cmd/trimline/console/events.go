package console

import (
	"encoding/json"
	"fmt"
	"net/http"
	"sync"
	"time"
)

// hub hands events to every open event stream. A stream that falls behind is
// closed; its page reconnects and reads the whole state again.
type hub struct {
	mu     sync.Mutex
	subs   map[chan []byte]struct{}
	closed bool
}

// subBuffer is how many events a stream may have waiting.
const subBuffer = 512

func newHub() *hub { return &hub{subs: map[chan []byte]struct{}{}} }

// publish sends one event (name and JSON data) to every stream.
func (h *hub) publish(name string, v any) {
	data, err := json.Marshal(v)
	if err != nil {
		return
	}
	msg := fmt.Appendf(nil, "event: %s\ndata: %s\n\n", name, data)
	h.mu.Lock()
	defer h.mu.Unlock()
	for c := range h.subs {
		select {
		case c <- msg:
		default:
			delete(h.subs, c)
			close(c)
		}
	}
}

func (h *hub) subscribe() (chan []byte, bool) {
	h.mu.Lock()
	defer h.mu.Unlock()
	if h.closed {
		return nil, false
	}
	c := make(chan []byte, subBuffer)
	h.subs[c] = struct{}{}
	return c, true
}

func (h *hub) unsubscribe(c chan []byte) {
	h.mu.Lock()
	defer h.mu.Unlock()
	if _, ok := h.subs[c]; ok {
		delete(h.subs, c)
		close(c)
	}
}

// close ends every stream.
func (h *hub) close() {
	h.mu.Lock()
	defer h.mu.Unlock()
	h.closed = true
	for c := range h.subs {
		delete(h.subs, c)
		close(c)
	}
}

// serveEvents streams events to one page until it goes away or the console
// closes. The first event is the whole state.
func (s *Server) serveEvents(w http.ResponseWriter, r *http.Request, se *session, first []byte) {
	fl, ok := w.(http.Flusher)
	if !ok {
		http.Error(w, "streaming unsupported", http.StatusInternalServerError)
		return
	}
	c, ok := s.hub.subscribe()
	if !ok {
		http.Error(w, "the console is closing", http.StatusServiceUnavailable)
		return
	}
	defer s.hub.unsubscribe(c)
	h := w.Header()
	h.Set("Content-Type", "text/event-stream")
	h.Set("Cache-Control", "no-store")
	h.Set("X-Accel-Buffering", "no")
	w.WriteHeader(http.StatusOK)
	fmt.Fprintf(w, "retry: 1000\nevent: state\ndata: %s\n\n", first)
	fl.Flush()
	keep := time.NewTicker(5 * time.Second)
	defer keep.Stop()
	for {
		select {
		case <-r.Context().Done():
			return
		case msg, ok := <-c:
			if !ok {
				return
			}
			// Send what is waiting in one write.
			w.Write(msg)
		more:
			for {
				select {
				case m, ok := <-c:
					if !ok {
						fl.Flush()
						return
					}
					w.Write(m)
				default:
					break more
				}
			}
			fl.Flush()
		case <-keep.C:
			if !s.sessions.live(se.id) {
				// Signed out, expired or idle: the page reloads to the
				// sign-in form (EventSource reconnects and is refused).
				return
			}
			fmt.Fprint(w, ": keep-alive\n\n")
			fl.Flush()
		}
	}
}
