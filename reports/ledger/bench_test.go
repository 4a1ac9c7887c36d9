package ledger_test

import (
	"bytes"
	"crypto/ed25519"
	"fmt"
	"testing"

	"trimline/reports/ledger"
	"trimline/reports/signing"
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

// benchLedgerRuns is how many runs BenchmarkVerifyChain's ledger holds: enough for
// the cost per run to show, few enough to build in seconds.
const benchLedgerRuns = 2000

// signRuns records n signed runs of benchShape in l, one station, numbered from
// first, and returns a Verify that checks their signatures.
func signRuns(b *testing.B, l *ledger.Ledger, first, n int) func(keyID string, msg, sig []byte) bool {
	b.Helper()
	priv := ed25519.NewKeyFromSeed(bytes.Repeat([]byte{7}, ed25519.SeedSize))
	pub := priv.Public().(ed25519.PublicKey)
	keyID := signing.KeyID(pub)
	sign := func(number, runID, recordSHA string) (string, []byte, error) {
		return keyID, ed25519.Sign(priv, signing.RecordMessage(number, runID, recordSHA)), nil
	}
	tmpl := makeRecord("", "", sequencer.Pass, benchShape)
	for i := first; i < first+n; i++ {
		rec := *tmpl
		rec.RunID = fmt.Sprintf("bench-%08d", i)
		rec.Serial = fmt.Sprintf("SN-%06d", i)
		if _, err := l.RecordRunWith(ctx, &rec, ledger.RecordOptions{Prefix: "TL1", Sign: sign}); err != nil {
			b.Fatal(err)
		}
	}
	return func(id string, msg, sig []byte) bool { return id == keyID && ed25519.Verify(pub, msg, sig) }
}

// BenchmarkVerifyChain verifies a ledger of benchLedgerRuns signed runs of
// BenchmarkRecordRun's size: links, signatures, the audit trail and every query
// row against its signed record. It reports the cost per 1000 runs (ms/1000runs),
// the figure that says how long `audit ledger` takes on a year of a station.
func BenchmarkVerifyChain(b *testing.B) {
	l, _ := openLedger(b)
	verify := signRuns(b, l, 0, benchLedgerRuns)
	b.ReportAllocs()
	for b.Loop() {
		rep, err := l.VerifyChain(ctx, "", ledger.ChainOptions{Verify: verify, RequireSignatures: true})
		if err != nil || !rep.OK || rep.Runs != benchLedgerRuns {
			b.Fatalf("verify chain: %+v %v", rep, err)
		}
	}
	b.ReportMetric(float64(b.Elapsed().Milliseconds())/float64(b.N)*1000/benchLedgerRuns, "ms/1000runs")
}

// BenchmarkVerifyChainSince verifies the same ledger from heads saved after its
// first benchLedgerRuns-100 runs (ChainOptions.Since): the last 100 runs are
// verified fully, the others trusted through the heads. Its ms/1000runs is per
// 1000 runs of the whole ledger, to set beside BenchmarkVerifyChain's.
func BenchmarkVerifyChainSince(b *testing.B) {
	l, _ := openLedger(b)
	signRuns(b, l, 0, benchLedgerRuns-100)
	rep, err := l.VerifyChain(ctx, "")
	if err != nil || !rep.OK {
		b.Fatalf("verify chain: %+v %v", rep, err)
	}
	heads := rep.HeadList()
	verify := signRuns(b, l, benchLedgerRuns-100, 100)
	b.ReportAllocs()
	for b.Loop() {
		rep, err := l.VerifyChain(ctx, "", ledger.ChainOptions{Verify: verify, RequireSignatures: true, Since: heads})
		if err != nil || !rep.OK || rep.Runs != 100 || rep.TrustedRuns != benchLedgerRuns-100 {
			b.Fatalf("verify chain: %+v %v", rep, err)
		}
	}
	b.ReportMetric(float64(b.Elapsed().Milliseconds())/float64(b.N)*1000/benchLedgerRuns, "ms/1000runs")
}
