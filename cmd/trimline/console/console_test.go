package console

import (
	"context"
	"encoding/json"
	"io"
	"io/fs"
	"net/http"
	"net/http/cookiejar"
	"net/http/httptest"
	"net/url"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	"trimline/instruments/sim/serve"
	"trimline/reports/ledger"
	releasepkg "trimline/reports/release"
	"trimline/reports/signing"
	"trimline/sequencer"
	"trimline/sequences"
)

// unitDemo writes the BRX-200 demo files into a test folder (calibration due
// a year from now, the station's signing key made) and returns the station
// and sequence paths. The files are not released: the tests run engineering
// shifts.
func unitDemo(t testing.TB, edit ...func(string) string) (dir, station, sequence string) {
	t.Helper()
	p, err := sequences.Find(sequences.Default)
	if err != nil {
		t.Fatal(err)
	}
	dir = t.TempDir()
	due := regexp.MustCompile(`(?m)^(\s*cal_due:\s*)\d{4}-\d{2}-\d{2}`)
	for _, name := range []string{p.Station, p.Sequence, p.Limits} {
		data, err := fs.ReadFile(sequences.Demo, name)
		if err != nil {
			t.Fatal(err)
		}
		if name == p.Station {
			data = due.ReplaceAll(data, []byte("${1}"+time.Now().AddDate(1, 0, 0).Format("2006-01-02")))
			for _, e := range edit {
				data = []byte(e(string(data)))
			}
		}
		if err := os.WriteFile(filepath.Join(dir, name), data, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	station, sequence = filepath.Join(dir, p.Station), filepath.Join(dir, p.Sequence)
	st, err := sequencer.LoadStation(station)
	if err != nil {
		t.Fatal(err)
	}
	if _, _, err := signing.Init(filepath.Join(dir, "keys"), st.ID); err != nil {
		t.Fatal(err)
	}
	return dir, station, sequence
}

// client is a browser stand-in: a cookie jar, the page's CSRF token and the
// console's own Origin on every POST.
type client struct {
	t    testing.TB
	base string
	http *http.Client
	csrf string
}

func newClient(t testing.TB, h http.Handler) *client {
	ts := httptest.NewServer(h)
	t.Cleanup(ts.Close)
	jar, _ := cookiejar.New(nil)
	c := &client{t: t, base: ts.URL, http: &http.Client{Jar: jar}}
	c.page()
	return c
}

var csrfMeta = regexp.MustCompile(`<meta name="csrf" content="([^"]+)">`)

// page GETs / and keeps its CSRF token.
func (c *client) page() string {
	c.t.Helper()
	res, err := c.http.Get(c.base + "/")
	if err != nil {
		c.t.Fatal(err)
	}
	defer res.Body.Close()
	b, _ := io.ReadAll(res.Body)
	if res.StatusCode != http.StatusOK {
		c.t.Fatalf("GET /: %s", res.Status)
	}
	m := csrfMeta.FindSubmatch(b)
	if m == nil {
		c.t.Fatalf("GET /: no CSRF token in the page")
	}
	c.csrf = string(m[1])
	return string(b)
}

// post sends form as the page's script does and decodes the answer.
func (c *client) post(path string, form url.Values) (int, answer) {
	c.t.Helper()
	req, _ := http.NewRequest("POST", c.base+path, strings.NewReader(form.Encode()))
	req.Header.Set("Content-Type", "application/x-www-form-urlencoded")
	req.Header.Set("Accept", "application/json")
	req.Header.Set("Origin", c.base)
	req.Header.Set("X-CSRF-Token", c.csrf)
	res, err := c.http.Do(req)
	if err != nil {
		c.t.Fatal(err)
	}
	defer res.Body.Close()
	var a answer
	b, _ := io.ReadAll(res.Body)
	if err := json.Unmarshal(b, &a); err != nil {
		a.Error = string(b)
	}
	return res.StatusCode, a
}

func (c *client) state() state {
	c.t.Helper()
	res, err := c.http.Get(c.base + "/state")
	if err != nil {
		c.t.Fatal(err)
	}
	defer res.Body.Close()
	var s state
	if err := json.NewDecoder(res.Body).Decode(&s); err != nil {
		c.t.Fatalf("GET /state: %s: %v", res.Status, err)
	}
	return s
}

// settled waits until no unit is running and returns the state.
func (c *client) settled(timeout time.Duration) state {
	c.t.Helper()
	end := time.Now().Add(timeout)
	for {
		s := c.state()
		if s.Phase != phaseRunning {
			return s
		}
		if time.Now().After(end) {
			c.t.Fatalf("the unit still runs after %s", timeout)
		}
		time.Sleep(20 * time.Millisecond)
	}
}

func (c *client) signIn(id, name string) {
	c.t.Helper()
	if code, a := c.post("/signin", url.Values{"badge": {id}}); code != http.StatusOK || !a.OK {
		c.t.Fatalf("sign in: %d %+v", code, a)
	}
	if !strings.Contains(c.page(), `id="operator">`+name+`<`) {
		c.t.Fatalf("the page does not show %s signed in", name)
	}
}

// TestShiftOnTheSimulatedClock runs a small shift through the handler: a good
// unit (PASS, certificate served), a defective one (FAIL with its reason), a
// bad scan (refused, nothing recorded), a rescan (asked, then linked to the
// earlier run as a retest).
func TestShiftOnTheSimulatedClock(t *testing.T) {
	dir, station, sequence := unitDemo(t)
	ctx := context.Background()
	srv, err := New(ctx, Options{StationPath: station, SequencePath: sequence, Out: filepath.Join(dir, "out"), Engineering: true})
	if err != nil {
		t.Fatal(err)
	}
	defer srv.Close()
	if srv.Bench() != nil {
		t.Fatal("Bench() is not nil without Options.Bench")
	}
	c := newClient(t, srv.Handler())
	if code, _ := c.post("/scan", url.Values{"serial": {"BRX-00002"}}); code != http.StatusForbidden {
		t.Fatalf("a scan before sign-in answered %d, want 403", code)
	}
	c.signIn("B-1042", "Ada Quillfeather")

	if code, a := c.post("/scan", url.Values{"serial": {"BRX-00002"}}); code != http.StatusOK || !a.OK {
		t.Fatalf("scan: %d %+v", code, a)
	}
	s := c.settled(30 * time.Second)
	if s.Verdict == nil || s.Verdict.Verdict != "PASS" || s.Verdict.Cert == "" || s.Verdict.CertURL == "" {
		t.Fatalf("BRX-00002: %+v", s.Verdict)
	}
	res, err := c.http.Get(c.base + s.Verdict.CertURL)
	if err != nil {
		t.Fatal(err)
	}
	pdf, _ := io.ReadAll(res.Body)
	res.Body.Close()
	if res.StatusCode != http.StatusOK || !strings.HasPrefix(string(pdf), "%PDF-") {
		t.Fatalf("certificate link: %s, %.8q", res.Status, pdf)
	}

	c.post("/scan", url.Values{"serial": {"BRX-00009"}})
	s = c.settled(30 * time.Second)
	if s.Verdict == nil || s.Verdict.Verdict != "FAIL" || len(s.Verdict.Reasons) == 0 || s.Verdict.Action == "" {
		t.Fatalf("BRX-00009: %+v", s.Verdict)
	}
	if len(s.Verdict.Statement) == 0 {
		t.Fatal("BRX-00009: no metrologist's statement")
	}

	led := srv.shift.Ledger
	before, err := led.RecentRuns(ctx, 0)
	if err != nil {
		t.Fatal(err)
	}
	for _, bad := range []string{"BRX-12", "brx-00003", "BRX 00003", "../BRX-00003", ""} {
		code, a := c.post("/scan", url.Values{"serial": {bad}})
		if code != http.StatusBadRequest || !strings.Contains(a.Error, "Nothing was run") && bad != "" {
			t.Errorf("scan %q: %d %q", bad, code, a.Error)
		}
	}
	after, _ := led.RecentRuns(ctx, 0)
	if len(after) != len(before) {
		t.Fatalf("bad scans recorded %d runs", len(after)-len(before))
	}

	code, a := c.post("/scan", url.Values{"serial": {"BRX-00002"}})
	if code != http.StatusOK || a.Retest == nil || !strings.Contains(a.Retest.Earlier, s.Recent[1].Cert) || a.Retest.Attempt != "This is attempt 2 of 3." {
		t.Fatalf("rescan BRX-00002: %d %+v (earlier certificate %s)", code, a, s.Recent[1].Cert)
	}
	if c.state().Phase == phaseRunning {
		t.Fatal("a rescan ran before the retest was confirmed")
	}
	c.post("/scan", url.Values{"serial": {"BRX-00002"}, "retest": {"confirm"}})
	s = c.settled(30 * time.Second)
	if s.Verdict == nil || s.Verdict.Verdict != "PASS" || !s.Recent[0].Retest {
		t.Fatalf("retest: %+v %+v", s.Verdict, s.Recent[0])
	}
	st, err := led.CertificateStatus(ctx, s.Recent[2].Cert)
	if err != nil || !st.Superseded || st.SupersededBy != s.Recent[0].Cert {
		t.Fatalf("earlier certificate %s: %+v %v", s.Recent[2].Cert, st, err)
	}
	if n := s.Counters; n.Units != 3 || n.Passed != 2 || n.Failed != 1 || n.FirstIn != 2 || n.FPY != "50.0 %" {
		t.Fatalf("counters %+v", n)
	}
	// The sequence gives a unit 3 measured runs (retest.max_attempts): the
	// third is the last, a fourth scan is refused before anything runs.
	c.post("/scan", url.Values{"serial": {"BRX-00002"}, "retest": {"confirm"}})
	c.settled(30 * time.Second)
	code, a = c.post("/scan", url.Values{"serial": {"BRX-00002"}, "retest": {"confirm"}})
	if code != http.StatusConflict || !strings.Contains(a.Error, "rework") {
		t.Fatalf("a fourth run of BRX-00002: %d %+v", code, a)
	}
	if runs, _ := led.Runs(ctx, "BRX-00002"); len(runs) != 3 {
		t.Fatalf("BRX-00002 has %d runs, want 3", len(runs))
	}
	// Every run records the signed-in person as its operator.
	runs, _ := led.Runs(ctx, "BRX-00009")
	rec, err := led.Run(ctx, runs[0].RunID)
	if err != nil || rec.Operator != "Ada Quillfeather" {
		t.Fatalf("operator %q, %v", rec.Operator, err)
	}
}

// TestFaultLocksUntilCleared injects a silent meter on the served bench: the
// unit faults, the station locks naming what failed, a scan is refused until
// someone clears it with a note (recorded in the audit trail), and the next
// unit opens the instruments again and passes.
func TestFaultLocksUntilCleared(t *testing.T) {
	if testing.Short() {
		t.Skip("runs units on the served bench in real time")
	}
	ctx := context.Background()
	srv, c := faultedShift(t)
	s := c.settled(60 * time.Second)
	if s.Phase != phaseLocked || s.Fault == nil || s.Fault.Said == "" || s.Verdict.Verdict != "FAULT" {
		t.Fatalf("after a silent meter: phase %s, fault %+v", s.Phase, s.Fault)
	}
	if code, a := c.post("/scan", url.Values{"serial": {"BRX-00004"}}); code != http.StatusConflict || !strings.Contains(a.Error, "locked") {
		t.Fatalf("scan on a locked station: %d %+v", code, a)
	}
	if code, _ := c.post("/clear", url.Values{"note": {"  "}}); code != http.StatusBadRequest {
		t.Fatalf("clear without a note: %d", code)
	}
	srv.Bench().SetFault("meter", serve.Fault{})
	if code, a := c.post("/clear", url.Values{"note": {"meter cable reseated"}}); code != http.StatusOK {
		t.Fatalf("clear: %d %+v", code, a)
	}
	trail, err := srv.shift.Ledger.AuditTrail(ctx)
	if err != nil {
		t.Fatal(err)
	}
	found := false
	for _, e := range trail {
		found = found || (e.Action == "clear station fault" && e.Actor == "Ada Quillfeather" && strings.Contains(e.Detail, "meter cable reseated"))
	}
	if !found {
		t.Fatal("the clearing note is not in the audit trail")
	}
	c.post("/scan", url.Values{"serial": {"BRX-00004"}})
	s = c.settled(60 * time.Second)
	if s.Verdict == nil || s.Verdict.Verdict != "PASS" {
		t.Fatalf("after clearing: %+v %+v", s.Verdict, s.Fault)
	}
	if s.Counters.Faults != 1 || s.Counters.Passed != 1 {
		t.Fatalf("counters %+v", s.Counters)
	}
}

// faultedShift starts an engineering shift on the served bench, signs Ada
// in, silences the meter and scans BRX-00003, which faults.
func faultedShift(t *testing.T) (*Server, *client) {
	t.Helper()
	dir, station, sequence := unitDemo(t)
	srv, err := New(context.Background(), Options{StationPath: station, SequencePath: sequence, Out: filepath.Join(dir, "out"), Engineering: true, Bench: "tcp"})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { srv.Close() })
	c := newClient(t, srv.Handler())
	c.signIn("B-1042", "Ada Quillfeather")
	if err := srv.Bench().SetFault("meter", serve.Fault{NoReply: true}); err != nil {
		t.Fatal(err)
	}
	c.post("/scan", url.Values{"serial": {"BRX-00003"}})
	return srv, c
}

// releaseFiles signs the demo sequence and limit files as released by a demo
// quality engineer whom the station's release_keys trust, as `trimline demo`
// does, so that the station runs production (not engineering) units.
func releaseFiles(t *testing.T, dir, station, sequence string) {
	t.Helper()
	ctx := context.Background()
	st, err := sequencer.LoadStation(station)
	if err != nil {
		t.Fatal(err)
	}
	if _, _, err := signing.Init(filepath.Join(dir, "keys", "approvers"), "qe"); err != nil {
		t.Fatal(err)
	}
	trustText := "trust:\n  stations:\n    - {id: " + st.ID + ", public_key: " + st.ID + ".pub}\n" +
		"  approvers:\n    - {name: Demo Quality Engineer, public_key: approvers/qe.pub, may: [release]}\n"
	if err := os.WriteFile(filepath.Join(dir, "keys", "trust.yaml"), []byte(trustText), 0o600); err != nil {
		t.Fatal(err)
	}
	trust, err := releasepkg.Approvers(filepath.Join(dir, "keys", "trust.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	key, err := signing.Load(filepath.Join(dir, "keys", "approvers", "qe.key"))
	if err != nil {
		t.Fatal(err)
	}
	seq, err := sequencer.LoadSequence(sequence)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.MkdirAll(filepath.Join(dir, "out"), 0o755); err != nil {
		t.Fatal(err)
	}
	led, err := ledger.Open(ctx, filepath.Join(dir, "out", "ledger.db"))
	if err != nil {
		t.Fatal(err)
	}
	defer led.Close()
	for _, f := range []string{sequence, seq.Limits.File} {
		data, err := os.ReadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		req := releasepkg.Request{Key: key, Trust: trust, Decision: releasepkg.Approve, Ranges: sequencer.PhysicalRanges(seq), Catalog: seq.Catalog()}
		if _, err := releasepkg.Record(ctx, led, filepath.Base(f), sequencer.FileKind(data), data, req); err != nil {
			t.Fatalf("release %s: %v", f, err)
		}
	}
}

// TestReviewDecision holds a unit for REVIEW (a noisy fixture puts its output
// noise in the guard band of its limit), shows it in the queue of a reviewer
// only, and records the reviewer's decision: the certificate is reissued PASS
// and the REVIEW certificate superseded.
func TestReviewDecision(t *testing.T) {
	seed := regexp.MustCompile(`(?m)^(\s*)seed:\s*"\d+"`)
	dir, station, sequence := unitDemo(t, func(s string) string {
		return seed.ReplaceAllString(s, "${1}seed: \"8\"\n${1}noise: 50 uV")
	})
	// One measured run per unit: a held unit still goes to the reviewer, not
	// to rework.
	seqText, err := os.ReadFile(sequence)
	if err != nil {
		t.Fatal(err)
	}
	one := regexp.MustCompile(`max_attempts: \d+`).ReplaceAll(seqText, []byte("max_attempts: 1"))
	if err := os.WriteFile(sequence, one, 0o644); err != nil {
		t.Fatal(err)
	}
	releaseFiles(t, dir, station, sequence)
	ctx := context.Background()
	srv, err := New(ctx, Options{StationPath: station, SequencePath: sequence, Out: filepath.Join(dir, "out")})
	if err != nil {
		t.Fatal(err)
	}
	defer srv.Close()
	if s := srv.snapshot(); !strings.Contains(string(s), `"key":"files","state":"ok"`) {
		t.Fatalf("released files are not ok in the status: %s", s)
	}
	op := newClient(t, srv.Handler())
	op.signIn("B-1042", "Ada Quillfeather")
	op.post("/scan", url.Values{"serial": {"BRX-00002"}})
	s := op.settled(30 * time.Second)
	if s.Verdict == nil || s.Verdict.Verdict != "REVIEW" || s.Verdict.Cert == "" {
		t.Fatalf("BRX-00002 on a noisy fixture: %+v", s.Verdict)
	}
	held := s.Verdict.Cert
	if len(s.Review) != 1 || s.Review[0].Cert != held {
		t.Fatalf("review queue %+v, want %s", s.Review, held)
	}
	// Scanned again, a held unit is not retested (nor sent to rework on its
	// last attempt): a reviewer decides it.
	if code, a := op.post("/scan", url.Values{"serial": {"BRX-00002"}, "retest": {"confirm"}}); code != http.StatusConflict ||
		!strings.Contains(a.Error, "held for review") || !strings.Contains(a.Error, held) {
		t.Fatalf("a rescan of the held unit: %d %+v; want 409, held for review under %s", code, a, held)
	}
	if strings.Contains(op.page(), `id="review"`) {
		t.Fatal("an operator without the review right sees the review queue")
	}
	if code, _ := op.post("/review/"+held, url.Values{"decision": {"accept"}, "reason": {"noise within the datasheet"}}); code != http.StatusForbidden {
		t.Fatalf("an operator's decision answered %d, want 403", code)
	}
	rv := newClient(t, srv.Handler())
	rv.signIn("B-2077", "Tobias Wrenhollow")
	if !strings.Contains(rv.page(), `id="review"`) {
		t.Fatal("a reviewer does not see the review queue")
	}
	if code, _ := rv.post("/review/"+held, url.Values{"decision": {"accept"}, "reason": {""}}); code != http.StatusBadRequest {
		t.Fatalf("a decision without a reason answered %d, want 400", code)
	}
	code, a := rv.post("/review/"+held, url.Values{"decision": {"accept"}, "reason": {"noise within the datasheet"}})
	if code != http.StatusOK || !a.OK {
		t.Fatalf("accept: %d %+v", code, a)
	}
	if s := rv.state(); len(s.Review) != 0 {
		t.Fatalf("the queue still holds %+v", s.Review)
	}
	st, err := srv.shift.Ledger.CertificateStatus(ctx, held)
	if err != nil || !st.Superseded {
		t.Fatalf("REVIEW certificate %s after the decision: %+v %v", held, st, err)
	}
	rec, meta, err := srv.shift.Ledger.RunByCertificate(ctx, st.SupersededBy)
	if err != nil || rec.Verdict != "PASS" || rec.Disposition == nil || rec.Disposition.Reviewer != "Tobias Wrenhollow" {
		t.Fatalf("decision record %s: %+v %+v %v", st.SupersededBy, rec, meta, err)
	}
}

// TestFaultWhileReopening: the first unit after a cleared fault opens and
// identifies the instruments again. When that fails, the unit is recorded
// once, as a FAULT under the signed-in operator, and the lock names that very
// run; a stop pressed meanwhile records it ABORTED and does not lock.
func TestFaultWhileReopening(t *testing.T) {
	if testing.Short() {
		t.Skip("runs units on the served bench in real time")
	}
	ctx := context.Background()
	srv, c := faultedShift(t)
	if s := c.settled(60 * time.Second); s.Phase != phaseLocked {
		t.Fatalf("after a silent meter: phase %s", s.Phase)
	}
	// Cleared without fixing it: the next unit cannot open the meter. It is
	// recorded in the lot in force, a new one.
	c.post("/clear", url.Values{"note": {"looked, found nothing"}})
	if code, a := c.post("/lot", url.Values{"lot": {"L2026-50C"}}); code != http.StatusOK {
		t.Fatalf("lot change: %d %+v", code, a)
	}
	c.post("/scan", url.Values{"serial": {"BRX-00004"}})
	s := c.settled(60 * time.Second)
	if s.Phase != phaseLocked || s.Fault == nil {
		t.Fatalf("a meter that still does not answer: phase %s, fault %+v", s.Phase, s.Fault)
	}
	runs, err := srv.shift.Ledger.Runs(ctx, "BRX-00004")
	if err != nil {
		t.Fatal(err)
	}
	if len(runs) != 1 || runs[0].Verdict != sequencer.Fault || runs[0].RunID != s.Fault.RunID {
		t.Fatalf("runs of BRX-00004 %+v; want one FAULT, the lock's run %s", runs, s.Fault.RunID)
	}
	rec, err := srv.shift.Ledger.Run(ctx, runs[0].RunID)
	if err != nil {
		t.Fatal(err)
	}
	if rec.Operator != "Ada Quillfeather" {
		t.Errorf("the FAULT before the unit started is recorded under %q, want the signed-in operator", rec.Operator)
	}
	if rec.Lot != "L2026-50C" {
		t.Errorf("the FAULT before the unit started is recorded in lot %q, want the lot in force L2026-50C", rec.Lot)
	}

	// A meter that answers slowly: STOP while the instruments open.
	srv.Bench().SetFault("meter", serve.Fault{Delay: 1500 * time.Millisecond})
	c.post("/clear", url.Values{"note": {"meter answers again, slowly"}})
	c.post("/scan", url.Values{"serial": {"BRX-00005"}})
	time.Sleep(200 * time.Millisecond)
	if code, a := c.post("/stop", nil); code != http.StatusOK {
		t.Fatalf("stop: %d %+v", code, a)
	}
	s = c.settled(60 * time.Second)
	if s.Phase == phaseLocked || s.Verdict == nil || s.Verdict.Verdict != string(sequencer.Aborted) {
		t.Fatalf("a stop while the instruments open: phase %s, verdict %+v; want ABORTED, not locked", s.Phase, s.Verdict)
	}
	if runs, _ := srv.shift.Ledger.Runs(ctx, "BRX-00005"); len(runs) != 1 || runs[0].Verdict != sequencer.Aborted || runs[0].Certificate != "" {
		t.Fatalf("runs of BRX-00005 %+v; want one ABORTED without a certificate", runs)
	}
}

// TestPassphraseOnLoopback: a person whose station entry has a passphrase
// gives it on a loopback console too (a badge is no secret); a person without
// one signs in by badge.
func TestPassphraseOnLoopback(t *testing.T) {
	hash, err := sequencer.HashPassphrase("amber crane 42")
	if err != nil {
		t.Fatal(err)
	}
	dir, station, sequence := unitDemo(t, func(s string) string {
		return strings.Replace(s, "    key: keys/people/tobias-wrenhollow.pub", "    key: keys/people/tobias-wrenhollow.pub\n    passphrase: \""+hash+"\"", 1)
	})
	srv, err := New(context.Background(), Options{StationPath: station, SequencePath: sequence, Out: filepath.Join(dir, "out"), Engineering: true})
	if err != nil {
		t.Fatal(err)
	}
	defer srv.Close()
	c := newClient(t, srv.Handler())
	if !strings.Contains(c.page(), `id="passphrase"`) {
		t.Fatal("the sign-in form has no passphrase field although a person has a passphrase")
	}
	if code, a := c.post("/signin", url.Values{"badge": {"B-2077"}}); code != http.StatusForbidden {
		t.Fatalf("a reviewer's badge without the passphrase: %d %+v; want 403", code, a)
	}
	if code, a := c.post("/signin", url.Values{"badge": {"B-2077"}, "passphrase": {"amber crane 41"}}); code != http.StatusForbidden {
		t.Fatalf("a wrong passphrase: %d %+v; want 403", code, a)
	}
	if code, a := c.post("/signin", url.Values{"badge": {"B-2077"}, "passphrase": {"amber crane 42"}}); code != http.StatusOK || !a.OK {
		t.Fatalf("the right passphrase: %d %+v", code, a)
	}
	c2 := newClient(t, srv.Handler())
	c2.signIn("B-1042", "Ada Quillfeather")
}

// TestCalibrationStatus: an instrument past its calibration due date blocks
// the station (no unit starts, the status names it) without locking it as a
// fault a note could clear; one due in exactly 14 days warns, as trimline
// check does, and units run.
func TestCalibrationStatus(t *testing.T) {
	for _, c := range []struct {
		name  string
		due   time.Time
		state string
	}{
		{"expired", time.Now().UTC().AddDate(0, 0, -2), "block"},
		{"due in 14 days", time.Now().UTC().AddDate(0, 0, 14), "warn"},
	} {
		t.Run(c.name, func(t *testing.T) {
			first := regexp.MustCompile(`(?m)^(\s*cal_due:\s*)\d{4}-\d{2}-\d{2}`)
			dir, station, sequence := unitDemo(t, func(s string) string {
				done := false
				return first.ReplaceAllStringFunc(s, func(m string) string {
					if done {
						return m
					}
					done = true
					return first.ReplaceAllString(m, "${1}"+c.due.Format("2006-01-02"))
				})
			})
			srv, err := New(context.Background(), Options{StationPath: station, SequencePath: sequence, Out: filepath.Join(dir, "out"), Engineering: true})
			if err != nil {
				t.Fatal(err)
			}
			defer srv.Close()
			cl := newClient(t, srv.Handler())
			cl.signIn("B-1042", "Ada Quillfeather")
			s := cl.state()
			var cal *statusItem
			for i := range s.Status {
				if s.Status[i].Key == "calibration" {
					cal = &s.Status[i]
				}
			}
			if cal == nil || cal.State != c.state || !strings.Contains(cal.Title, c.due.Format("2006-01-02")) {
				t.Fatalf("calibration status %+v; want %s naming %s", cal, c.state, c.due.Format("2006-01-02"))
			}
			if s.Phase == phaseLocked || s.Fault != nil {
				t.Fatalf("phase %s, fault %+v: a calibration is no fault a note clears", s.Phase, s.Fault)
			}
			code, a := cl.post("/scan", url.Values{"serial": {"BRX-00001"}})
			runs, _ := srv.shift.Ledger.Runs(context.Background(), "BRX-00001")
			if c.state == "block" {
				if code != http.StatusConflict || !strings.Contains(a.Error, "calibration expired") || len(runs) != 0 {
					t.Fatalf("scan with an expired calibration: %d %+v, %d run(s); want 409 naming it and nothing run", code, a, len(runs))
				}
				return
			}
			if s := cl.settled(30 * time.Second); code != http.StatusOK || s.Verdict == nil || s.Verdict.Verdict != "PASS" {
				t.Fatalf("scan with a calibration due soon: %d %+v, verdict %+v", code, a, s.Verdict)
			}
		})
	}
}

// TestServedOverTLS: a console served over HTTPS marks its session cookie
// Secure, and a page of its own (Origin https://…) signs in and runs.
func TestServedOverTLS(t *testing.T) {
	dir, station, sequence := unitDemo(t)
	srv, err := New(context.Background(), Options{StationPath: station, SequencePath: sequence, Out: filepath.Join(dir, "out"), Engineering: true, TLS: true})
	if err != nil {
		t.Fatal(err)
	}
	defer srv.Close()
	ts := httptest.NewTLSServer(srv.Handler())
	defer ts.Close()
	jar, _ := cookiejar.New(nil)
	hc := ts.Client()
	hc.Jar = jar
	res, err := hc.Get(ts.URL + "/")
	if err != nil {
		t.Fatal(err)
	}
	res.Body.Close()
	cookies := res.Cookies()
	if len(cookies) == 0 || !cookies[0].Secure || !cookies[0].HttpOnly {
		t.Fatalf("session cookie over HTTPS: %+v; want Secure and HttpOnly", cookies)
	}
	c := &client{t: t, base: ts.URL, http: hc}
	c.page()
	c.signIn("B-1042", "Ada Quillfeather")
	if code, a := c.post("/scan", url.Values{"serial": {"BRX-00001"}}); code != http.StatusOK {
		t.Fatalf("scan over HTTPS: %d %+v", code, a)
	}
	if s := c.settled(30 * time.Second); s.Verdict == nil || s.Verdict.Verdict != "PASS" {
		t.Fatalf("verdict over HTTPS: %+v", s.Verdict)
	}
}

// TestEventStreamEndsWithItsSession: an open event stream does not outlive
// its session's sign-out (the page then reloads to the sign-in form).
func TestEventStreamEndsWithItsSession(t *testing.T) {
	dir, station, sequence := unitDemo(t)
	srv, err := New(context.Background(), Options{StationPath: station, SequencePath: sequence, Out: filepath.Join(dir, "out"), Engineering: true})
	if err != nil {
		t.Fatal(err)
	}
	defer srv.Close()
	c := newClient(t, srv.Handler())
	c.signIn("B-1042", "Ada Quillfeather")
	res, err := c.http.Get(c.base + "/events")
	if err != nil || res.StatusCode != http.StatusOK {
		t.Fatalf("GET /events: %v %v", res, err)
	}
	ended := make(chan struct{})
	go func() {
		io.Copy(io.Discard, res.Body)
		res.Body.Close()
		close(ended)
	}()
	if code, a := c.post("/signout", nil); code != http.StatusOK {
		t.Fatalf("sign out: %d %+v", code, a)
	}
	select {
	case <-ended:
	case <-time.After(20 * time.Second):
		t.Fatal("the event stream goes on 20 s after its session signed out")
	}
}

// TestSessionTableIsBounded: pages loaded over and over (any page in the
// station's browser can make it load the console) do not grow the session
// table without end.
func TestSessionTableIsBounded(t *testing.T) {
	dir, station, sequence := unitDemo(t)
	srv, err := New(context.Background(), Options{StationPath: station, SequencePath: sequence, Out: filepath.Join(dir, "out"), Engineering: true})
	if err != nil {
		t.Fatal(err)
	}
	defer srv.Close()
	signed := newClient(t, srv.Handler())
	signed.signIn("B-1042", "Ada Quillfeather")
	h := srv.Handler()
	for range maxSessions + 200 {
		req := httptest.NewRequest("GET", "/", nil)
		req.Host = "127.0.0.1"
		h.ServeHTTP(httptest.NewRecorder(), req)
	}
	srv.sessions.mu.Lock()
	n := len(srv.sessions.byID)
	srv.sessions.mu.Unlock()
	if n > maxSessions+1 {
		t.Fatalf("%d sessions after %d page loads; want at most %d", n, maxSessions+200, maxSessions+1)
	}
	if s := signed.state(); s.Phase == "" {
		t.Fatal("the signed-in session was dropped")
	}
}

// TestPanicIsAPlain500: a handler that panics answers a plain 500, never a
// stack trace.
func TestPanicIsAPlain500(t *testing.T) {
	s := &Server{loopback: true}
	h := s.guard(http.HandlerFunc(func(http.ResponseWriter, *http.Request) { panic("boom at handlers.go:1") }))
	req := httptest.NewRequest("GET", "/", nil)
	req.Host = "127.0.0.1"
	rec := httptest.NewRecorder()
	h.ServeHTTP(rec, req)
	body := rec.Body.String()
	if rec.Code != http.StatusInternalServerError || strings.Contains(body, "boom") || strings.Contains(body, "goroutine") || strings.Contains(body, ".go:") {
		t.Fatalf("a panic answered %d %q; want a plain 500", rec.Code, body)
	}
}

// TestLotChangedOnScreen: the shift starts in Options.Lot; an operator changes
// the lot (CSRF and Origin as every POST, the operate right, CheckLot's rule,
// not a serial, not while a unit runs), the change is in the audit trail under
// their name, and every unit records the lot in force when it started. A lot
// scanned into the serial field runs nothing and says where lots go.
func TestLotChangedOnScreen(t *testing.T) {
	dir, station, sequence := unitDemo(t, func(s string) string {
		return strings.Replace(s, "may: [operate, review]", "may: [review]", 1)
	})
	ctx := context.Background()
	srv, err := New(ctx, Options{StationPath: station, SequencePath: sequence, Out: filepath.Join(dir, "out"), Engineering: true, Lot: "L2026-48A"})
	if err != nil {
		t.Fatal(err)
	}
	defer srv.Close()
	led := srv.shift.Ledger
	c := newClient(t, srv.Handler())
	if code, _ := c.post("/lot", url.Values{"lot": {"L2026-49B"}}); code != http.StatusForbidden {
		t.Fatalf("a lot change before sign-in answered %d, want 403", code)
	}
	c.signIn("B-1042", "Ada Quillfeather")
	if s := c.state(); s.Lot != "L2026-48A" {
		t.Fatalf("the lot in force is %q, want the starting L2026-48A", s.Lot)
	}
	if !strings.Contains(c.page(), `data-lot="L2026-48A">L2026-48A<`) {
		t.Error("the station screen does not show the lot in force")
	}
	recordOf := func(serial string) *sequencer.Record {
		t.Helper()
		runs, err := led.Runs(ctx, serial)
		if err != nil || len(runs) == 0 {
			t.Fatalf("runs of %s: %v %v", serial, runs, err)
		}
		rec, err := led.Run(ctx, runs[0].RunID)
		if err != nil {
			t.Fatal(err)
		}
		return rec
	}
	c.post("/scan", url.Values{"serial": {"BRX-00001"}})
	c.settled(30 * time.Second)
	if rec := recordOf("BRX-00001"); rec.Lot != "L2026-48A" {
		t.Fatalf("BRX-00001 recorded lot %q, want L2026-48A", rec.Lot)
	}

	// Every POST's rules: the session's token and the console's own Origin.
	token := c.csrf
	c.csrf = "wrong"
	if code, _ := c.post("/lot", url.Values{"lot": {"L2026-49B"}}); code != http.StatusForbidden {
		t.Errorf("a lot change with a wrong CSRF token answered %d, want 403", code)
	}
	c.csrf = token
	req, _ := http.NewRequest("POST", c.base+"/lot", strings.NewReader(url.Values{"lot": {"L2026-49B"}, "csrf": {token}}.Encode()))
	req.Header.Set("Content-Type", "application/x-www-form-urlencoded")
	req.Header.Set("Origin", "http://evil.example")
	if res, err := c.http.Do(req); err != nil || res.StatusCode != http.StatusForbidden {
		t.Errorf("a lot change from another Origin: %v %v, want 403", res.Status, err)
	} else {
		res.Body.Close()
	}

	// CheckLot's rule, with its message; a serial is not a lot.
	for _, bad := range []struct{ lot, says string }{
		{"", "lot traveller"},
		{"L2026\a49B", "control characters"},
		{strings.Repeat("L", sequencer.MaxLotLen+1), "at most 64"},
		{"BRX-00007", "serial"},
	} {
		code, a := c.post("/lot", url.Values{"lot": {bad.lot}})
		if code != http.StatusBadRequest || !strings.Contains(a.Error, bad.says) || !strings.Contains(a.Error, "The lot is still L2026-48A.") {
			t.Errorf("lot %q: %d %q; want 400 saying %q and that the lot is still L2026-48A", bad.lot, code, a.Error, bad.says)
		}
	}
	// Not while a unit runs: it records the lot it started in.
	srv.mu.Lock()
	srv.st.Phase = phaseRunning
	srv.mu.Unlock()
	code, a := c.post("/lot", url.Values{"lot": {"L2026-49B"}})
	srv.mu.Lock()
	srv.st.Phase = phaseVerdict
	srv.mu.Unlock()
	if code != http.StatusConflict || !strings.Contains(a.Error, "running") {
		t.Errorf("a lot change while a unit runs: %d %q; want 409", code, a.Error)
	}
	if s := c.state(); s.Lot != "L2026-48A" {
		t.Fatalf("after refused changes the lot is %q", s.Lot)
	}

	// Only a person with the operate right.
	rv := newClient(t, srv.Handler())
	rv.signIn("B-2077", "Tobias Wrenhollow")
	if code, _ := rv.post("/lot", url.Values{"lot": {"L2026-49B"}}); code != http.StatusForbidden {
		t.Errorf("a reviewer's lot change answered %d, want 403", code)
	}

	if code, a := c.post("/lot", url.Values{"lot": {" L2026-49B "}}); code != http.StatusOK || !a.OK {
		t.Fatalf("lot change: %d %+v", code, a)
	}
	if s := c.state(); s.Lot != "L2026-49B" {
		t.Fatalf("the lot in force is %q after the change, want L2026-49B", s.Lot)
	}
	trail, err := led.AuditTrail(ctx)
	if err != nil {
		t.Fatal(err)
	}
	var changes []string
	for _, e := range trail {
		if e.Action == auditLot {
			changes = append(changes, e.Actor+": "+e.Detail)
		}
	}
	if want := "Ada Quillfeather: from lot L2026-48A to lot L2026-49B"; len(changes) != 1 || changes[0] != want {
		t.Errorf("audit trail of lot changes %q, want [%q]", changes, want)
	}

	// The lot traveller scanned into the serial field by mistake.
	before, _ := led.RecentRuns(ctx, 0)
	code, a = c.post("/scan", url.Values{"serial": {"L2026-49B"}})
	if code != http.StatusBadRequest || !strings.Contains(a.Error, "Nothing was run") || !strings.Contains(a.Error, "use the Lot field") {
		t.Errorf("a lot id scanned as a serial: %d %q; want 400, nothing run, pointing to the Lot field", code, a.Error)
	}
	if after, _ := led.RecentRuns(ctx, 0); len(after) != len(before) {
		t.Fatal("a lot id scanned as a serial recorded a run")
	}

	c.post("/scan", url.Values{"serial": {"BRX-00002"}})
	s := c.settled(30 * time.Second)
	if rec := recordOf("BRX-00002"); rec.Lot != "L2026-49B" {
		t.Fatalf("BRX-00002 recorded lot %q, want the lot in force L2026-49B", rec.Lot)
	}
	if len(s.Recent) != 2 || s.Recent[0].Lot != "L2026-49B" || s.Recent[1].Lot != "L2026-48A" {
		t.Errorf("the last units %+v; want each with the lot it recorded", s.Recent)
	}
	// A unit of the earlier lot scanned again: the question says which lot
	// the retest records.
	code, a = c.post("/scan", url.Values{"serial": {"BRX-00001"}})
	if want := "It was tested in lot L2026-48A; the retest records the lot in force, L2026-49B."; code != http.StatusOK || a.Retest == nil || a.Retest.Lot != want {
		t.Errorf("rescan of BRX-00001 from the earlier lot: %d %+v; want the question to say %q", code, a.Retest, want)
	}
	if code, a = c.post("/scan", url.Values{"serial": {"BRX-00002"}}); a.Retest == nil || a.Retest.Lot != "" {
		t.Errorf("rescan of BRX-00002 in the lot in force: %d %+v; want nothing said of the lot", code, a.Retest)
	}
}
