package ledger_test

import (
	"errors"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strconv"
	"sync"
	"testing"
	"time"

	"trimline/reports/ledger"
	"trimline/sequencer"
)

// Environment of a child process of TestConcurrentProcesses.
const (
	envChildPath   = "TRIMLINE_LEDGER_TEST_CHILD_PATH"
	envChildWorker = "TRIMLINE_LEDGER_TEST_CHILD_WORKER"
)

const (
	procs       = 4
	runsPerProc = 25
)

var concurrencyShape = recordShape{sweeps: 2, points: 5, readings: 4}

// TestConcurrentProcesses runs 4 processes (this test binary again) that each open
// the same, not yet existing, ledger file at the same moment and record 25 runs.
// The ledger must end with all 100 runs and certificate numbers 1..100, no gaps and
// no duplicates.
func TestConcurrentProcesses(t *testing.T) {
	if path := os.Getenv(envChildPath); path != "" {
		childRecordRuns(t, path, os.Getenv(envChildWorker))
		return
	}
	if testing.Short() {
		t.Skip("spawns processes")
	}
	path := filepath.Join(t.TempDir(), "ledger.db")
	runChildren(t, procs, "TestConcurrentProcesses", envChildPath, path)
	if t.Failed() {
		return
	}
	checkCertificates(t, path, procs*runsPerProc, procs*runsPerProc*totalReadings(makeRecord("x", "x", sequencer.Pass, concurrencyShape)))
}

// runChildren runs n processes of this test binary that run only test, with
// envPath set to path and envChildWorker to their number, and waits for them. It
// lets them all go at once, through the gate file path+".go", so that they also
// race to create and migrate the file; a child that fails fails t with its output.
func runChildren(t *testing.T, n int, test, envPath, path string) {
	t.Helper()
	type child struct {
		cmd *exec.Cmd
		out *syncBuffer
	}
	var children []child
	for w := range n {
		cmd := exec.Command(os.Args[0], "-test.run=^"+test+"$", "-test.count=1", "-test.v")
		cmd.Env = append(os.Environ(), envPath+"="+path, envChildWorker+"="+strconv.Itoa(w))
		out := &syncBuffer{}
		cmd.Stdout, cmd.Stderr = out, out
		if err := cmd.Start(); err != nil {
			t.Fatal(err)
		}
		children = append(children, child{cmd, out})
	}
	time.Sleep(200 * time.Millisecond)
	if err := os.WriteFile(path+".go", nil, 0o644); err != nil {
		t.Fatal(err)
	}
	for w, c := range children {
		if err := c.cmd.Wait(); err != nil {
			t.Errorf("child %d: %v\n%s", w, err, c.out.String())
		}
	}
}

func childRecordRuns(t *testing.T, path, worker string) {
	deadline := time.Now().Add(30 * time.Second)
	for {
		if _, err := os.Stat(path + ".go"); err == nil {
			break
		}
		if time.Now().After(deadline) {
			t.Fatal("the parent never opened the gate")
		}
		time.Sleep(5 * time.Millisecond)
	}
	l, err := ledger.Open(ctx, path)
	if err != nil {
		t.Fatalf("worker %s: open: %v", worker, err)
	}
	defer l.Close()
	for i := range runsPerProc {
		verdict := sequencer.Pass
		if i%3 == 0 {
			verdict = sequencer.Fail
		}
		rec := makeRecord(fmt.Sprintf("w%s-%02d", worker, i), fmt.Sprintf("SN-%s-%02d", worker, i%5), verdict, concurrencyShape)
		if _, err := l.RecordRun(ctx, rec, "TL1"); err != nil {
			t.Fatalf("worker %s run %d: %v", worker, i, err)
		}
	}
}

// TestConcurrentGoroutines records from 8 goroutines at once, half through one
// shared Ledger and half through a second Ledger on the same file.
func TestConcurrentGoroutines(t *testing.T) {
	l1, path := openLedger(t)
	l2, err := ledger.Open(ctx, path)
	if err != nil {
		t.Fatal(err)
	}
	defer l2.Close()
	const goroutines, each = 8, 10
	var wg sync.WaitGroup
	errs := make(chan error, goroutines*each)
	for g := range goroutines {
		l := l1
		if g%2 == 1 {
			l = l2
		}
		wg.Go(func() {
			for i := range each {
				rec := makeRecord(fmt.Sprintf("g%d-%02d", g, i), fmt.Sprintf("SN%d", i), sequencer.Pass, concurrencyShape)
				cert, err := l.RecordRun(ctx, rec, "TL1")
				if err == nil && cert == "" {
					err = errors.New("no certificate")
				}
				if err != nil {
					errs <- fmt.Errorf("goroutine %d run %d: %w", g, i, err)
					return
				}
				if _, err := l.Runs(ctx, rec.Serial); err != nil { // readers alongside writers
					errs <- err
					return
				}
			}
		})
	}
	wg.Wait()
	close(errs)
	for err := range errs {
		t.Error(err)
	}
	if t.Failed() {
		return
	}
	checkCertificates(t, path, goroutines*each, goroutines*each*totalReadings(makeRecord("x", "x", sequencer.Pass, concurrencyShape)))
}

// checkCertificates opens the ledger at path and requires n runs whose certificates
// are exactly TL1-000001 .. TL1-n, and the given number of readings.
func checkCertificates(t *testing.T, path string, n, readings int) {
	t.Helper()
	l, err := ledger.Open(ctx, path)
	if err != nil {
		t.Fatal(err)
	}
	defer l.Close()
	runs, err := l.Runs(ctx, "")
	if err != nil {
		t.Fatal(err)
	}
	var certs []string
	for _, r := range runs {
		certs = append(certs, r.Certificate)
	}
	slices.Sort(certs)
	var want []string
	for i := 1; i <= n; i++ {
		want = append(want, fmt.Sprintf("TL1-%06d", i))
	}
	if !slices.Equal(certs, want) {
		t.Errorf("%d runs with certificates\n%v\nwant 1..%d", len(runs), certs, n)
	}
	counts, err := l.Counts(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if counts["runs"] != n || counts["readings"] != readings {
		t.Errorf("counts %v, want %d runs and %d readings", counts, n, readings)
	}
	migs, err := l.Migrations(ctx)
	if err != nil || len(migs) != ledger.LatestMigration() {
		t.Errorf("migrations %+v, %v: want each of 1..%d exactly once", migs, err, ledger.LatestMigration())
	}
	for i, m := range migs {
		if m.Version != i+1 {
			t.Errorf("migration %d has version %d", i, m.Version)
		}
	}
}

// syncBuffer collects a child's output.
type syncBuffer struct {
	mu sync.Mutex
	b  []byte
}

func (s *syncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	s.b = append(s.b, p...)
	return len(p), nil
}

func (s *syncBuffer) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return string(s.b)
}

// Environment of a child process of TestConcurrentProcessesChain.
const envChainChildPath = "TRIMLINE_LEDGER_TEST_CHAIN_CHILD_PATH"

const (
	chainProcs       = 4
	chainRunsPerProc = 250
)

// TestConcurrentProcessesChain runs 4 processes (this test binary again) that share
// one ledger file and each record 250 signed runs with the files in force, two
// processes per station, so every station's chain and the certificate sequence are
// extended by two or four processes in turn. The ledger must end with 1000 runs,
// certificates TL1-000001 … TL1-001000 exactly, and every chain, signature and the
// audit trail verifying. Source of expectations: hand-worked.
func TestConcurrentProcessesChain(t *testing.T) {
	if path := os.Getenv(envChainChildPath); path != "" {
		childRecordChain(t, path, os.Getenv(envChildWorker))
		return
	}
	if testing.Short() {
		t.Skip("spawns processes and records 1000 runs")
	}
	start := time.Now()
	path := filepath.Join(t.TempDir(), "ledger.db")
	runChildren(t, chainProcs, "TestConcurrentProcessesChain", envChainChildPath, path)
	recorded := time.Since(start)
	if t.Failed() {
		return
	}
	const n = chainProcs * chainRunsPerProc
	checkCertificates(t, path, n, n*totalReadings(makeRecord("x", "x", sequencer.Pass, smallShape)))

	l, err := ledger.Open(ctx, path)
	if err != nil {
		t.Fatal(err)
	}
	defer l.Close()
	var keys []string
	for w := range chainProcs {
		keys = append(keys, "worker-"+strconv.Itoa(w))
	}
	signer := newSigner(keys...)
	verifyStart := time.Now()
	rep, err := l.VerifyChain(ctx, "", ledger.ChainOptions{Verify: signer.verify, RequireSignatures: true})
	if err != nil {
		t.Fatal(err)
	}
	if !rep.OK || rep.Runs != n || rep.Stations != 2 || rep.Verified != n || rep.Certificates != n || rep.AuditEntries != n || rep.Blobs != 3 {
		t.Errorf("VerifyChain = %+v", rep)
	}
	counts, _ := l.Counts(ctx)
	if counts["blobs"] != 3 || counts["audit_trail"] != n {
		t.Errorf("counts %v", counts)
	}
	verified := time.Since(verifyStart)
	// How often a chain passed from one process to the other (evidence that the
	// processes really took turns on the same chains).
	rows, err := rawDB(t, path).Query(`SELECT station, substr(run_id, 1, 2) FROM runs ORDER BY station, chain_seq`)
	if err != nil {
		t.Fatal(err)
	}
	defer rows.Close()
	handovers := 0
	var lastStation, lastWorker string
	for rows.Next() {
		var st, w string
		if err := rows.Scan(&st, &w); err != nil {
			t.Fatal(err)
		}
		if st == lastStation && w != lastWorker {
			handovers++
		}
		lastStation, lastWorker = st, w
	}
	t.Logf("%d processes × %d runs: recorded in %v (%.2f ms/run), verified in %v; the chains changed hands %d times",
		chainProcs, chainRunsPerProc, recorded.Round(time.Millisecond), float64(recorded.Milliseconds())/n,
		verified.Round(time.Millisecond), handovers)
}

func childRecordChain(t *testing.T, path, worker string) {
	deadline := time.Now().Add(30 * time.Second)
	for {
		if _, err := os.Stat(path + ".go"); err == nil {
			break
		}
		if time.Now().After(deadline) {
			t.Fatal("the parent never opened the gate")
		}
		time.Sleep(5 * time.Millisecond)
	}
	l, err := ledger.Open(ctx, path)
	if err != nil {
		t.Fatalf("worker %s: open: %v", worker, err)
	}
	defer l.Close()
	w, _ := strconv.Atoi(worker)
	key := "worker-" + worker
	signer := newSigner(key)
	files, refs := filesInForce("v1")
	for i := range chainRunsPerProc {
		verdict := sequencer.Pass
		if i%4 == 0 {
			verdict = sequencer.Fail
		}
		rec := makeRecord(fmt.Sprintf("w%s-%03d", worker, i), fmt.Sprintf("SN-%s-%03d", worker, i), verdict, smallShape)
		rec.Station = fmt.Sprintf("EOL-%d", w%2)
		rec.Files = refs
		if _, err := l.RecordRunWith(ctx, rec, ledger.RecordOptions{Prefix: "TL1", Files: files, Sign: signer.sign(key)}); err != nil {
			t.Fatalf("worker %s run %d: %v", worker, i, err)
		}
	}
}
