package console_test

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/chromedp/chromedp"

	"trimline/cmd/trimline/console"
	"trimline/instruments/sim/serve"
	"trimline/reports/ledger"
	"trimline/sequencer"
)

// The console in a real browser: Debian's chromium, headless, driven through
// chromedp against consoles served on loopback, one shift as an operator works
// it (the section 5). The DOM ids and attributes the tests use are the
// console's contract with them (design, "DOM contract").

var update = flag.Bool("update", false, "rewrite the README's console screenshots in testdata/")

// chromiumPath is where Debian's chromium package puts the browser; .ci/run
// installs it.
const chromiumPath = "/usr/bin/chromium"

// screenshots are the states the README shows, written to testdata/ with -update.
var screenshots = []string{"signin", "ready", "running", "pass", "fail", "retest", "fault", "review"}

// startBrowser starts one headless chromium for the test, with a fresh profile,
// and returns its first tab's context. Without chromium the test skips, except
// under CI=true, where a missing browser is a failure.
func startBrowser(t *testing.T) context.Context {
	t.Helper()
	if testing.Short() {
		t.Skip("the browser tests run units on the served bench in real time")
	}
	if _, err := os.Stat(chromiumPath); err != nil {
		if os.Getenv("CI") == "true" {
			t.Fatalf("CI=true but no browser: %v (.ci/run installs Debian's chromium)", err)
		}
		t.Skipf("no %s: the console's browser tests need chromium (apt-get install chromium)", chromiumPath)
	}
	opts := append(chromedp.DefaultExecAllocatorOptions[:],
		chromedp.ExecPath(chromiumPath),
		chromedp.Headless,
		chromedp.NoSandbox,
		chromedp.DisableGPU,
		chromedp.NoFirstRun,
		chromedp.Flag("disable-quic", true),
		chromedp.Flag("disable-background-networking", true),
		chromedp.Flag("disable-component-update", true),
		chromedp.Flag("disable-sync", true),
		chromedp.UserDataDir(t.TempDir()),
		// A station PC's 1280×1024 monitor; newTab sets the page's viewport to it
		// (the README's screenshots are this size).
		chromedp.WindowSize(1280, 1024),
	)
	actx, cancelAlloc := chromedp.NewExecAllocator(context.Background(), opts...)
	t.Cleanup(cancelAlloc)
	bctx, cancelBrowser := chromedp.NewContext(actx)
	t.Cleanup(cancelBrowser)
	if err := chromedp.Do(bctx); err != nil {
		t.Fatalf("start %s: %v", chromiumPath, err)
	}
	return bctx
}

// newTab opens a tab of the browser on base (a console's URL). The tab is
// created without a timeout: chromedp ties a tab to the context of its first
// action, so a timed first action would close it when its time ran out.
func newTab(t *testing.T, browser context.Context, base, shots string) *page {
	t.Helper()
	tab, cancel := chromedp.NewContext(browser)
	t.Cleanup(cancel)
	if err := chromedp.Do(tab, chromedp.EmulateViewport(1280, 1024)); err != nil {
		t.Fatalf("open a tab: %v", err)
	}
	// The page's script must run clean: an uncaught exception, a console.error
	// or a content-security-policy refusal fails the test when the tab closes.
	messages := chromedp.Console(tab)
	var mu sync.Mutex
	var problems []string
	done := make(chan struct{})
	go func() {
		defer close(done)
		for m, err := range messages {
			if err != nil {
				return
			}
			if m.IsException() || (m.Type == chromedp.ConsoleError && (m.Source == "" || m.Source == "security")) {
				mu.Lock()
				problems = append(problems, m.String())
				mu.Unlock()
			}
		}
	}()
	t.Cleanup(func() {
		cancel()
		<-done
		mu.Lock()
		defer mu.Unlock()
		for _, m := range problems {
			t.Errorf("the console page's script reported: %s", m)
		}
	})
	return &page{t: t, ctx: tab, base: base, dir: shots}
}

// page is one browser tab on one console.
type page struct {
	t    *testing.T
	ctx  context.Context
	base string
	dir  string // where screenshots go
}

// do runs actions on the tab, failing the test after timeout.
func (p *page) do(timeout time.Duration, what string, actions ...chromedp.Action[chromedp.Void]) {
	p.t.Helper()
	ctx, cancel := context.WithTimeout(p.ctx, timeout)
	defer cancel()
	if err := chromedp.Do(ctx, actions...); err != nil {
		p.fatalf("%s: %v", what, err)
	}
}

// js prepends the helpers every expression may use: vis(sel) is true when the
// element exists and is rendered; txt(sel) is its visible text ("" if absent).
const js = `(() => {
const vis = (s) => { const e = document.querySelector(s); if (!e) return false;
  const st = getComputedStyle(e); return st.display !== 'none' && st.visibility !== 'hidden' && e.getClientRects().length > 0; };
const txt = (s) => { const e = document.querySelector(s); return e ? (e.innerText || e.textContent || '').trim() : ''; };
const attr = (s, a) => { const e = document.querySelector(s); return e ? (e.getAttribute(a) || '') : ''; };
return (%s);
})()`

// eval evaluates a JavaScript expression (with the js helpers) into T.
func eval[T any](p *page, expr string) T {
	p.t.Helper()
	ctx, cancel := context.WithTimeout(p.ctx, 10*time.Second)
	defer cancel()
	v, err := chromedp.Run(ctx, chromedp.Evaluate[T](fmt.Sprintf(js, expr)))
	if err != nil {
		p.fatalf("evaluate %s: %v", expr, err)
	}
	return v
}

// text is the visible text of the element sel matches ("" when there is none).
func (p *page) text(sel string) string {
	p.t.Helper()
	return eval[string](p, fmt.Sprintf("txt(%q)", sel))
}

func (p *page) visible(sel string) bool {
	p.t.Helper()
	return eval[bool](p, fmt.Sprintf("vis(%q)", sel))
}

// waitFor evaluates the expression every 50 ms until it is true, failing with
// what was awaited and what the page showed when it is not within timeout. An
// evaluation that fails (the page reloading under it) counts as false.
func (p *page) waitFor(timeout time.Duration, what, expr string) {
	p.t.Helper()
	deadline := time.Now().Add(timeout)
	var last error
	for {
		ctx, cancel := context.WithTimeout(p.ctx, 2*time.Second)
		ok, err := chromedp.Run(ctx, chromedp.Evaluate[bool](fmt.Sprintf(js, "!!("+expr+")")))
		cancel()
		if err == nil && ok {
			return
		}
		if err != nil {
			last = err
		}
		if time.Now().After(deadline) {
			p.fatalf("waited %s for %s (last error: %v)", timeout, what, last)
		}
		time.Sleep(50 * time.Millisecond)
	}
}

// waitRunning waits for the progress panel to show the running unit with at
// least three points on its plot. When done reports the unit finished first,
// the test fails but goes on (the verdict can still be checked).
func (p *page) waitRunning(timeout time.Duration, done func() bool) {
	p.t.Helper()
	deadline := time.Now().Add(timeout)
	for {
		ctx, cancel := context.WithTimeout(p.ctx, 2*time.Second)
		ok, err := chromedp.Run(ctx, chromedp.Evaluate[bool](fmt.Sprintf(js,
			`vis('#progress') && document.querySelectorAll('#plot circle.pt').length >= 3`)))
		cancel()
		switch {
		case err == nil && ok:
			return
		case done():
			p.t.Error("the unit ended without the progress panel showing three points on its plot")
			return
		case time.Now().After(deadline):
			p.fatalf("waited %s for the progress panel with three points on the plot", timeout)
		}
		time.Sleep(50 * time.Millisecond)
	}
}

// fatalf fails the test with what the page shows, and saves a screenshot of it.
func (p *page) fatalf(format string, args ...any) {
	p.t.Helper()
	msg := fmt.Sprintf(format, args...)
	ctx, cancel := context.WithTimeout(p.ctx, 5*time.Second)
	defer cancel()
	state, err := chromedp.Run(ctx, chromedp.Evaluate[string](fmt.Sprintf(js, `JSON.stringify({
		url: location.href, verdict: attr('#verdict', 'data-verdict'), word: txt('#verdict-word'),
		reason: txt('#reason'), scanError: txt('#scan-error'), fault: vis('#fault') ? txt('#fault') : '',
		retest: vis('#retest'), step: txt('#step-name'), focus: document.activeElement && document.activeElement.id,
		body: document.body ? document.body.innerText.slice(0, 1500) : ''})`)))
	if err == nil {
		msg += "\npage: " + state
	}
	if png, err := chromedp.Run(ctx, chromedp.FullScreenshot(100)); err == nil {
		f := filepath.Join(p.dir, "failed-"+strings.ReplaceAll(p.t.Name(), "/", "_")+".png")
		if os.WriteFile(f, png, 0o644) == nil {
			msg += "\nscreenshot: " + f
		}
	}
	p.t.Fatal(msg)
}

// shot saves a screenshot of the whole page as name.png in the test's folder
// and, with -update, in testdata/ for the README.
func (p *page) shot(name string) {
	p.t.Helper()
	ctx, cancel := context.WithTimeout(p.ctx, 10*time.Second)
	defer cancel()
	png, err := chromedp.Run(ctx, chromedp.FullScreenshot(100))
	if err != nil {
		p.t.Errorf("screenshot %s: %v", name, err)
		return
	}
	dirs := []string{p.dir}
	if *update {
		dirs = append(dirs, "testdata")
	}
	for _, d := range dirs {
		if err := os.MkdirAll(d, 0o755); err != nil {
			p.t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(d, name+".png"), png, 0o644); err != nil {
			p.t.Fatal(err)
		}
	}
}

// keepShots copies the screenshots of a failed test out of its temporary
// folder, which the test removes, into one that stays, and names it.
func keepShots(t *testing.T, dir string) {
	if !t.Failed() {
		return
	}
	keep, err := os.MkdirTemp("", "trimline-console-shots-")
	if err != nil {
		t.Log(err)
		return
	}
	pngs, _ := filepath.Glob(filepath.Join(dir, "*.png"))
	for _, f := range pngs {
		if data, err := os.ReadFile(f); err == nil {
			os.WriteFile(filepath.Join(keep, filepath.Base(f)), data, 0o644)
		}
	}
	t.Logf("screenshots kept in %s", keep)
}

// checkTargets fails the test for a visible control smaller than 44 × 44 CSS
// px, the enhanced target size of WCAG 2.2 (success criterion 2.5.5), the least
// a gloved finger needs; the last units list's certificate links included.
func (p *page) checkTargets(state string) {
	p.t.Helper()
	small := eval[[]string](p, `[...document.querySelectorAll('button, a, summary, input, textarea, select')]
		.filter(e => e.type !== 'hidden')
		.filter(e => { const r = e.getBoundingClientRect(); return r.width > 0 && r.height > 0 && getComputedStyle(e).visibility !== 'hidden'; })
		.filter(e => { const r = e.getBoundingClientRect(); return r.width < 44 || r.height < 44; })
		.map(e => { const r = e.getBoundingClientRect(); return (e.id ? '#' + e.id : e.tagName.toLowerCase() + (e.className ? '.' + e.className : '')) + ' ' + Math.round(r.width) + '×' + Math.round(r.height); })`)
	for _, s := range small {
		p.t.Errorf("%s: %s px is smaller than a gloved finger's 44 × 44 px", state, s)
	}
}

// open loads the console's page in the tab.
func (p *page) open() {
	p.t.Helper()
	p.do(20*time.Second, "open "+p.base, chromedp.Navigate(p.base+"/"), chromedp.WaitReady(chromedp.CSS("body")))
}

// signIn types id into the sign-in form's badge field, as a badge scanner does
// (its text, then Enter), and waits for the station screen naming the person.
func (p *page) signIn(id, name string) {
	p.t.Helper()
	// The form may be replaced under the typing (the page reloading after a
	// sign-out): then the typing is lost with the old page, and is done again.
	for try := 1; ; try++ {
		p.waitFor(10*time.Second, "the sign-in form", `document.readyState === 'complete' && vis('#signin') && vis('#badge')`)
		ctx, cancel := context.WithTimeout(p.ctx, 10*time.Second)
		err := chromedp.Do(ctx, chromedp.SendKeys(chromedp.ID("badge"), id+"\n"))
		cancel()
		if err == nil {
			break
		}
		if try == 3 {
			p.fatalf("type the badge: %v", err)
		}
		time.Sleep(200 * time.Millisecond)
	}
	p.waitFor(10*time.Second, "the station screen after signing in as "+id,
		fmt.Sprintf(`vis('#scan-form') && txt('#operator').includes(%q)`, name))
}

// scan types serial and Enter into whatever has focus, as a barcode scanner
// does, after checking that the focus is on the scan field.
func (p *page) scan(serial string) {
	p.t.Helper()
	p.waitFor(5*time.Second, "the focus on the scan field (#scan)",
		`document.activeElement && document.activeElement.id === 'scan' && !document.activeElement.disabled`)
	p.do(10*time.Second, "scan "+serial, chromedp.KeyEvent(serial+"\r"))
}

// verdict waits for the verdict panel to show want and returns the certificate
// number it shows ("" when none is shown).
func (p *page) verdict(want string, timeout time.Duration) string {
	p.t.Helper()
	p.waitFor(timeout, "the verdict "+want, fmt.Sprintf(`vis('#verdict') && attr('#verdict', 'data-verdict') === %q`, want))
	// The word the operator reads: the verdict itself; a stopped unit may say so.
	words := map[string][]string{"ABORTED": {"ABORTED", "STOPPED"}}[want]
	if words == nil {
		words = []string{want}
	}
	w := strings.ToUpper(p.text("#verdict-word"))
	if !slices.ContainsFunc(words, func(s string) bool { return strings.Contains(w, s) }) {
		p.t.Errorf("the verdict word reads %q for a %s verdict", w, want)
	}
	if p.visible("#cert-number") {
		return p.text("#cert-number")
	}
	return ""
}

// fetchResult is what the page's own fetch of a link gave.
type fetchResult struct {
	Status int    `json:"status"`
	Type   string `json:"type"`
	Head   string `json:"head"`
	Size   int    `json:"size"`
}

// fetchLink fetches the href of the element sel in the page (with the page's
// session cookie) and returns its status, type, first five bytes and size.
func (p *page) fetchLink(sel string) fetchResult {
	p.t.Helper()
	ctx, cancel := context.WithTimeout(p.ctx, 20*time.Second)
	defer cancel()
	expr := fmt.Sprintf(`(async () => {
		const a = document.querySelector(%q);
		if (!a || !a.href) return {status: 0, type: '', head: '', size: 0};
		const r = await fetch(a.href);
		const b = new Uint8Array(await r.arrayBuffer());
		return {status: r.status, type: r.headers.get('content-type') || '', head: String.fromCharCode(...b.slice(0, 5)), size: b.length};
	})()`, sel)
	v, err := chromedp.Run(ctx, chromedp.Evaluate[fetchResult](expr, chromedp.EvalAwaitPromise))
	if err != nil {
		p.fatalf("fetch %s: %v", sel, err)
	}
	return v
}

// lastRun is the newest run of serial in the ledger, with its record.
func lastRun(t *testing.T, led *ledger.Ledger, serial string) (ledger.RunSummary, *sequencer.Record) {
	t.Helper()
	runs, err := led.Runs(context.Background(), serial)
	if err != nil {
		t.Fatal(err)
	}
	if len(runs) == 0 {
		t.Fatalf("the ledger holds no run of %s", serial)
	}
	rec, err := led.Run(context.Background(), runs[0].RunID)
	if err != nil {
		t.Fatal(err)
	}
	return runs[0], rec
}

// withTimeouts gives every instrument of the station a 1 s per-exchange timeout,
// so an instrument that stops answering is found quickly (the served bench on
// loopback answers in well under a millisecond).
func withTimeouts(station string) string {
	return strings.ReplaceAll(station, "    asset: ", "    timeout: 1 s\n    asset: ")
}

// withNoisyFixture makes every unit noisier (50 µV rms at the card's output
// against 20 µV by default), so that on the default seed BRX-00002's output
// noise lands between the acceptance limit and the tolerance limit of the
// "output noise" limit, and the guarded decision rule holds it for REVIEW
// (ILAC-G8:09/2019 §4.2.2, the conditional pass zone; the demo's limit file maps
// a conditional pass to review).
func withNoisyFixture(station string) string {
	return strings.Replace(station, "      seed: \"8\"", "      seed: \"8\"\n      noise: 50 uV", 1)
}

// TestConsoleShiftInBrowser is one operator's shift on the BRX-200 station with
// its instruments served on loopback TCP (real time: a unit takes seconds): sign
// in, a good unit, a defective one, a bad scan, a retest, a stop, a station fault
// cleared, the counters; then a second station whose fixture holds a unit for
// REVIEW, and the reviewer's decision.
func TestConsoleShiftInBrowser(t *testing.T) {
	bctx := startBrowser(t)
	shotDir := t.TempDir()
	t.Cleanup(func() { keepShots(t, shotDir) })

	d := writeDemo(t, withTimeouts)
	const firstLot, nextLot = "L2026-48A", "L2026-49B"
	srv, hs := startConsole(t, d, console.Options{Bench: "tcp", Lot: firstLot})
	bench := srv.Bench()
	if bench == nil {
		t.Fatal("console.Options{Bench: \"tcp\"}: Bench() is nil")
	}
	led := d.openLedger(t)
	opID, opName := d.person(t, sequencer.RightOperate)
	p := newTab(t, bctx, hs.URL, shotDir)
	runs := func() int {
		t.Helper()
		r, err := led.Runs(context.Background(), "")
		if err != nil {
			t.Fatal(err)
		}
		return len(r)
	}

	if !t.Run("sign in", func(t *testing.T) {
		p.t = t
		p.open()
		if p.visible("#scan-form") {
			t.Fatal("the station screen shows before anyone signed in")
		}
		p.shot("signin")
		p.checkTargets("signin")
		p.signIn(opID, opName)
		// Nothing blocks on the demo station: files released, calibration a year
		// ahead, the key present, the ledger reachable.
		p.waitFor(10*time.Second, "the station status panel", `['files', 'calibration', 'key', 'ledger'].every(k => attr('#status li[data-status="' + k + '"]', 'data-state') !== '')`)
		for _, what := range []string{"files", "calibration", "key", "ledger"} {
			sel := fmt.Sprintf(`#status li[data-status=%q]`, what)
			if st := eval[string](p, fmt.Sprintf("attr(%q, 'data-state')", sel)); st != "ok" {
				t.Errorf("status %s: data-state %q, want ok (%s)", what, st, p.text(sel))
			}
		}
		p.shot("ready")
		p.checkTargets("ready")
	}) {
		t.FailNow()
	}

	var firstCert string
	var firstRun ledger.RunSummary
	t.Run("good unit passes", func(t *testing.T) {
		p.t = t
		before := runs()
		p.scan("BRX-00001")
		p.waitRunning(30*time.Second, func() bool { return runs() > before })
		// More of the sweep for the README's picture.
		p.waitFor(10*time.Second, "six points on the plot", `document.querySelectorAll('#plot circle.pt').length >= 6 || attr('#verdict','data-verdict') !== ''`)
		for _, sel := range []string{"#step-name", "#point-text", "#elapsed", "#expected"} {
			if p.text(sel) == "" {
				t.Errorf("%s is empty while the unit runs", sel)
			}
		}
		p.shot("running")
		p.checkTargets("running")
		firstCert = p.verdict("PASS", 60*time.Second)
		p.shot("pass")
		p.checkTargets("pass")
		if firstCert == "" {
			t.Fatal("a PASS shows no certificate number")
		}
		got := p.fetchLink("a#cert-link")
		if got.Status != 200 || got.Head != "%PDF-" || !strings.Contains(got.Type, "application/pdf") {
			t.Errorf("the certificate link answers %d %q, starting %q; want 200 application/pdf, a PDF", got.Status, got.Type, got.Head)
		}
		var rec *sequencer.Record
		firstRun, rec = lastRun(t, led, "BRX-00001")
		if firstRun.Verdict != sequencer.Pass || firstRun.Certificate != firstCert {
			t.Errorf("the ledger's run of BRX-00001: %s, certificate %q; the page shows PASS, %q", firstRun.Verdict, firstRun.Certificate, firstCert)
		}
		if rec.Operator != opName {
			t.Errorf("the record's operator is %q, want the signed-in %q", rec.Operator, opName)
		}
		if rec.Lot != firstLot || p.text("#lot-now") != firstLot {
			t.Errorf("the record's lot is %q, the screen's %q; want the starting lot %s", rec.Lot, p.text("#lot-now"), firstLot)
		}
		if n := eval[int](p, `document.querySelectorAll('#plot circle.pt').length`); n < 5 {
			t.Errorf("the plot holds %d points after a whole unit", n)
		}
	})

	t.Run("lot changed before the next unit", func(t *testing.T) {
		p.t = t
		before := runs()
		// A unit's serial scanned into the lot field is no lot.
		p.do(10*time.Second, "scan a serial into the lot field", chromedp.SendKeys(chromedp.ID("lot"), "BRX-00005\n"))
		p.waitFor(10*time.Second, "the refusal of a serial as the lot", `vis('#lot-error') && txt('#lot-error').includes('serial')`)
		if got := p.text("#lot-now"); got != firstLot {
			t.Errorf("after a refused lot the screen shows lot %q, want %s", got, firstLot)
		}
		// The refused text is selected: the lot traveller's scan replaces it.
		p.do(10*time.Second, "scan the lot traveller", chromedp.SendKeys(chromedp.ID("lot"), nextLot+"\n"))
		p.waitFor(10*time.Second, "the new lot on screen and the focus back on the scan field",
			fmt.Sprintf(`txt('#lot-now') === %q && !vis('#lot-error') && document.activeElement && document.activeElement.id === 'scan'`, nextLot))
		trail, err := led.AuditTrail(context.Background())
		if err != nil {
			t.Fatal(err)
		}
		found := false
		for _, e := range trail {
			found = found || (e.Actor == opName && strings.Contains(e.Detail, firstLot) && strings.Contains(e.Detail, nextLot))
		}
		if !found {
			t.Errorf("no audit-trail entry by %s records the change from %s to %s", opName, firstLot, nextLot)
		}
		// The lot traveller scanned into the serial field by mistake runs
		// nothing and says where lots go.
		p.scan(nextLot)
		p.waitFor(10*time.Second, "the refusal of a lot id as a serial", `vis('#scan-error') && txt('#scan-error') !== ''`)
		if msg := p.text("#scan-error"); !strings.Contains(msg, "Lot field") {
			t.Errorf("a lot id scanned as a serial says %q; want it to point to the Lot field", msg)
		}
		time.Sleep(300 * time.Millisecond)
		if n := runs(); n != before {
			t.Errorf("the lot changes and a lot scanned as a serial recorded %d run(s)", n-before)
		}
		p.checkTargets("lot")
	})

	t.Run("defective unit fails with the plain reason", func(t *testing.T) {
		p.t = t
		p.scan("BRX-00009")
		cert := p.verdict("FAIL", 60*time.Second)
		p.shot("fail")
		p.checkTargets("fail")
		reason := p.text("#reason")
		// BRX-00009 has a stuck trim-DAC bit: its offset cannot be trimmed (the
		// certificate's value: post_offset = −12384 µV outside −800 … 800 µV).
		// The operator reads the value and the limit in a unit read at a glance.
		// A number and its unit are joined by a no-break space (U+00A0): "mV"
		// never stands alone at the start of a line.
		if !regexp.MustCompile(`^offset after trim is −1\d\.\d\x{00a0}mV, limit ±0\.8\x{00a0}mV`).MatchString(reason) {
			t.Errorf("the reason reads %q; want the offset after trim first, as value and limit (offset after trim is −12.… mV, limit ±0.8 mV, no-break spaces)", reason)
		}
		if !strings.Contains(reason, "limit ≤\u00a01\u00a0mV") {
			t.Errorf("the reason reads %q; want the one-sided limit as \"limit ≤ 1 mV\" held together by no-break spaces", reason)
		}
		for _, jargon := range []string{"w =", "zone", "conditional", "acceptance interval", "tolerance interval"} {
			if strings.Contains(reason, jargon) {
				t.Errorf("the operator's reason uses the metrologist's words %q: %q", jargon, reason)
			}
		}
		if a := p.text("#action"); !strings.Contains(strings.ToLower(a), "rework") {
			t.Errorf("the action reads %q; a failed unit goes to rework", a)
		}
		if eval[bool](p, `document.querySelector('details#statement') ? document.querySelector('details#statement').open : true`) {
			t.Error("the metrologist's statement is not a closed <details id=statement> (one click away)")
		}
		if st := eval[string](p, `(document.querySelector('details#statement') || {}).textContent || ''`); !strings.Contains(st, "tolerance") {
			t.Errorf("the statement does not hold the decision rule's text: %q", st)
		}
		run, rec := lastRun(t, led, "BRX-00009")
		if run.Verdict != sequencer.Fail || cert == "" || run.Certificate != cert {
			t.Errorf("the ledger's run of BRX-00009: %s %q; the page shows FAIL %q", run.Verdict, run.Certificate, cert)
		}
		if rec.Lot != nextLot {
			t.Errorf("BRX-00009, run after the lot was changed to %s, recorded lot %q", nextLot, rec.Lot)
		}
	})

	t.Run("bad scan is refused and nothing recorded", func(t *testing.T) {
		p.t = t
		before, dutLines := runs(), len(bench.Received("dut"))
		p.scan("BRX-0001X")
		p.waitFor(10*time.Second, "the refusal of a bad serial", `vis('#scan-error') && txt('#scan-error') !== ''`)
		msg := p.text("#scan-error")
		if !strings.Contains(msg, "BRX-0001X") && !strings.Contains(strings.ToLower(msg), "serial") {
			t.Errorf("the refusal does not say what was wrong with the scan: %q", msg)
		}
		// A later scan must not carry the bad text with it.
		if v := eval[string](p, `(document.querySelector('#scan') || {}).value || ''`); v != "" {
			t.Errorf("the scan field still holds %q after the refusal", v)
		}
		// A recorded serial scanned, then not retested: nothing either.
		p.scan("BRX-00009")
		p.waitFor(10*time.Second, "the retest question for BRX-00009", `vis('#retest')`)
		p.do(10*time.Second, "answer no", chromedp.Click(chromedp.ID("retest-no")))
		p.waitFor(10*time.Second, "the retest question to close", `!vis('#retest')`)
		time.Sleep(300 * time.Millisecond)
		if n := runs(); n != before {
			t.Errorf("the ledger holds %d runs after a bad scan and a declined retest, had %d", n, before)
		}
		if n := len(bench.Received("dut")); n != dutLines {
			t.Errorf("the fixture received %d commands during a bad scan and a declined retest: %q", n-dutLines, bench.Received("dut")[dutLines:])
		}
	})

	t.Run("rescan asks for a retest and supersedes the certificate", func(t *testing.T) {
		p.t = t
		if firstCert == "" {
			t.Skip("no first certificate")
		}
		p.scan("BRX-00001")
		p.waitFor(10*time.Second, "the retest question for BRX-00001", `vis('#retest')`)
		if e := p.text("#retest-earlier"); !strings.Contains(e, firstCert) {
			t.Errorf("the retest question names %q, not the earlier certificate %s", e, firstCert)
		}
		// BRX-00001 was tested in the first lot; the retest records the next.
		if l := p.text("#retest-lot"); !strings.Contains(l, firstLot) || !strings.Contains(l, nextLot) {
			t.Errorf("the retest question says %q of the lots; want it to name the earlier %s and the lot in force %s", l, firstLot, nextLot)
		}
		p.shot("retest")
		p.checkTargets("retest")
		p.do(10*time.Second, "confirm the retest", chromedp.Click(chromedp.ID("retest-yes")))
		p.waitFor(30*time.Second, "the retest to start", `!vis('#retest') && vis('#progress')`)
		p.waitFor(60*time.Second, "a new certificate", fmt.Sprintf(`attr('#verdict','data-verdict') === 'PASS' && txt('#cert-number') !== '' && txt('#cert-number') !== %q`, firstCert))
		newCert := p.verdict("PASS", 5*time.Second)
		run, rec := lastRun(t, led, "BRX-00001")
		if run.Certificate != newCert || rec.RetestOf != firstRun.RunID {
			t.Errorf("the retest's record: certificate %q, retest_of %q; want %q, %q", run.Certificate, rec.RetestOf, newCert, firstRun.RunID)
		}
		st, err := led.CertificateStatus(context.Background(), firstCert)
		if err != nil {
			t.Fatal(err)
		}
		if !st.Superseded || st.SupersededBy != newCert {
			t.Errorf("%s: superseded %v by %q; want superseded by %s", firstCert, st.Superseded, st.SupersededBy, newCert)
		}
	})

	t.Run("stop ends the unit without a certificate", func(t *testing.T) {
		p.t = t
		p.scan("BRX-00002")
		p.waitFor(10*time.Second, "BRX-00002 to start", `vis('#progress') && vis('#stop')`)
		// Into the unit (the served bench is on real time; a unit takes ~5 s).
		time.Sleep(1500 * time.Millisecond)
		// A reload mid-unit (a browser restarted, a second tab) picks the run up again.
		p.open()
		p.waitFor(10*time.Second, "the running unit after a reload", `vis('#progress') && vis('#stop')`)
		p.do(10*time.Second, "press stop", chromedp.Click(chromedp.ID("stop")))
		if c := p.verdict("ABORTED", 30*time.Second); strings.Contains(c, "TL1-") {
			t.Errorf("a stopped unit shows certificate %q", c)
		}
		if p.visible("a#cert-link") {
			t.Error("a stopped unit shows a certificate link")
		}
		run, _ := lastRun(t, led, "BRX-00002")
		if run.Verdict != sequencer.Aborted || run.Certificate != "" {
			t.Errorf("the ledger's run of BRX-00002: %s, certificate %q; want ABORTED and none", run.Verdict, run.Certificate)
		}
		if on, level := bench.Bench().Source().State(); on || level != 0 {
			t.Errorf("after stop the source is on=%v at %g V; want off at 0 V", on, level)
		}
		if pdfs, _ := filepath.Glob(filepath.Join(d.dir, "certificates", "*BRX-00002*")); len(pdfs) != 0 {
			t.Errorf("a stopped unit left certificate files %q", pdfs)
		}
	})

	t.Run("instrument fault locks the station until cleared", func(t *testing.T) {
		p.t = t
		if err := bench.SetFault("meter", serve.Fault{NoReply: true}); err != nil {
			t.Fatal(err)
		}
		before := runs()
		p.scan("BRX-00003")
		p.verdict("FAULT", 60*time.Second)
		p.waitFor(10*time.Second, "the fault lock", `vis('#fault') && txt('#fault-what') !== ''`)
		what := p.text("#fault-what")
		if !strings.Contains(what, "DMM-0203") && !strings.Contains(strings.ToLower(what), "meter") {
			t.Errorf("the fault does not name the meter (DMM-0203): %q", what)
		}
		if p.text("#fault-check") == "" {
			t.Error("the fault says nothing to check")
		}
		p.shot("fault")
		p.checkTargets("fault")
		if n := runs(); n != before+1 {
			t.Errorf("%d runs recorded by a faulted unit, want 1", n-before)
		}
		// Locked: a scan starts nothing.
		eval[bool](p, `(() => { const s = document.querySelector('#scan'); if (s && !s.disabled) s.focus(); return true; })()`)
		p.do(5*time.Second, "scan while locked", chromedp.KeyEvent("BRX-00004\r"))
		time.Sleep(500 * time.Millisecond)
		if n := runs(); n != before+1 {
			t.Errorf("a scan while the station was locked recorded a run")
		}
		if !p.visible("#fault") {
			t.Error("the fault lock went away without being cleared")
		}
		// The operator fixes the meter and clears the fault with a note.
		if err := bench.SetFault("meter", serve.Fault{}); err != nil {
			t.Fatal(err)
		}
		idn := bench.Count("meter", "*IDN?")
		const note = "meter power cable reseated"
		p.do(10*time.Second, "write the note", chromedp.SendKeys(chromedp.ID("clear-note"), note))
		p.do(10*time.Second, "clear the fault", chromedp.Click(chromedp.ID("clear-go")))
		p.waitFor(10*time.Second, "the lock to lift", `!vis('#fault')`)
		trail, err := led.AuditTrail(context.Background())
		if err != nil {
			t.Fatal(err)
		}
		found := false
		for _, e := range trail {
			if strings.Contains(e.Detail, note) && e.Actor == opName {
				found = true
			}
		}
		if !found {
			t.Errorf("no audit-trail entry by %s holds the note %q", opName, note)
		}
		p.scan("BRX-00003")
		p.verdict("PASS", 60*time.Second)
		if n := bench.Count("meter", "*IDN?"); n <= idn {
			t.Error("the first unit after a fault did not identify the meter again (*IDN?)")
		}
		run, _ := lastRun(t, led, "BRX-00003")
		if run.Verdict != sequencer.Pass {
			t.Errorf("the ledger's newest run of BRX-00003: %s, want PASS", run.Verdict)
		}
	})

	t.Run("counters", func(t *testing.T) {
		p.t = t
		count := func(k string) string { return p.text(fmt.Sprintf(`#counters [data-count=%q]`, k)) }
		// BRX-00001 twice and BRX-00003 passed, BRX-00009 failed, BRX-00003 faulted.
		for k, want := range map[string]string{"passed": "3", "failed": "1", "faults": "1", "review": "0"} {
			if got := count(k); !regexp.MustCompile(`(^|\D)` + want + `(\D|$)`).MatchString(got) {
				t.Errorf("counter %s reads %q, want %s", k, got, want)
			}
		}
		if !strings.Contains(count("fpy"), "%") {
			t.Errorf("first-pass yield reads %q", count("fpy"))
		}
		if count("cycle") == "" || count("units") == "" {
			t.Errorf("units %q, mean cycle time %q", count("units"), count("cycle"))
		}
		if n := eval[int](p, `document.querySelectorAll('#recent tbody tr').length`); n < 5 || n > 20 {
			t.Errorf("the last units list holds %d rows after 6 units", n)
		}
		if !strings.Contains(p.text("#recent"), "BRX-00009") {
			t.Error("the last units list does not show BRX-00009")
		}
		// Units of two lots: each row says its lot.
		rowLot := func(serial string) string {
			return eval[string](p, fmt.Sprintf(`(() => { const tr = [...document.querySelectorAll('#recent tbody tr')].find(r => r.innerText.includes(%q));
				const l = tr && tr.querySelector('.row-lot'); return l ? l.innerText.trim() : ''; })()`, serial))
		}
		if got := rowLot("BRX-00009"); got != "lot "+nextLot {
			t.Errorf("the last units list gives BRX-00009's lot as %q, want \"lot %s\"", got, nextLot)
		}
		if !strings.Contains(p.text("#recent"), "lot "+firstLot) {
			t.Errorf("the last units list does not show the first lot %s of BRX-00001", firstLot)
		}
	})

	// A second station (the simulated clock: units run at once) whose noisier
	// fixture holds BRX-00002 for REVIEW. Served as localhost, not 127.0.0.1, so
	// that its session cookie is not the first console's.
	d2 := writeDemo(t, withNoisyFixture)
	_, hs2 := startConsole(t, d2, console.Options{})
	led2 := d2.openLedger(t)
	rp := newTab(t, bctx, strings.Replace(hs2.URL, "127.0.0.1", "localhost", 1), shotDir)
	opID2, opName2 := d2.person(t, sequencer.RightOperate)
	revID, revName := d2.person(t, sequencer.RightReview)

	t.Run("review accepted", func(t *testing.T) {
		rp.t = t
		opID, opName := opID2, opName2
		rp.open()
		rp.signIn(opID, opName)
		rp.scan("BRX-00002")
		cert := rp.verdict("REVIEW", 60*time.Second)
		if cert == "" {
			t.Fatal("a REVIEW shows no certificate number")
		}
		// Held for review, it is not retested from the scan field: a reviewer
		// decides it.
		before := len(mustRuns(t, led2, "BRX-00002"))
		rp.scan("BRX-00002")
		rp.waitFor(10*time.Second, "the refusal to retest a held unit", `vis('#scan-error')`)
		if e := rp.text("#scan-error"); !strings.Contains(e, "held for review") || !strings.Contains(e, cert) {
			t.Errorf("a rescan of a held unit says %q; want it held for review under %s", e, cert)
		}
		if n := len(mustRuns(t, led2, "BRX-00002")); n != before {
			t.Errorf("a refused rescan recorded a run: %d runs, want %d", n, before)
		}
		row := fmt.Sprintf(`#review tr.review-row[data-cert=%q]`, cert)
		if opName != revName {
			// The operator may not decide: no accept button for them.
			if rp.visible(row + " .review-accept") {
				t.Errorf("%s, without the review right, is offered to accept %s", opName, cert)
			}
			rp.do(10*time.Second, "sign out", chromedp.Click(chromedp.ID("signout")))
			rp.signIn(revID, revName)
		}
		rp.waitFor(10*time.Second, "the review queue row of "+cert, fmt.Sprintf(`vis(%q)`, row))
		// Without a reason nothing is decided, and the page says so under the row.
		rp.do(10*time.Second, "accept without a reason", chromedp.Click(chromedp.CSS(row+" .review-accept")))
		rp.waitFor(10*time.Second, "the refusal under the row", fmt.Sprintf(`vis(%q) && txt(%q).includes('reason')`, row+" .rv-error", row+" .rv-error"))
		const reason = "noise 57 µV re-read on the bench scope: 41 µV, within 60 µV"
		rp.do(10*time.Second, "write the reason", chromedp.SendKeys(chromedp.CSS(row+" .review-reason"), reason))
		// One tap only arms the button: a decision reissues a certificate, so
		// it takes a second, explicit tap on what the button now says.
		rp.do(10*time.Second, "accept (first tap)", chromedp.Click(chromedp.CSS(row+" .review-accept")))
		rp.waitFor(10*time.Second, "the accept button to ask for confirmation",
			fmt.Sprintf(`vis(%q) && document.querySelector(%q).textContent.startsWith('Confirm accept')`, row+" .review-accept.armed", row+" .review-accept"))
		if st, err := led2.CertificateStatus(context.Background(), cert); err != nil || st.Superseded {
			t.Fatalf("%s after one tap on accept: superseded %v (%v); one tap must not decide", cert, st.Superseded, err)
		}
		rp.shot("review")
		rp.checkTargets("review")
		rp.do(10*time.Second, "accept (confirm)", chromedp.Click(chromedp.CSS(row+" .review-accept")))
		rp.waitFor(20*time.Second, "the row to leave the queue", fmt.Sprintf(`!vis(%q)`, row))
		st, err := led2.CertificateStatus(context.Background(), cert)
		if err != nil {
			t.Fatal(err)
		}
		if !st.Superseded || st.SupersededBy == "" {
			t.Fatalf("%s after acceptance: superseded %v; want superseded by the reissued certificate", cert, st.Superseded)
		}
		rec, _, err := led2.RunByCertificate(context.Background(), st.SupersededBy)
		if err != nil {
			t.Fatal(err)
		}
		if rec.Verdict != sequencer.Pass || rec.Disposition == nil || rec.Disposition.Decision != sequencer.DecisionAccept ||
			rec.Disposition.Reviewer != revName || rec.Disposition.Reason != reason {
			t.Errorf("the reissued certificate %s: verdict %s, disposition %+v; want PASS accepted by %s for %q",
				st.SupersededBy, rec.Verdict, rec.Disposition, revName, reason)
		}
	})

	t.Run("attempts used up", func(t *testing.T) {
		// The demo sequence allows a unit three measured runs (retest:
		// {max_attempts: 3}); BRX-00009's stuck DAC bit fails it every time.
		rp.t = t
		rp.open()
		rp.waitFor(10*time.Second, "the station screen", `vis('#scan-form')`)
		rp.scan("BRX-00009")
		rp.verdict("FAIL", 30*time.Second)
		for attempt := 2; attempt <= 3; attempt++ {
			before := len(mustRuns(t, led2, "BRX-00009"))
			rp.scan("BRX-00009")
			rp.waitFor(10*time.Second, "the retest question", `vis('#retest')`)
			rp.do(10*time.Second, "confirm the retest", chromedp.Click(chromedp.ID("retest-yes")))
			rp.waitFor(30*time.Second, fmt.Sprintf("attempt %d to be recorded", attempt),
				fmt.Sprintf(`attr('#verdict','data-verdict') === 'FAIL' && (document.querySelector('#recent tbody') || {innerText: ''}).innerText.split('BRX-00009').length > %d`, attempt))
			if n := len(mustRuns(t, led2, "BRX-00009")); n != before+1 {
				t.Fatalf("attempt %d: %d runs of BRX-00009, want %d", attempt, n, before+1)
			}
		}
		// Clearly outside its limits, BRX-00009 is sent to rework after each run
		// (sequencer.ForOperator); the operator who retests it anyway is stopped
		// after the third.
		if a := rp.text("#action"); !strings.Contains(strings.ToLower(a), "rework") {
			t.Errorf("after the third failed run the action reads %q; want rework", a)
		}
		before := len(mustRuns(t, led2, "BRX-00009"))
		rp.scan("BRX-00009")
		rp.waitFor(10*time.Second, "the refusal of a fourth attempt", `vis('#scan-error') || vis('#retest')`)
		if rp.visible("#retest") {
			// Asking is allowed; confirming must still be refused.
			rp.do(10*time.Second, "confirm the retest", chromedp.Click(chromedp.ID("retest-yes")))
			rp.waitFor(10*time.Second, "the refusal of a fourth attempt", `vis('#scan-error')`)
		}
		if e := rp.text("#scan-error"); !strings.Contains(strings.ToLower(e), "rework") {
			t.Errorf("a fourth attempt is refused with %q; want it sent to rework", e)
		}
		time.Sleep(300 * time.Millisecond)
		if n := len(mustRuns(t, led2, "BRX-00009")); n != before {
			t.Errorf("a fourth attempt recorded a run")
		}
	})
}

// TestConsoleCalibrationStatus: the station status panel warns 14 days before
// an instrument's calibration falls due and blocks after it has (the design's
// rule), and a blocked station starts no unit while a warned one works on.
func TestConsoleCalibrationStatus(t *testing.T) {
	bctx := startBrowser(t)
	shotDir := t.TempDir()
	t.Cleanup(func() { keepShots(t, shotDir) })
	// dues sets the instruments' cal_due dates in the order the station file
	// lists them (source STD-0117, meter DMM-0203), in days from today.
	dues := func(days ...int) func(string) string {
		return func(station string) string {
			n := 0
			return calDueLine.ReplaceAllStringFunc(station, func(line string) string {
				due := time.Now().AddDate(0, 0, days[n])
				n++
				return calDueLine.ReplaceAllString(line, "${1}"+due.Format("2006-01-02"))
			})
		}
	}
	for _, c := range []struct {
		name  string
		edit  func(string) string
		state string // the calibration item's data-state
		runs  bool   // whether a scanned unit runs
	}{
		{"due in 10 days", dues(400, 10), "warn", true},
		{"expired yesterday", dues(-1, 10), "block", false},
	} {
		t.Run(c.name, func(t *testing.T) {
			d := writeDemo(t, c.edit)
			_, hs := startConsole(t, d, console.Options{})
			p := newTab(t, bctx, hs.URL, shotDir)
			id, name := d.person(t, sequencer.RightOperate)
			p.open()
			p.signIn(id, name)
			cal := `#status li[data-status="calibration"]`
			p.waitFor(10*time.Second, "the calibration status", fmt.Sprintf(`attr(%q, 'data-state') !== ''`, cal))
			if st := eval[string](p, fmt.Sprintf("attr(%q, 'data-state')", cal)); st != c.state {
				t.Errorf("calibration status %q, want %s (%s)", st, c.state, p.text(cal))
			}
			want := "DMM-0203"
			if c.state == "block" {
				want = "STD-0117"
			}
			// On the status item itself, not in a tooltip: a gloved operator has
			// no mouse to hover with.
			if !strings.Contains(p.text(cal), want) {
				t.Errorf("the calibration status does not name %s, whose calibration is the matter: %q", want, p.text(cal))
			}
			eval[bool](p, `(() => { const s = document.querySelector('#scan'); if (s && !s.disabled) s.focus(); return true; })()`)
			p.do(5*time.Second, "scan", chromedp.KeyEvent("BRX-00001\r"))
			if c.runs {
				p.verdict("PASS", 30*time.Second)
			} else {
				time.Sleep(time.Second)
				if runs := mustRuns(t, d.openLedger(t), ""); len(runs) != 0 {
					t.Errorf("a station whose calibration expired ran %d unit(s)", len(runs))
				}
			}
		})
	}
}

func mustRuns(t *testing.T, led *ledger.Ledger, serial string) []ledger.RunSummary {
	t.Helper()
	runs, err := led.Runs(context.Background(), serial)
	if err != nil {
		t.Fatal(err)
	}
	return runs
}

// TestScreenshotsAreCurrent keeps the README's screenshots in step with the list
// the browser test writes: each one exists under testdata/, is a PNG, and the
// README shows it.
func TestScreenshotsAreCurrent(t *testing.T) {
	readme, err := os.ReadFile(filepath.Join("..", "..", "..", "README.md"))
	if err != nil {
		t.Fatal(err)
	}
	for _, name := range screenshots {
		if ref := "(cmd/trimline/console/testdata/" + name + ".png)"; !strings.Contains(string(readme), ref) {
			t.Errorf("README.md does not show %s", ref)
		}
		data, err := os.ReadFile(filepath.Join("testdata", name+".png"))
		if errors.Is(err, os.ErrNotExist) {
			t.Errorf("testdata/%s.png is missing: go test ./cmd/trimline/console -run TestConsoleShiftInBrowser -update", name)
			continue
		}
		if err != nil {
			t.Fatal(err)
		}
		if !strings.HasPrefix(string(data), "\x89PNG\r\n\x1a\n") {
			t.Errorf("testdata/%s.png is not a PNG", name)
		}
	}
}
