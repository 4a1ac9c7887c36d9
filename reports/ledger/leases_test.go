package ledger_test

import (
	"context"
	"path/filepath"
	"testing"
	"time"

	"trimline/reports/ledger"
)

// A cancel during start-up (Ctrl-C while a new ledger is made) lands between two
// migrations: every migration still runs, and Open returns a complete ledger.
func TestOpenFinishesMigrationsWhenCancelled(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	ledger.SetAfterMigration(t, func(v int) {
		if v == 1 {
			cancel()
		}
	})
	led, err := ledger.Open(ctx, filepath.Join(t.TempDir(), "ledger.db"))
	if err != nil {
		t.Fatalf("open cancelled after migration 1: %v", err)
	}
	defer led.Close()
	migs, err := led.Migrations(context.Background())
	if err != nil || len(migs) != ledger.LatestMigration() {
		t.Fatalf("%d migrations applied (%v), want %d", len(migs), err, ledger.LatestMigration())
	}
}

// A lease is taken only when nobody holds it: not while another holder's lease is
// unexpired and its holder lives; at once when the holder is gone or the lease
// expired. A holder renews and releases only its own lease.
func TestClaimLease(t *testing.T) {
	ctx := context.Background()
	led, err := ledger.Open(ctx, filepath.Join(t.TempDir(), "ledger.db"))
	if err != nil {
		t.Fatal(err)
	}
	defer led.Close()
	now := time.Date(2026, 3, 1, 8, 0, 0, 0, time.UTC)
	led.Now = func() time.Time { return now }
	a := ledger.Lease{RunID: "r1", Host: "h", PID: 10, Started: now, Expires: now.Add(time.Minute)}
	b := ledger.Lease{RunID: "r1", Host: "h", PID: 20, Started: now, Expires: now.Add(time.Minute)}
	alive := func(ledger.Lease) bool { return true }
	gone := func(ledger.Lease) bool { return false }

	if ok, err := led.ClaimLease(ctx, a, alive); err != nil || !ok {
		t.Fatalf("free lease: %v %v", ok, err)
	}
	if ok, err := led.ClaimLease(ctx, b, alive); err != nil || ok {
		t.Fatalf("lease of a live holder taken: %v %v", ok, err)
	}
	if ok, err := led.ClaimLease(ctx, a, alive); err != nil || ok {
		t.Fatalf("the same holder claimed its held run twice: %v %v", ok, err)
	}
	if err := led.RenewLease(ctx, b); err == nil {
		t.Errorf("b renewed a's lease")
	}
	if err := led.ReleaseLease(ctx, b); err != nil {
		t.Fatal(err)
	}
	if got, ok, _ := led.LeaseOf(ctx, "r1"); !ok || got.PID != 10 {
		t.Fatalf("b released a's lease: %+v %v", got, ok)
	}
	if ok, err := led.ClaimLease(ctx, b, gone); err != nil || !ok {
		t.Fatalf("lease of a holder that is gone not taken: %v %v", ok, err)
	}
	now = now.Add(2 * time.Minute) // b's lease expired, b still lives
	if ok, err := led.ClaimLease(ctx, a, alive); err != nil || !ok {
		t.Fatalf("expired lease not taken: %v %v", ok, err)
	}
	a.Expires = now.Add(time.Minute)
	if err := led.RenewLease(ctx, a); err != nil {
		t.Fatal(err)
	}
	if err := led.ReleaseLease(ctx, a); err != nil {
		t.Fatal(err)
	}
	if _, ok, _ := led.LeaseOf(ctx, "r1"); ok {
		t.Errorf("lease still there after release")
	}

	// Leases left behind go: an expired one and one whose holder is gone.
	for i, le := range []ledger.Lease{
		{RunID: "held", Host: "h", PID: 1, Started: now, Expires: now.Add(time.Minute)},
		{RunID: "expired", Host: "h", PID: 1, Started: now, Expires: now.Add(-time.Second)},
		{RunID: "gone", Host: "h", PID: 2, Started: now, Expires: now.Add(time.Minute)},
	} {
		if ok, err := led.ClaimLease(ctx, le, nil); err != nil || !ok {
			t.Fatalf("lease %d: %v %v", i, ok, err)
		}
	}
	n, err := led.DropAbandonedLeases(ctx, func(le ledger.Lease) bool { return le.PID == 1 })
	leases, lerr := led.Leases(ctx)
	if err != nil || lerr != nil || n != 2 || len(leases) != 1 || leases[0].RunID != "held" {
		t.Errorf("dropped %d (%v), left %+v (%v); want 2 dropped, only held left", n, err, leases, lerr)
	}
}
