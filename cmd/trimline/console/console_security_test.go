package console_test

import (
	"context"
	"io"
	"net/http"
	"net/http/cookiejar"
	"net/url"
	"regexp"
	"strings"
	"testing"
	"time"

	"trimline/cmd/trimline/console"
	"trimline/sequencer"
)

// The security rules of the console (design: "Security"; the section 4),
// checked over plain HTTP without a browser: any web page open in the station's
// browser can post to 127.0.0.1, so on loopback too a request changes nothing
// without a signed-in session, a CSRF token and an Origin of the console's own.

// webClient is one browser's worth of cookies against a console.
type webClient struct {
	t    *testing.T
	base string // http://127.0.0.1:PORT
	c    *http.Client
}

func newWebClient(t *testing.T, base string) *webClient {
	t.Helper()
	jar, err := cookiejar.New(nil)
	if err != nil {
		t.Fatal(err)
	}
	return &webClient{t: t, base: base, c: &http.Client{
		Jar:     jar,
		Timeout: 30 * time.Second,
		// A redirect is an answer to look at, not to follow.
		CheckRedirect: func(*http.Request, []*http.Request) error { return http.ErrUseLastResponse },
	}}
}

// do sends one request and returns its status, headers and body. A body that
// shows a Go stack trace or panic fails the test whatever the status.
func (w *webClient) do(method, path string, form url.Values, header map[string]string) (int, http.Header, string) {
	w.t.Helper()
	var body io.Reader
	if form != nil {
		body = strings.NewReader(form.Encode())
	}
	req, err := http.NewRequest(method, w.base+path, body)
	if err != nil {
		w.t.Fatal(err)
	}
	if form != nil {
		req.Header.Set("Content-Type", "application/x-www-form-urlencoded")
	}
	for k, v := range header {
		if k == "Host" {
			req.Host = v
			continue
		}
		req.Header.Set(k, v)
	}
	resp, err := w.c.Do(req)
	if err != nil {
		w.t.Fatalf("%s %s: %v", method, path, err)
	}
	defer resp.Body.Close()
	b, err := io.ReadAll(resp.Body)
	if err != nil {
		w.t.Fatal(err)
	}
	text := string(b)
	if strings.Contains(text, "goroutine ") || strings.Contains(text, "panic") || strings.Contains(text, ".go:") {
		w.t.Errorf("%s %s answers with what looks like a stack trace:\n%.600s", method, path, text)
	}
	return resp.StatusCode, resp.Header, text
}

// get fetches path and returns its status and body.
func (w *webClient) get(path string) (int, string) {
	w.t.Helper()
	code, _, body := w.do(http.MethodGet, path, nil, nil)
	return code, body
}

// post sends form with the Origin of the console itself (a page of its own).
func (w *webClient) post(path string, form url.Values) (int, string) {
	w.t.Helper()
	code, _, body := w.do(http.MethodPost, path, form, map[string]string{"Origin": w.base})
	return code, body
}

var csrfField = []*regexp.Regexp{
	regexp.MustCompile(`name="csrf"[^>]*?value="([^"]+)"`),
	regexp.MustCompile(`value="([^"]+)"[^>]*?name="csrf"`),
	regexp.MustCompile(`name="csrf"[^>]*?content="([^"]+)"`),
}

// csrf reads the CSRF token the page at / carries for this client's session
// (the hidden field csrf of its forms).
func (w *webClient) csrf() string {
	w.t.Helper()
	code, body := w.get("/")
	if code != http.StatusOK {
		w.t.Fatalf("GET /: %d, want 200", code)
	}
	for _, re := range csrfField {
		if m := re.FindStringSubmatch(body); m != nil {
			return m[1]
		}
	}
	w.t.Fatalf("GET / carries no csrf field:\n%.2000s", body)
	return ""
}

// page says which screen GET / shows: "signin" or "station".
func (w *webClient) page() string {
	w.t.Helper()
	code, hdr, body := w.do(http.MethodGet, "/", nil, nil)
	if code != http.StatusOK || hdr.Get("Location") != "" {
		w.t.Fatalf("GET /: %d (Location %q), want 200 and no redirect", code, hdr.Get("Location"))
	}
	switch {
	case strings.Contains(body, `id="scan-form"`) && !strings.Contains(body, `id="signin"`):
		return "station"
	case strings.Contains(body, `id="signin"`) && !strings.Contains(body, `id="scan-form"`):
		return "signin"
	}
	w.t.Fatalf("GET / shows neither the sign-in form nor the station screen alone:\n%.2000s", body)
	return ""
}

// refused reports whether code is a refusal that leaves nothing done: 403 (or
// 401), never a redirect to follow nor a server error.
func refused(code int) bool { return code == http.StatusForbidden || code == http.StatusUnauthorized }

func runCount(t *testing.T, d demoFiles) int {
	t.Helper()
	runs, err := d.openLedger(t).Runs(context.Background(), "")
	if err != nil {
		t.Fatal(err)
	}
	return len(runs)
}

func TestConsoleRefusesRequestsThatDoNotComeFromASignedInPage(t *testing.T) {
	d := writeDemo(t, nil)
	opID, opName := d.person(t, sequencer.RightOperate)
	_, hs := startConsole(t, d, console.Options{})
	w := newWebClient(t, hs.URL)

	if got := w.page(); got != "signin" {
		t.Fatalf("a new visitor sees the %s screen, want the sign-in form", got)
	}
	token := w.csrf()

	// No session: a scan with a well-formed token and the right Origin is refused,
	// and nothing is recorded.
	if code, body := w.post("/scan", url.Values{"serial": {"BRX-00001"}, "csrf": {token}}); !refused(code) {
		t.Errorf("POST /scan without a signed-in session: %d, want 403\n%.400s", code, body)
	}
	for _, p := range []string{"/stop", "/clear", "/lot", "/review/TL1-000001"} {
		if code, _ := w.post(p, url.Values{"csrf": {token}, "note": {"x"}, "decision": {"accept"}, "reason": {"x"}, "lot": {"L1"}}); !refused(code) {
			t.Errorf("POST %s without a signed-in session: %d, want 403", p, code)
		}
	}

	// Nor does it read the shift: state, live events and certificates need a
	// signed-in session too.
	for _, p := range []string{"/state", "/events", "/certificates/TL1-000001_BRX-00001.pdf"} {
		if code, _ := w.get(p); !refused(code) {
			t.Errorf("GET %s without a signed-in session: %d, want 403", p, code)
		}
	}

	// Sign-in is a state change too: no token, a wrong token or another site's
	// Origin gets no session.
	signin := func(form url.Values, hdr map[string]string) int {
		code, _, _ := w.do(http.MethodPost, "/signin", form, hdr)
		return code
	}
	if code := signin(url.Values{"badge": {opID}}, map[string]string{"Origin": hs.URL}); !refused(code) {
		t.Errorf("POST /signin without a CSRF token: %d, want 403", code)
	}
	if code := signin(url.Values{"badge": {opID}, "csrf": {token + "x"}}, map[string]string{"Origin": hs.URL}); !refused(code) {
		t.Errorf("POST /signin with a wrong CSRF token: %d, want 403", code)
	}
	if code := signin(url.Values{"badge": {opID}, "csrf": {token}}, map[string]string{"Origin": "http://evil.example"}); !refused(code) {
		t.Errorf("POST /signin from another site's Origin: %d, want 403", code)
	}
	if code := signin(url.Values{"badge": {opID}, "csrf": {token}}, map[string]string{"Referer": "http://evil.example/page"}); !refused(code) {
		t.Errorf("POST /signin with no Origin and another site's Referer: %d, want 403", code)
	}
	if got := w.page(); got != "signin" {
		t.Fatalf("after refused sign-ins the console shows the %s screen", got)
	}

	// The real sign-in: a session cookie that scripts cannot read and other sites
	// do not send, under a new id (a session id planted before sign-in is
	// worth nothing after it).
	u, _ := url.Parse(hs.URL)
	var before string
	for _, c := range w.c.Jar.Cookies(u) {
		before = c.Value
	}
	code, hdr, body := w.do(http.MethodPost, "/signin", url.Values{"badge": {opID}, "csrf": {token}}, map[string]string{"Origin": hs.URL})
	if code >= 400 {
		t.Fatalf("POST /signin as %s with token and Origin: %d\n%.600s", opID, code, body)
	}
	var session *http.Cookie
	for _, c := range (&http.Response{Header: hdr}).Cookies() {
		if c.HttpOnly && c.SameSite == http.SameSiteStrictMode {
			session = c
		}
	}
	if session == nil {
		t.Errorf("sign-in set no HttpOnly, SameSite=Strict cookie: %q", hdr.Values("Set-Cookie"))
	} else if len(session.Value) < 43 { // 32 random bytes, base64 (or 64 hex digits)
		t.Errorf("session id %q is shorter than 32 random bytes encoded", session.Value)
	} else if before == "" || session.Value == before {
		t.Errorf("the session id before sign-in %q and after it %q: want a new one", before, session.Value)
	}
	if got := w.page(); got != "station" {
		t.Fatalf("after signing in the console shows the %s screen", got)
	}
	if _, body := w.get("/"); !strings.Contains(body, opName) {
		t.Errorf("the station screen does not name the signed-in operator %q", opName)
	}
	token = w.csrf()

	// Signed in: every POST still needs the token and the console's own Origin.
	// A bad serial is used so that a wrongly accepted request records nothing.
	scan := url.Values{"serial": {"NOT-A-SERIAL"}}
	if code, _, _ := w.do(http.MethodPost, "/scan", scan, map[string]string{"Origin": hs.URL}); !refused(code) {
		t.Errorf("POST /scan signed in but without a CSRF token: %d, want 403", code)
	}
	scan.Set("csrf", token)
	if code, _, _ := w.do(http.MethodPost, "/scan", scan, map[string]string{"Origin": "http://127.0.0.1:1"}); !refused(code) {
		t.Errorf("POST /scan from another origin (another port of the same host): %d, want 403", code)
	}
	if code, _, _ := w.do(http.MethodPost, "/scan", scan, map[string]string{"Origin": "null"}); !refused(code) {
		t.Errorf("POST /scan with Origin null (a sandboxed page or a file): %d, want 403", code)
	}
	if code, _, _ := w.do(http.MethodPost, "/scan", scan, nil); !refused(code) {
		t.Errorf("POST /scan with neither Origin nor Referer: %d, want 403", code)
	}
	// The same request from the console's page is heard (and the bad serial refused
	// in words, not as a forbidden request); the token may come as a header.
	if code, _, body := w.do(http.MethodPost, "/scan", url.Values{"serial": {"NOT-A-SERIAL"}},
		map[string]string{"Origin": hs.URL, "X-CSRF-Token": token}); refused(code) || code >= 500 {
		t.Errorf("POST /scan from the console's own page with X-CSRF-Token: %d\n%.400s", code, body)
	}
	if code, _, body := w.do(http.MethodPost, "/scan", scan, map[string]string{"Referer": hs.URL + "/"}); refused(code) || code >= 500 {
		t.Errorf("POST /scan with the console's Referer and no Origin: %d\n%.400s", code, body)
	}
	if n := runCount(t, d); n != 0 {
		t.Errorf("the ledger holds %d runs after refused and bad scans, want 0", n)
	}

	// Another client (another browser, or a page that learnt nothing) has no session
	// and may not borrow this session's token.
	other := newWebClient(t, hs.URL)
	other.csrf()
	if code, _ := other.post("/scan", url.Values{"serial": {"BRX-00001"}, "csrf": {token}}); !refused(code) {
		t.Errorf("POST /scan from a client without the session, with the session's token: %d, want 403", code)
	}

	// A page of another site whose name was made to resolve to 127.0.0.1 (DNS
	// rebinding) sends its own name as Host, and its own Origin: a console on
	// loopback answers only to a loopback name.
	u, _ = url.Parse(hs.URL)
	rebound := "http://station.evil.example:" + u.Port()
	if code, _, _ := w.do(http.MethodGet, "/state", nil, map[string]string{"Host": "station.evil.example:" + u.Port()}); !refused(code) {
		t.Errorf("GET /state addressed to another name: %d, want 403", code)
	}
	if code, _, _ := w.do(http.MethodPost, "/scan", url.Values{"serial": {"BRX-00001"}, "csrf": {token}},
		map[string]string{"Host": "station.evil.example:" + u.Port(), "Origin": rebound}); !refused(code) {
		t.Errorf("POST /scan addressed to another name, from that name's page: %d, want 403", code)
	}

	// Unknown paths are 404 and known paths under a wrong method 405, with no
	// stack trace (do checks every body).
	for _, p := range []string{"/nope", "/static/nope.js", "/certificates/ledger.db", "/certificates/..%2Fledger.db",
		"/certificates/%2E%2E%2Fkeys%2FTL1.key", "/certificates/TL1-999999_BRX-09999.pdf", "/admin", "/state/x"} {
		if code, _ := w.get(p); code != http.StatusNotFound {
			t.Errorf("GET %s: %d, want 404", p, code)
		}
	}
	for _, r := range []struct{ method, path string }{
		{"GET", "/scan"}, {"GET", "/signin"}, {"GET", "/signout"}, {"GET", "/stop"}, {"GET", "/clear"}, {"GET", "/lot"},
		{"GET", "/review/TL1-000001"}, {"PUT", "/"}, {"DELETE", "/"}, {"POST", "/"}, {"POST", "/events"},
		{"POST", "/state"}, {"DELETE", "/scan"},
	} {
		code, _, _ := w.do(r.method, r.path, url.Values{"csrf": {token}}, map[string]string{"Origin": hs.URL})
		if code != http.StatusMethodNotAllowed {
			t.Errorf("%s %s: %d, want 405", r.method, r.path, code)
		}
	}

	// Signing out ends the session: its token no longer works.
	if code, body := w.post("/signout", url.Values{"csrf": {token}}); code >= 400 {
		t.Fatalf("POST /signout: %d\n%.400s", code, body)
	}
	if got := w.page(); got != "signin" {
		t.Errorf("after signing out the console shows the %s screen", got)
	}
	if code, _ := w.post("/scan", url.Values{"serial": {"BRX-00001"}, "csrf": {token}}); !refused(code) {
		t.Errorf("POST /scan after signing out, with the old token: %d, want 403", code)
	}
	if n := runCount(t, d); n != 0 {
		t.Errorf("the ledger holds %d runs, want 0", n)
	}
}

var peopleBlock = regexp.MustCompile(`(?m)^people:.*\n(?:[ \t#].*\n|[ \t]*\n)*`)

// withPeople replaces the station file's people: list with people (YAML list
// items, indented two spaces).
func withPeople(people string) func(string) string {
	return func(station string) string {
		return peopleBlock.ReplaceAllString(station, "") + "\npeople:\n" + people
	}
}

// Beyond loopback every sign-in is authenticated: a console that could not
// check anyone refuses to start, and a badge without the passphrase gets no
// session.
func TestConsoleBeyondLoopbackNeedsPassphrases(t *testing.T) {
	// The demo's people have no passphrase or key to sign in with.
	plain := writeDemo(t, withPeople("  - {name: Tamsin Orchard, badge: \"B-3301\", may: [operate]}\n"))
	_, err := console.New(context.Background(), console.Options{StationPath: plain.station, SequencePath: plain.sequence,
		Out: plain.dir, Listen: "0.0.0.0:8470", Log: io.Discard})
	if err == nil {
		t.Fatal("a console on 0.0.0.0 started on a station whose people have no passphrase")
	}
	if !strings.Contains(err.Error(), "passphrase") {
		t.Errorf("the refusal does not say a passphrase is needed: %v", err)
	}

	const pass = "correct horse 7 battery"
	hash, err := sequencer.HashPassphrase(pass)
	if err != nil {
		t.Fatal(err)
	}
	d := writeDemo(t, withPeople("  - name: Tamsin Orchard\n    badge: \"B-3301\"\n    may: [operate]\n    passphrase: \""+hash+"\"\n"))
	_, hs := startConsole(t, d, console.Options{Listen: "0.0.0.0:8470", SessionTTL: 2 * time.Second})
	w := newWebClient(t, hs.URL)
	if _, body := w.get("/"); !strings.Contains(body, `id="passphrase"`) {
		t.Errorf("the sign-in form beyond loopback has no passphrase field")
	}
	for _, form := range []url.Values{
		{"badge": {"B-3301"}},
		{"badge": {"B-3301"}, "passphrase": {"wrong horse"}},
		{"badge": {"Tamsin Orchard"}, "passphrase": {""}},
	} {
		form.Set("csrf", w.csrf())
		w.post("/signin", form)
		if got := w.page(); got != "signin" {
			t.Fatalf("sign-in with %v (no or a wrong passphrase) opened the %s screen", form, got)
		}
	}
	w.post("/signin", url.Values{"badge": {"B-3301"}, "passphrase": {pass}, "csrf": {w.csrf()}})
	if got := w.page(); got != "station" {
		t.Fatalf("sign-in with the right passphrase shows the %s screen", got)
	}
	// SessionTTL 2 s: the session ends on its own (sessions expire beyond loopback).
	time.Sleep(2500 * time.Millisecond)
	if got := w.page(); got != "signin" {
		t.Errorf("a session older than its SessionTTL still shows the %s screen", got)
	}
}
