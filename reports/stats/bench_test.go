package stats_test

import (
	"context"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"testing"

	"trimline/reports/stats"
)

// benchLedger is a 1000-unit demo ledger (one lot), made once with
// "trimline demo --units 1000 --lot L1" (a minute or two) into
// os.TempDir()/trimline-bench-1000 and reused by later runs.
func benchLedger(b *testing.B) string {
	b.Helper()
	dir := filepath.Join(os.TempDir(), "trimline-bench-1000")
	db := filepath.Join(dir, "ledger.db")
	if _, err := os.Stat(db); err == nil {
		return db
	}
	tmp := dir + ".tmp"
	os.RemoveAll(tmp)
	b.Logf("making the 1000-unit demo ledger in %s (once)", dir)
	cmd := exec.Command("go", "run", "trimline/cmd/trimline", "demo", "--out", tmp, "--units", "1000", "--lot", "L1")
	if out, err := cmd.CombinedOutput(); err != nil {
		b.Fatalf("demo: %v\n%s", err, out[max(0, len(out)-2000):])
	}
	if err := os.Rename(tmp, dir); err != nil {
		b.Fatal(err)
	}
	return db
}

// BenchmarkRead is the whole of "trimline stats" but the writing: open the
// ledger, read the runs, compute the report. The target is well under 2 s.
func BenchmarkRead(b *testing.B) {
	path := benchLedger(b)
	ctx := context.Background()
	for b.Loop() {
		r, err := stats.Open(ctx, path, stats.Options{})
		if err != nil {
			b.Fatal(err)
		}
		if r.Counts.Units != 1000 {
			b.Fatalf("%d units, want 1000", r.Counts.Units)
		}
	}
}

// BenchmarkReport is the whole of "trimline stats --pdf" on the 1000-unit
// ledger: read and compute, then the text, both CSVs and the lot report PDF.
// The target for it is under 2 s.
func BenchmarkReport(b *testing.B) {
	path := benchLedger(b)
	ctx := context.Background()
	for b.Loop() {
		r, err := stats.Open(ctx, path, stats.Options{By: stats.ByLot})
		if err != nil {
			b.Fatal(err)
		}
		r.WriteText(io.Discard)
		if err := r.WriteCSV(io.Discard); err != nil {
			b.Fatal(err)
		}
		if err := r.WriteValuesCSV(io.Discard); err != nil {
			b.Fatal(err)
		}
		if err := stats.WritePDF(io.Discard, r); err != nil {
			b.Fatal(err)
		}
	}
}
