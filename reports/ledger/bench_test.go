package ledger_test

import (
	"fmt"
	"testing"

	"trimline/sequencer"
)

// BenchmarkRecordRun stores a typical run: 22 points (an 11-point pre-trim and an
// 11-point verify sweep) × 8 readings = 176 readings, with its fits, trims, results,
// limit outcomes, files and instruments, in one transaction with a certificate number.
func BenchmarkRecordRun(b *testing.B) {
	l, _ := openLedger(b)
	tmpl := makeRecord("", "SN-BENCH", sequencer.Pass, benchShape)
	b.ReportAllocs()
	i := 0
	for b.Loop() {
		rec := *tmpl
		rec.RunID = fmt.Sprintf("bench-%08d", i)
		i++
		if _, err := l.RecordRun(ctx, &rec, "TL1"); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(totalReadings(tmpl)), "readings/op")
}

// BenchmarkRun reads back and verifies one stored run of the same size.
func BenchmarkRun(b *testing.B) {
	l, _ := openLedger(b)
	rec := makeRecord("bench-read", "SN-BENCH", sequencer.Pass, benchShape)
	mustRecord(b, l, rec, "TL1")
	b.ReportAllocs()
	for b.Loop() {
		if _, err := l.Run(ctx, rec.RunID); err != nil {
			b.Fatal(err)
		}
	}
}
