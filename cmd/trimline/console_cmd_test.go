package main

import (
	"bytes"
	"context"
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/rand"
	"crypto/x509"
	"crypto/x509/pkix"
	"encoding/json"
	"encoding/pem"
	"io"
	"math/big"
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

	"trimline/cmd/trimline/console"
	"trimline/reports/ledger"
	"trimline/sequencer"
)

// TestConsoleAndRunGiveTheSameRecord runs BRX-00002 once through `trimline
// run` and once scanned at the console, each on its own copy of the released
// demo (same seed, same files): the two records are the same but for the run's
// own id and times.
func TestConsoleAndRunGiveTheSameRecord(t *testing.T) {
	ctx := context.Background()
	const operator = "Ada Quillfeather"

	cliDir := t.TempDir()
	station, sequence := writeReleasedDemo(t, cliDir, 8)
	var out bytes.Buffer
	if code := run(ctx, []string{"run", "--station", station, "--sequence", sequence, "--serial", "BRX-00002", "--out", cliDir, "--operator", operator}, &out, &out); code != exitPass {
		t.Fatalf("trimline run: exit %d\n%s", code, out.String())
	}
	cliRec := onlyRecord(t, cliDir, "BRX-00002")

	conDir := t.TempDir()
	station, sequence = writeReleasedDemo(t, conDir, 8)
	srv, err := console.New(ctx, console.Options{StationPath: station, SequencePath: sequence, Out: conDir, Software: "trimline " + version()})
	if err != nil {
		t.Fatal(err)
	}
	defer srv.Close()
	ts := httptest.NewServer(srv.Handler())
	defer ts.Close()
	jar, _ := cookiejar.New(nil)
	c := &http.Client{Jar: jar}
	var csrf string
	// load reads the page's CSRF token (a sign-in starts a new session).
	load := func() {
		t.Helper()
		res, err := c.Get(ts.URL + "/")
		if err != nil {
			t.Fatal(err)
		}
		page, _ := io.ReadAll(res.Body)
		res.Body.Close()
		m := regexp.MustCompile(`<meta name="csrf" content="([^"]+)">`).FindSubmatch(page)
		if m == nil {
			t.Fatal("no CSRF token on the console's page")
		}
		csrf = string(m[1])
	}
	load()
	post := func(path string, form url.Values) {
		t.Helper()
		req, _ := http.NewRequest("POST", ts.URL+path, strings.NewReader(form.Encode()))
		req.Header.Set("Content-Type", "application/x-www-form-urlencoded")
		req.Header.Set("Accept", "application/json")
		req.Header.Set("Origin", ts.URL)
		req.Header.Set("X-CSRF-Token", csrf)
		res, err := c.Do(req)
		if err != nil {
			t.Fatal(err)
		}
		b, _ := io.ReadAll(res.Body)
		res.Body.Close()
		if res.StatusCode != http.StatusOK {
			t.Fatalf("POST %s: %s %s", path, res.Status, b)
		}
	}
	post("/signin", url.Values{"badge": {"B-1042"}})
	load()
	post("/scan", url.Values{"serial": {"BRX-00002"}})
	for end := time.Now().Add(30 * time.Second); ; {
		res, err := c.Get(ts.URL + "/state")
		if err != nil {
			t.Fatal(err)
		}
		var s struct{ Phase string }
		json.NewDecoder(res.Body).Decode(&s)
		res.Body.Close()
		if s.Phase != "running" {
			break
		}
		if time.Now().After(end) {
			t.Fatal("the console's unit did not finish")
		}
		time.Sleep(20 * time.Millisecond)
	}
	conRec := onlyRecord(t, conDir, "BRX-00002")

	same := func(r *sequencer.Record) string {
		r.RunID, r.Started, r.Finished = "", time.Time{}, time.Time{}
		b, err := ledger.Canonical(r)
		if err != nil {
			t.Fatal(err)
		}
		// The simulated bench's clock starts at the wall clock: every time
		// stamp of a run is its own.
		return stamp.ReplaceAllString(string(b), "T")
	}
	a, b := strings.Split(same(cliRec), ","), strings.Split(same(conRec), ",")
	if len(a) != len(b) {
		t.Fatalf("the console's record has %d fields, run's %d", len(b), len(a))
	}
	n := 0
	for i := range a {
		if a[i] != b[i] && n < 10 {
			n++
			t.Errorf("the console's record differs from run's: %s, not %s", b[i], a[i])
		}
	}
}

var stamp = regexp.MustCompile(`"\d{4}-\d\d-\d\dT[0-9:.]+Z"`)

// onlyRecord is the one stored run of serial in dir's ledger.
func onlyRecord(t *testing.T, dir, serial string) *sequencer.Record {
	t.Helper()
	led, err := ledger.Open(context.Background(), filepath.Join(dir, "ledger.db"))
	if err != nil {
		t.Fatal(err)
	}
	defer led.Close()
	runs, err := led.Runs(context.Background(), serial)
	if err != nil || len(runs) != 1 {
		t.Fatalf("%s: %d runs of %s, %v", dir, len(runs), serial, err)
	}
	rec, err := led.Run(context.Background(), runs[0].RunID)
	if err != nil {
		t.Fatal(err)
	}
	return rec
}

// TestConsoleBeyondLoopbackWithoutPassphrases: a console on another address
// serves HTTPS only, and with nobody able to sign in by passphrase it does not
// start (exit 2 both).
func TestConsoleBeyondLoopbackWithoutPassphrases(t *testing.T) {
	dir := t.TempDir()
	station, sequence := writeReleasedDemo(t, dir, 8)
	var out bytes.Buffer
	code := run(context.Background(), []string{"console", "--station", station, "--sequence", sequence, "--out", dir, "--listen", "0.0.0.0:0"}, &out, &out)
	if code != exitUsage || !strings.Contains(out.String(), "--tls-cert") {
		t.Fatalf("without TLS: exit %d, want %d with a word on --tls-cert:\n%s", code, exitUsage, out.String())
	}
	cert, key := selfSignedCert(t, dir)
	out.Reset()
	code = run(context.Background(), []string{"console", "--station", station, "--sequence", sequence, "--out", dir, "--listen", "0.0.0.0:0",
		"--tls-cert", cert, "--tls-key", key}, &out, &out)
	if code != exitUsage || !strings.Contains(out.String(), "passphrase") {
		t.Fatalf("with TLS: exit %d, want %d with a word on passphrases:\n%s", code, exitUsage, out.String())
	}
}

// selfSignedCert writes a self-signed certificate for localhost and its key
// (PEM) into dir.
func selfSignedCert(t *testing.T, dir string) (certFile, keyFile string) {
	t.Helper()
	k, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	tmpl := &x509.Certificate{SerialNumber: big.NewInt(1), Subject: pkix.Name{CommonName: "localhost"}, DNSNames: []string{"localhost"},
		NotBefore: time.Now().Add(-time.Hour), NotAfter: time.Now().Add(time.Hour)}
	der, err := x509.CreateCertificate(rand.Reader, tmpl, tmpl, &k.PublicKey, k)
	if err != nil {
		t.Fatal(err)
	}
	kd, err := x509.MarshalECPrivateKey(k)
	if err != nil {
		t.Fatal(err)
	}
	certFile, keyFile = filepath.Join(dir, "console.crt"), filepath.Join(dir, "console.key")
	if err := os.WriteFile(certFile, pem.EncodeToMemory(&pem.Block{Type: "CERTIFICATE", Bytes: der}), 0o644); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(keyFile, pem.EncodeToMemory(&pem.Block{Type: "EC PRIVATE KEY", Bytes: kd}), 0o600); err != nil {
		t.Fatal(err)
	}
	return certFile, keyFile
}
