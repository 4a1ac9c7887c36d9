package issuing_test

import (
	"context"
	"os"
	"os/exec"
	"path/filepath"
	"testing"
	"time"

	"trimline/reports/issuing"
	"trimline/reports/ledger"
	"trimline/reports/signing"
	"trimline/sequencer"
)

// twoStations is a ledger shared by the demo station TL1 and a station TL2 with its
// own prefix and key, and a record of each station's unit, not yet stored.
type twoStations struct {
	led        *ledger.Ledger
	tl1        *issuing.Issuer
	key2       *signing.Key
	rec1, rec2 *sequencer.Record
	certDir    string
}

func newTwoStations(t *testing.T) *twoStations {
	t.Helper()
	dir := t.TempDir()
	st, seq := demoFiles(t, dir)
	eng, err := sequencer.Open(context.Background(), sequencer.Config{Station: st, Sequence: seq, Operator: "test", Software: "test"})
	if err != nil {
		t.Fatal(err)
	}
	defer eng.Close()
	rec1 := eng.Run(context.Background(), "BRX-00001")
	rec2 := eng.Run(context.Background(), "BRX-00002")
	rec2.Station, rec2.RunID = "TL2", rec2.RunID+"-tl2"
	key1, err := signing.Load(st.SigningKey)
	if err != nil {
		t.Fatal(err)
	}
	if _, _, err := signing.Init(filepath.Join(dir, "keys"), "TL2"); err != nil {
		t.Fatal(err)
	}
	key2, err := signing.Load(filepath.Join(dir, "keys", "TL2.key"))
	if err != nil {
		t.Fatal(err)
	}
	certDir := filepath.Join(dir, "certificates")
	os.MkdirAll(certDir, 0o755)
	led, err := ledger.Open(context.Background(), filepath.Join(dir, "ledger.db"))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { led.Close() })
	return &twoStations{led: led, key2: key2, rec1: rec1, rec2: rec2, certDir: certDir,
		tl1: &issuing.Issuer{Ledger: led, Key: key1, Station: st, Sequence: seq, CertDir: certDir}}
}

// commit stores rec as a station in the middle of Record does: the run committed
// with its signature, its lease held by (host, pid), no document yet. It returns
// the certificate number.
func (ts *twoStations) commit(t *testing.T, rec *sequencer.Record, prefix string, key *signing.Key, pid int) string {
	t.Helper()
	host, _ := os.Hostname()
	le := ledger.Lease{RunID: rec.RunID, Host: host, PID: pid, Started: time.Now(), Expires: time.Now().Add(time.Minute)}
	if ok, err := ts.led.ClaimLease(context.Background(), le, nil); err != nil || !ok {
		t.Fatalf("lease: %v %v", ok, err)
	}
	cert, err := ts.led.RecordRunWith(context.Background(), rec, ledger.RecordOptions{Prefix: prefix,
		Sign: func(number, runID, sha string) (string, []byte, error) {
			return key.ID(), key.Sign(signing.RecordMessage(number, runID, sha)), nil
		}})
	if err != nil || cert == "" {
		t.Fatalf("record: %q %v", cert, err)
	}
	return cert
}

// goneProcess is the id of a process of this host that has exited.
func goneProcess(t *testing.T) int {
	t.Helper()
	cmd := exec.Command(os.Args[0], "-test.run=^$")
	if err := cmd.Run(); err != nil {
		t.Fatal(err)
	}
	return cmd.Process.Pid
}

// Repair at start-up leaves alone what other processes are publishing, of this
// station or of another sharing the ledger, and another station's runs even when
// abandoned; it publishes this station's runs whose holder is gone.
func TestRepairOnlyThisStationsAbandonedRuns(t *testing.T) {
	ctx := context.Background()
	ts := newTwoStations(t)
	live := os.Getpid()
	cert2 := ts.commit(t, ts.rec2, "TL2", ts.key2, live)
	cert1 := ts.commit(t, ts.rec1, "TL1", ts.tl1.Key, live)
	n, err := ts.tl1.Repair(ctx)
	if err != nil || n != 0 {
		t.Fatalf("repair while both runs are held: published %d, %v", n, err)
	}
	for _, c := range []string{cert1, cert2} {
		if docs, _ := ts.led.DocumentsFor(ctx, c); len(docs) != 0 {
			t.Errorf("%s published by another process's repair while its holder works", c)
		}
	}

	// Both holders die: TL1's run is TL1's to repair, TL2's is left to TL2.
	gone := goneProcess(t)
	host, _ := os.Hostname()
	for _, rec := range []*sequencer.Record{ts.rec1, ts.rec2} {
		ts.led.ReleaseLease(ctx, ledger.Lease{RunID: rec.RunID, Host: host, PID: live})
		ts.led.ClaimLease(ctx, ledger.Lease{RunID: rec.RunID, Host: host, PID: gone, Started: time.Now(), Expires: time.Now().Add(time.Minute)}, nil)
	}
	if n, err := ts.tl1.Repair(ctx); err != nil || n != 1 {
		t.Fatalf("repair after the holders died: published %d, %v; want 1", n, err)
	}
	if docs, _ := ts.led.DocumentsFor(ctx, cert1); len(docs) != 1 {
		t.Errorf("%s: %d documents after repair, want 1", cert1, len(docs))
	}
	if docs, _ := ts.led.DocumentsFor(ctx, cert2); len(docs) != 0 {
		t.Errorf("TL1 published TL2's %s", cert2)
	}
	if n, err := ts.tl1.Repair(ctx); err != nil || n != 0 {
		t.Errorf("second repair: published %d, %v; want 0", n, err)
	}
}

// The temporary files a killed process left while writing a certificate or its
// seal are removed at start: only this station's, only those no live process is
// writing; anything else in the folder stays.
func TestRemoveStaleTemps(t *testing.T) {
	ctx := context.Background()
	ts := newTwoStations(t)
	abandoned := ts.commit(t, ts.rec1, "TL1", ts.tl1.Key, goneProcess(t))
	other := ts.commit(t, ts.rec2, "TL2", ts.key2, goneProcess(t))
	rec3 := *ts.rec1
	rec3.RunID, rec3.Serial = rec3.RunID+"-3", "BRX-00003"
	held := ts.commit(t, &rec3, "TL1", ts.tl1.Key, os.Getpid())
	files := map[string]bool{ // name -> removed
		"." + abandoned + "_BRX-00001.pdf.tmp-123":      true,
		"." + abandoned + "_BRX-00001.pdf.seal.tmp-456": true,
		"." + held + "_BRX-00003.pdf.tmp-789":           false,
		"." + other + "_BRX-00002.pdf.tmp-321":          false,
		".TL1-999999_BRX-00009.pdf.tmp-1":               false, // no such certificate
		abandoned + "_BRX-00001.pdf":                    false,
		"notes.txt.tmp-1":                               false,
	}
	for name := range files {
		if err := os.WriteFile(filepath.Join(ts.certDir, name), []byte("part"), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	n, err := ts.tl1.RemoveStaleTemps(ctx)
	if err != nil || n != 2 {
		t.Errorf("removed %d, %v; want 2", n, err)
	}
	for name, removed := range files {
		_, err := os.Stat(filepath.Join(ts.certDir, name))
		if removed != os.IsNotExist(err) {
			t.Errorf("%s: removed %v, want %v", name, os.IsNotExist(err), removed)
		}
	}
}
