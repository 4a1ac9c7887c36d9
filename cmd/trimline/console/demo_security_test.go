package console_test

import (
	"context"
	"io/fs"
	"net/http/httptest"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"trimline/cmd/trimline/console"
	"trimline/reports/ledger"
	"trimline/reports/release"
	"trimline/reports/signing"
	"trimline/sequencer"
	"trimline/sequences"
)

// demoFiles is a released copy of the BRX-200 demo station in a test's folder,
// as `trimline demo` leaves it: station, sequence and limit files, the station's
// signing key, the demo quality engineer's release of the sequence and limit
// files in dir/ledger.db, and keys/trust.yaml trusting both keys.
type demoFiles struct {
	dir, station, sequence string
}

var (
	calDueLine  = regexp.MustCompile(`(?m)^(\s*cal_due:\s*)\d{4}-\d{2}-\d{2}`)
	calDateLine = regexp.MustCompile(`(?m)^(\s*date:\s*)\d{4}-\d{2}-\d{2}`)
	seedLine    = regexp.MustCompile(`(?m)^(\s*seed:\s*)"\d+"`)
)

// writeDemo writes the BRX-200 demo's files into a new temporary folder the way
// cmd/trimline's writeProductFiles and releaseProduct do (calibration due a year
// from now, calibrated two months ago, seed 8, keys made, files released), so the
// console starts on a station whose status panel has nothing to block. edit, if
// not nil, changes the station file's text before it is written (a test's own
// fixture settings or people).
func writeDemo(t *testing.T, edit func(station string) string) demoFiles {
	t.Helper()
	ctx := context.Background()
	p, err := sequences.Find(sequences.Default)
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	now := time.Now()
	for _, name := range []string{p.Station, p.Sequence, p.Limits} {
		data, err := fs.ReadFile(sequences.Demo, name)
		if err != nil {
			t.Fatal(err)
		}
		if name == p.Station {
			data = calDueLine.ReplaceAll(data, []byte("${1}"+now.AddDate(1, 0, 0).Format("2006-01-02")))
			data = calDateLine.ReplaceAll(data, []byte("${1}"+now.AddDate(0, -2, 0).Format("2006-01-02")))
			data = seedLine.ReplaceAll(data, []byte(`${1}"`+strconv.Itoa(8)+`"`))
			if edit != nil {
				data = []byte(edit(string(data)))
			}
		}
		if err := os.WriteFile(filepath.Join(dir, name), data, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	d := demoFiles{dir: dir, station: filepath.Join(dir, p.Station), sequence: filepath.Join(dir, p.Sequence)}
	st, err := sequencer.LoadStation(d.station)
	if err != nil {
		t.Fatal(err)
	}
	if _, _, err := signing.Init(filepath.Join(dir, "keys"), st.ID); err != nil {
		t.Fatal(err)
	}
	if _, _, err := signing.Init(filepath.Join(dir, "keys", "approvers"), "demo-qe"); err != nil {
		t.Fatal(err)
	}
	trustText := "trust:\n  stations:\n    - {id: " + st.ID + ", public_key: " + st.ID + ".pub}\n" +
		"  approvers:\n    - {name: Demo Quality Engineer, public_key: approvers/demo-qe.pub, may: [release, void]}\n"
	if err := os.WriteFile(filepath.Join(dir, "keys", "trust.yaml"), []byte(trustText), 0o600); err != nil {
		t.Fatal(err)
	}
	trust, err := release.Approvers(filepath.Join(dir, "keys", "trust.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	key, err := signing.Load(filepath.Join(dir, "keys", "approvers", "demo-qe.key"))
	if err != nil {
		t.Fatal(err)
	}
	seq, err := sequencer.LoadSequence(d.sequence)
	if err != nil {
		t.Fatal(err)
	}
	led, err := ledger.Open(ctx, filepath.Join(dir, "ledger.db"))
	if err != nil {
		t.Fatal(err)
	}
	defer led.Close()
	for _, f := range []string{p.Sequence, p.Limits} {
		data, err := os.ReadFile(filepath.Join(dir, f))
		if err != nil {
			t.Fatal(err)
		}
		req := release.Request{Key: key, Trust: trust, Decision: release.Approve,
			Ranges: sequencer.PhysicalRanges(seq), Catalog: seq.Catalog()}
		if _, err := release.Record(ctx, led, f, sequencer.FileKind(data), data, req); err != nil {
			t.Fatalf("release %s: %v", f, err)
		}
	}
	return d
}

// openLedger opens the demo folder's ledger beside the console's own handle
// (SQLite in WAL mode: a second reader sees what the console committed).
func (d demoFiles) openLedger(t *testing.T) *ledger.Ledger {
	t.Helper()
	led, err := ledger.Open(context.Background(), filepath.Join(d.dir, "ledger.db"))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { led.Close() })
	return led
}

// person returns the id (badge, else name) and name of the first of the
// station's people who holds right; the test fails when nobody does (the demo
// station lists an operator and a reviewer).
func (d demoFiles) person(t *testing.T, right string) (id, name string) {
	t.Helper()
	st, err := sequencer.LoadStation(d.station)
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range st.People {
		for _, r := range p.May {
			if r == right {
				if p.Badge != "" {
					return p.Badge, p.Name
				}
				return p.Name, p.Name
			}
		}
	}
	if len(st.People) == 0 && right == sequencer.RightOperate {
		// A station that lists nobody lets anyone on the station PC run units
		// under the name they give (as trimline run --operator does).
		return "Test Operator", "Test Operator"
	}
	t.Fatalf("%s lists nobody with the %s right (people:)", d.station, right)
	return "", ""
}

// startConsole starts a console on d with opt's other fields and serves it with
// httptest on 127.0.0.1. Both close when the test ends.
func startConsole(t *testing.T, d demoFiles, opt console.Options) (*console.Server, *httptest.Server) {
	t.Helper()
	opt.StationPath, opt.SequencePath = d.station, d.sequence
	if opt.Out == "" {
		opt.Out = d.dir
	}
	if opt.Listen == "" {
		opt.Listen = "127.0.0.1:0"
	}
	log := &syncWriter{}
	if opt.Log == nil {
		opt.Log = log
	}
	srv, err := console.New(context.Background(), opt)
	if err != nil {
		t.Fatalf("console.New: %v", err)
	}
	hs := httptest.NewServer(srv.Handler())
	t.Cleanup(func() {
		hs.Close()
		if err := srv.Close(); err != nil {
			t.Errorf("console Close: %v", err)
		}
		if t.Failed() {
			t.Logf("console log:\n%s", log.String())
		}
	})
	return srv, hs
}

// syncWriter is a strings.Builder the console's log may write from several
// goroutines.
type syncWriter struct {
	mu sync.Mutex
	b  strings.Builder
}

func (w *syncWriter) String() string {
	w.mu.Lock()
	defer w.mu.Unlock()
	return w.b.String()
}

func (w *syncWriter) Write(p []byte) (int, error) {
	w.mu.Lock()
	defer w.mu.Unlock()
	return w.b.Write(p)
}
