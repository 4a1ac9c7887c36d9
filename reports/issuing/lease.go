package issuing

import (
	"context"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"time"

	"trimline/reports/internal/proc"
	"trimline/reports/ledger"
)

// leaseFor is how long a run's lease holds without renewal. The holder renews it
// every leaseFor/3 while it publishes; a holder killed on another host leaves
// its runs to Repair once this has passed (on this host, at once: proc.Alive).
const leaseFor = 30 * time.Second

// holder is the process that takes leases: this host and this process.
var holder = sync.OnceValue(func() ledger.Lease {
	host, err := os.Hostname()
	if err != nil || host == "" {
		host = "unknown-host"
	}
	return ledger.Lease{Host: host, PID: os.Getpid(), Started: time.Now().UTC()}
})

// held reports whether le's holder may still be at work: a holder on this host
// must still exist; one on another host is trusted until its lease expires.
func held(le ledger.Lease) bool {
	if le.Host == holder().Host {
		return proc.Alive(le.PID)
	}
	return true
}

// runLease is a lease this process holds on a run, renewed until released.
type runLease struct {
	led   *ledger.Ledger
	lease ledger.Lease
	stop  chan struct{}
	done  chan struct{}
}

// hold takes the lease on runID for the run this process is about to store and
// publish. A run id is new for every run, so the lease is free unless a process
// still at work holds it; that is an error.
func (is *Issuer) hold(ctx context.Context, runID string) (*runLease, error) {
	le, err := is.claim(ctx, runID)
	if err == nil && le == nil {
		err = fmt.Errorf("run %s is held by another process", runID)
	}
	return le, err
}

// claim takes the lease on runID unless a live holder has it (nil, nil then), and
// renews it in the background until release.
func (is *Issuer) claim(ctx context.Context, runID string) (*runLease, error) {
	return claimLease(ctx, is.Ledger, runID)
}

// claimLease is claim for any writer of a run's files (the issue flow, the
// repair, a reprint).
func claimLease(ctx context.Context, led *ledger.Ledger, runID string) (*runLease, error) {
	le := holder()
	le.RunID = runID
	le.Started = time.Now().UTC() // holder's Started is the process's; a lease's is its own
	le.Expires = le.Started.Add(leaseFor)
	ok, err := led.ClaimLease(ctx, le, held)
	if err != nil || !ok {
		return nil, err
	}
	rl := &runLease{led: led, lease: le, stop: make(chan struct{}), done: make(chan struct{})}
	go rl.renew(context.WithoutCancel(ctx))
	return rl, nil
}

func (rl *runLease) renew(ctx context.Context) {
	defer close(rl.done)
	t := time.NewTicker(leaseFor / 3)
	defer t.Stop()
	for {
		select {
		case <-rl.stop:
			return
		case <-t.C:
			le := rl.lease
			le.Expires = time.Now().Add(leaseFor)
			rl.led.RenewLease(ctx, le) // a failed renewal leaves the old expiry; the work goes on
		}
	}
}

// release stops the renewal and gives the lease back. A lease that cannot be
// given back expires, or is taken over once this process is gone.
func (rl *runLease) release() {
	close(rl.stop)
	<-rl.done
	rl.led.ReleaseLease(context.Background(), rl.lease)
}

// RemoveStaleTemps removes the temporary files a killed process left in the
// certificates folder while it wrote a certificate or its seal
// (".NUMBER_SERIAL.pdf.tmp-*", ".NUMBER_SERIAL.pdf.seal.tmp-*"; see atomicfile):
// only those of this station's runs (by the certificate number in the name), and
// only those whose run no live process holds (a process writes them only while it
// holds the run's lease). Files of unknown numbers are left alone. It reports how
// many it removed.
func (is *Issuer) RemoveStaleTemps(ctx context.Context) (int, error) {
	ents, err := os.ReadDir(is.CertDir)
	if err != nil {
		if errors.Is(err, fs.ErrNotExist) {
			return 0, nil
		}
		return 0, err
	}
	byNumber := map[string][]string{}
	var numbers []string
	for _, e := range ents {
		num, ok := tempNumber(e.Name())
		if !ok || !e.Type().IsRegular() {
			continue
		}
		if byNumber[num] == nil {
			numbers = append(numbers, num)
		}
		byNumber[num] = append(byNumber[num], e.Name())
	}
	n := 0
	for _, num := range numbers {
		rec, _, err := is.Ledger.RunByCertificate(ctx, num)
		if errors.Is(err, ledger.ErrNotFound) || (err == nil && rec.Station != is.Station.ID) {
			continue
		}
		if err != nil {
			return n, err
		}
		lease, err := is.claim(ctx, rec.RunID)
		if err != nil {
			return n, err
		}
		if lease == nil {
			continue // its process is still writing
		}
		for _, name := range byNumber[num] {
			if err := os.Remove(filepath.Join(is.CertDir, name)); err == nil {
				n++
			} else if !errors.Is(err, fs.ErrNotExist) {
				lease.release()
				return n, err
			}
		}
		lease.release()
	}
	return n, nil
}

// tempNumber returns the certificate number in the name of a temporary file
// atomicfile.Write makes for a certificate or its seal, and whether name is one.
func tempNumber(name string) (string, bool) {
	rest, ok := strings.CutPrefix(name, ".")
	i := strings.LastIndex(rest, ".tmp-")
	if !ok || i < 0 {
		return "", false
	}
	base := rest[:i]
	if !strings.HasSuffix(base, ".pdf") && !strings.HasSuffix(base, ".pdf.seal") {
		return "", false
	}
	base = strings.TrimSuffix(strings.TrimSuffix(base, ".seal"), ".pdf")
	num, _, _ := strings.Cut(base, "_")
	return num, num != ""
}
