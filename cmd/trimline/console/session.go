package console

import (
	"crypto/rand"
	"crypto/subtle"
	"encoding/base64"
	"net"
	"net/http"
	"net/url"
	"strings"
	"sync"
	"time"
)

// cookieName is the session cookie.
const cookieName = "trimline_session"

// maxSessions bounds the sessions kept before signed-out ones are dropped.
const maxSessions = 1000

// session is one browser's visit: signed out (only a CSRF token, for the
// sign-in form) or signed in as a person.
type session struct {
	id      string
	csrf    string
	created time.Time
	seen    time.Time

	// Signed in: the person's name as runs record it, their rights, and how
	// they were known ("station sign-in" or "passphrase").
	name          string
	operate       bool
	review        bool
	authenticated string
}

func (se *session) signedIn() bool { return se.name != "" }

// sessions holds the console's sessions in memory: a restart signs everyone
// out.
type sessions struct {
	ttl  time.Duration // a sign-in's lifetime
	idle time.Duration // 0 = no idle limit (loopback)
	// secure marks the cookie Secure (the console is served over HTTPS).
	secure bool

	mu   sync.Mutex
	byID map[string]*session
}

func newSessions(ttl time.Duration, loopback, secure bool) *sessions {
	s := &sessions{ttl: ttl, byID: map[string]*session{}, secure: secure}
	if !loopback {
		s.idle = idleBeyondLoopback
	}
	return s
}

// token is 32 random bytes, URL-safe base64.
func token() string {
	b := make([]byte, 32)
	rand.Read(b) // never fails (crypto/rand)
	return base64.RawURLEncoding.EncodeToString(b)
}

// live reports whether the session id is still signed in, without counting
// as a use of it: an open event stream keeps no session alive past its idle
// limit or its lifetime, nor one signed out from another tab.
func (s *sessions) live(id string) bool {
	s.mu.Lock()
	defer s.mu.Unlock()
	se := s.byID[id]
	if se == nil || !se.signedIn() {
		return false
	}
	now := time.Now()
	return now.Sub(se.created) <= s.ttl && (s.idle == 0 || now.Sub(se.seen) <= s.idle)
}

// get returns the live session of r's cookie, nil when there is none (or it
// expired, which deletes it).
func (s *sessions) get(r *http.Request) *session {
	c, err := r.Cookie(cookieName)
	if err != nil {
		return nil
	}
	s.mu.Lock()
	defer s.mu.Unlock()
	se := s.byID[c.Value]
	if se == nil {
		return nil
	}
	now := time.Now()
	if now.Sub(se.created) > s.ttl || (s.idle > 0 && now.Sub(se.seen) > s.idle) {
		delete(s.byID, se.id)
		return nil
	}
	se.seen = now
	cp := *se
	return &cp
}

// start makes a new session (signed out, or signed in when name is set) and
// sets its cookie on w. An earlier session of the browser (old) ends: a
// sign-in always gets a new id.
func (s *sessions) start(w http.ResponseWriter, old *session, fill func(*session)) *session {
	now := time.Now()
	se := &session{id: token(), csrf: token(), created: now, seen: now}
	if fill != nil {
		fill(se)
	}
	s.mu.Lock()
	if old != nil {
		delete(s.byID, old.id)
	}
	s.byID[se.id] = se
	// Expired sessions go when new ones come; past maxSessions, so do the
	// signed-out ones not used for a minute (pages loaded and left).
	crowded := len(s.byID) > maxSessions
	for id, o := range s.byID {
		if now.Sub(o.created) > s.ttl || (s.idle > 0 && now.Sub(o.seen) > s.idle) ||
			crowded && !o.signedIn() && now.Sub(o.seen) > time.Minute {
			delete(s.byID, id)
		}
	}
	// Still crowded (a page loading the console over and over): every
	// signed-out session but the new one goes, so the table stays bounded.
	if len(s.byID) > maxSessions {
		for id, o := range s.byID {
			if !o.signedIn() && id != se.id {
				delete(s.byID, id)
			}
		}
	}
	s.mu.Unlock()
	http.SetCookie(w, &http.Cookie{Name: cookieName, Value: se.id, Path: "/", HttpOnly: true, Secure: s.secure,
		SameSite: http.SameSiteStrictMode, MaxAge: int(s.ttl.Seconds())})
	cp := *se
	return &cp
}

// end deletes se.
func (s *sessions) end(se *session) {
	s.mu.Lock()
	delete(s.byID, se.id)
	s.mu.Unlock()
}

// csrfOK reports whether r carries se's CSRF token (form field csrf, or
// header X-CSRF-Token), compared in constant time.
func csrfOK(r *http.Request, se *session) bool {
	got := r.Header.Get("X-CSRF-Token")
	if got == "" {
		got = r.PostFormValue("csrf")
	}
	return got != "" && subtle.ConstantTimeCompare([]byte(got), []byte(se.csrf)) == 1
}

// sameOrigin reports whether r's Origin (else its Referer) is the console
// itself: same host and port as the request's Host. A request with neither
// is refused.
func sameOrigin(r *http.Request) bool {
	o := r.Header.Get("Origin")
	if o == "" || o == "null" {
		ref := r.Header.Get("Referer")
		if ref == "" {
			return false
		}
		o = ref
	}
	u, err := url.Parse(o)
	if err != nil || (u.Scheme != "http" && u.Scheme != "https") {
		return false
	}
	return strings.EqualFold(u.Host, r.Host)
}

// loopbackHost reports whether r's Host names a loopback address: a console
// served on loopback answers nothing else, so that a page whose name was
// made to resolve to 127.0.0.1 (DNS rebinding) cannot reach it.
func loopbackHost(r *http.Request) bool {
	h := r.Host
	if host, _, err := net.SplitHostPort(h); err == nil {
		h = host
	}
	h = strings.Trim(h, "[]")
	if strings.EqualFold(h, "localhost") {
		return true
	}
	ip := net.ParseIP(h)
	return ip != nil && ip.IsLoopback()
}
