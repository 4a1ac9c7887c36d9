package console

import (
	"embed"
	"encoding/json"
	"errors"
	"html/template"
	"io/fs"
	"mime"
	"net/http"
	"os"
	"path"
	"path/filepath"
	"strings"
	"time"
	"unicode"
	"unicode/utf8"

	"trimline/sequencer"
)

//go:embed web
var webFS embed.FS

var page = template.Must(template.New("index.html").ParseFS(webFS, "web/index.html"))

// routes are the console's: anything else is 404, a known path with another
// method 405 (net/http's patterns).
func (s *Server) routes() *http.ServeMux {
	m := http.NewServeMux()
	m.HandleFunc("GET /{$}", s.index)
	m.HandleFunc("GET /state", s.signedIn(s.state))
	m.HandleFunc("GET /events", s.signedIn(s.events))
	m.HandleFunc("GET /certificates/{file}", s.signedIn(s.certificate))
	m.HandleFunc("GET /static/{file}", s.static)
	m.HandleFunc("POST /signin", s.post(false, s.signin))
	m.HandleFunc("POST /signout", s.post(false, s.signout))
	m.HandleFunc("POST /scan", s.post(true, s.scan))
	m.HandleFunc("POST /stop", s.post(true, s.stop))
	m.HandleFunc("POST /clear", s.post(true, s.clear))
	m.HandleFunc("POST /lot", s.post(true, s.setLot))
	m.HandleFunc("POST /review/{cert}", s.post(true, s.review))
	return m
}

// guard wraps every request: a console on loopback answers only to a
// loopback Host, a panic is a plain 500 (never a stack trace), and every
// answer carries headers that keep the page to itself.
func (s *Server) guard(next http.Handler) http.Handler {
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		defer func() {
			if p := recover(); p != nil {
				if p == http.ErrAbortHandler {
					panic(p)
				}
				s.shiftLog("console: internal error: %v", p)
				http.Error(w, "internal error", http.StatusInternalServerError)
			}
		}()
		h := w.Header()
		h.Set("X-Content-Type-Options", "nosniff")
		h.Set("X-Frame-Options", "DENY")
		h.Set("Referrer-Policy", "same-origin")
		h.Set("Content-Security-Policy", "default-src 'self'; script-src 'self'; style-src 'self'; img-src 'self' data:; connect-src 'self'; frame-ancestors 'none'; form-action 'self'; base-uri 'none'")
		if s.loopback && !loopbackHost(r) {
			http.Error(w, "this console answers on its loopback address only", http.StatusForbidden)
			return
		}
		next.ServeHTTP(w, r)
	})
}

func (s *Server) shiftLog(format string, args ...any) {
	if s.shift != nil {
		s.shift.Log.Error().Msgf(format, args...)
	}
}

// signedIn refuses (403) a request without a signed-in session.
func (s *Server) signedIn(h func(http.ResponseWriter, *http.Request, *session)) http.HandlerFunc {
	return func(w http.ResponseWriter, r *http.Request) {
		se := s.sessions.get(r)
		if se == nil || !se.signedIn() {
			http.Error(w, "sign in first", http.StatusForbidden)
			return
		}
		h(w, r, se)
	}
}

// post checks a state-changing request: same origin, a session, its CSRF
// token, and (when needsPerson) a signed-in person. Refusals are 403.
func (s *Server) post(needsPerson bool, h func(http.ResponseWriter, *http.Request, *session)) http.HandlerFunc {
	return func(w http.ResponseWriter, r *http.Request) {
		r.Body = http.MaxBytesReader(w, r.Body, 64<<10)
		if !sameOrigin(r) {
			http.Error(w, "refused: the request does not come from this console's page", http.StatusForbidden)
			return
		}
		se := s.sessions.get(r)
		if se == nil {
			http.Error(w, "refused: no session (reload the page)", http.StatusForbidden)
			return
		}
		if !csrfOK(r, se) {
			http.Error(w, "refused: missing or wrong form token (reload the page)", http.StatusForbidden)
			return
		}
		if needsPerson && !se.signedIn() {
			http.Error(w, "sign in first", http.StatusForbidden)
			return
		}
		h(w, r, se)
	}
}

// pageData is what the page template shows.
type pageData struct {
	Station  stationView
	Lot      string // the production lot in force, "" = none
	CSRF     string
	Person   string
	Operate  bool
	Review   bool
	Loopback bool
	// AskPassphrase: the sign-in form has a passphrase field (beyond
	// loopback, or when anyone in the station's people has a passphrase).
	AskPassphrase bool
	Error         string
}

// askPassphrase says whether the sign-in form asks for a passphrase.
func (s *Server) askPassphrase() bool {
	if !s.loopback {
		return true
	}
	for _, p := range s.shift.Station.People {
		if p.Passphrase != "" {
			return true
		}
	}
	return false
}

func (s *Server) index(w http.ResponseWriter, r *http.Request) {
	se := s.sessions.get(r)
	if se == nil {
		se = s.sessions.start(w, nil, nil)
	}
	s.mu.Lock()
	d := pageData{Station: s.st.Station, Lot: s.st.Lot, CSRF: se.csrf, Person: se.name, Operate: se.operate,
		// An engineering console decides on no production unit.
		Review: se.review && !s.shift.Issuer.Engineering, Loopback: s.loopback, AskPassphrase: s.askPassphrase()}
	s.mu.Unlock()
	s.render(w, http.StatusOK, d)
}

func (s *Server) render(w http.ResponseWriter, code int, d pageData) {
	w.Header().Set("Content-Type", "text/html; charset=utf-8")
	w.Header().Set("Cache-Control", "no-store")
	w.WriteHeader(code)
	if err := page.Execute(w, d); err != nil {
		s.shiftLog("console: page: %v", err)
	}
}

// wantsJSON: the page's script posts with Accept: application/json and reads
// the answer; a plain form post is answered with the page.
func wantsJSON(r *http.Request) bool {
	return strings.Contains(r.Header.Get("Accept"), "application/json")
}

// answer is what a POST answers the page's script.
type answer struct {
	OK     bool       `json:"ok"`
	Error  string     `json:"error,omitempty"`
	Retest *retestAsk `json:"retest,omitempty"`
	Reload bool       `json:"reload,omitempty"`
	Extra  any        `json:"extra,omitempty"`
}

// retestAsk asks the operator to confirm a retest.
type retestAsk struct {
	Serial  string `json:"serial"`
	Earlier string `json:"earlier"` // "certificate TL1-000002 (FAIL, 2026-12-02 15:04)", station time
	Attempt string `json:"attempt"` // "This is attempt 2 of 3.", "" when the sequence sets no limit
	// Lot: "It was tested in lot L2026-48A; the retest records the lot in
	// force, L2026-49B.", "" when the lots are the same.
	Lot string `json:"lot"`
}

func (s *Server) reply(w http.ResponseWriter, r *http.Request, code int, a answer) {
	if !wantsJSON(r) {
		// A form posted without the script: done, the page again (a sign-in's
		// new session is in the cookie the answer sets); refused, the page
		// with the refusal.
		if a.Error == "" {
			http.Redirect(w, r, "/", http.StatusSeeOther)
			return
		}
		se := s.sessions.get(r)
		d := pageData{Error: a.Error, Loopback: s.loopback, AskPassphrase: s.askPassphrase()}
		s.mu.Lock()
		d.Station, d.Lot = s.st.Station, s.st.Lot
		s.mu.Unlock()
		if se != nil {
			d.CSRF, d.Person, d.Operate, d.Review = se.csrf, se.name, se.operate, se.review
		}
		s.render(w, code, d)
		return
	}
	w.Header().Set("Content-Type", "application/json")
	w.Header().Set("Cache-Control", "no-store")
	w.WriteHeader(code)
	json.NewEncoder(w).Encode(a)
}

// maxNameLen bounds what a sign-in field takes.
const maxNameLen = 80

// cleanText trims s and refuses control characters and overlong text.
func cleanText(s string, max int) (string, bool) {
	s = strings.TrimSpace(s)
	if !utf8.ValidString(s) || utf8.RuneCountInString(s) > max || strings.ContainsFunc(s, unicode.IsControl) {
		return "", false
	}
	return s, true
}

func (s *Server) signin(w http.ResponseWriter, r *http.Request, se *session) {
	id, ok := cleanText(r.PostFormValue("badge"), maxNameLen)
	if !ok || id == "" {
		s.reply(w, r, http.StatusBadRequest, answer{Error: "type or scan your name or badge"})
		return
	}
	pass := r.PostFormValue("passphrase")
	st := s.shift.Station
	var name, how string
	var operate, review bool
	// One passphrase check at a time: at PassphraseIterations a check costs a
	// core for a fifth of a second, and the station's instruments need the
	// other one.
	check := func(p sequencer.Person) bool {
		s.hashing.Lock()
		defer s.hashing.Unlock()
		return p.CheckPassphrase(pass)
	}
	select {
	case s.signins <- struct{}{}:
		defer func() { <-s.signins }()
	default:
		s.reply(w, r, http.StatusServiceUnavailable, answer{Error: "the station is busy checking sign-ins: try again in a moment"})
		return
	}
	p, known := st.Person(id)
	switch {
	case known:
		// A person with a passphrase always gives it, on loopback too: a name
		// or a badge is no secret, and a reviewer's name goes on certificates.
		// Beyond loopback everyone needs one.
		if p.Passphrase != "" || !s.loopback {
			if !check(p) {
				// One message (and the same work) for a wrong passphrase and
				// for none set: the screen does not say which people exist.
				s.reply(w, r, http.StatusForbidden, answer{Error: "sign-in refused: name or passphrase not right"})
				return
			}
			how = "passphrase"
		} else {
			how = "station sign-in"
		}
		name, operate, review = p.Name, p.Can(sequencer.RightOperate), p.Can(sequencer.RightReview)
		if !operate && !review {
			s.reply(w, r, http.StatusForbidden, answer{Error: "sign-in refused: " + p.Name + " may not work at this station"})
			return
		}
	case len(st.People) == 0 && s.loopback:
		// A station file that lists nobody: anyone on the station PC runs
		// units under the name they give, as `trimline run --operator` does;
		// nobody may review.
		name, operate, how = id, true, "station sign-in"
	default:
		if s.askPassphrase() {
			// The work a real check costs: the time taken does not tell a
			// listed name from one that is not.
			check(sequencer.Person{})
		}
		s.reply(w, r, http.StatusForbidden, answer{Error: "sign-in refused: name or passphrase not right"})
		return
	}
	s.sessions.start(w, se, func(n *session) {
		n.name, n.operate, n.review, n.authenticated = name, operate, review, how
	})
	s.shift.Log.Info().Str("person", name).Str("how", how).Msg("console: signed in")
	s.reply(w, r, http.StatusOK, answer{OK: true, Reload: true})
}

func (s *Server) signout(w http.ResponseWriter, r *http.Request, se *session) {
	if se.signedIn() {
		s.shift.Log.Info().Str("person", se.name).Msg("console: signed out")
	}
	s.sessions.start(w, se, nil)
	s.reply(w, r, http.StatusOK, answer{OK: true, Reload: true})
}

func (s *Server) state(w http.ResponseWriter, r *http.Request, se *session) {
	w.Header().Set("Content-Type", "application/json")
	w.Header().Set("Cache-Control", "no-store")
	w.Write(s.snapshot())
}

func (s *Server) events(w http.ResponseWriter, r *http.Request, se *session) {
	s.serveEvents(w, r, se, s.snapshot())
}

// snapshot is the state as JSON.
func (s *Server) snapshot() []byte {
	s.mu.Lock()
	defer s.mu.Unlock()
	b, err := json.Marshal(&s.st)
	if err != nil {
		return []byte("{}")
	}
	return b
}

// certificate serves one file of the station's certificates folder, by its
// base name.
func (s *Server) certificate(w http.ResponseWriter, r *http.Request, se *session) {
	name := r.PathValue("file")
	if name == "" || name != filepath.Base(name) || strings.ContainsAny(name, `/\`) || strings.HasPrefix(name, ".") {
		http.NotFound(w, r)
		return
	}
	p := filepath.Join(s.shift.Issuer.CertDir, name)
	f, err := os.Open(p)
	if err != nil {
		http.NotFound(w, r)
		return
	}
	defer f.Close()
	fi, err := f.Stat()
	if err != nil || !fi.Mode().IsRegular() {
		http.NotFound(w, r)
		return
	}
	if ct := mime.TypeByExtension(filepath.Ext(name)); ct != "" {
		w.Header().Set("Content-Type", ct)
	}
	w.Header().Set("Content-Disposition", `inline; filename="`+strings.ReplaceAll(name, `"`, "")+`"`)
	http.ServeContent(w, r, name, fi.ModTime(), f)
}

// static serves the page's script, style and icons from the binary.
func (s *Server) static(w http.ResponseWriter, r *http.Request) {
	name := r.PathValue("file")
	if name == "index.html" || strings.Contains(name, "..") {
		http.NotFound(w, r)
		return
	}
	b, err := fs.ReadFile(webFS, path.Join("web", name))
	if err != nil {
		http.NotFound(w, r)
		return
	}
	if ct := mime.TypeByExtension(path.Ext(name)); ct != "" {
		w.Header().Set("Content-Type", ct)
	}
	w.Header().Set("Cache-Control", "no-cache")
	http.ServeContent(w, r, name, time.Time{}, strings.NewReader(string(b)))
}

var errEmptyNote = errors.New("write what you found and did before clearing the station")
