package ledger_test

import (
	"context"
	"os"
	"path/filepath"
	"testing"

	"trimline/reports/ledger"
	"trimline/sequencer"
)

// Issue 12, item 2: a document's path is stored relative to the ledger's own
// folder and read back resolved against it, from any working folder; paths that
// older ledgers stored relative to the working folder of their writer, or
// absolute from where the folder was then, are found beside the ledger.
func TestDocumentPathsRelativeToLedger(t *testing.T) {
	ctx := context.Background()
	base, elsewhere := t.TempDir(), t.TempDir()
	demo := filepath.Join(base, "trimline-demo")
	if err := os.MkdirAll(filepath.Join(demo, "certificates"), 0o755); err != nil {
		t.Fatal(err)
	}
	t.Chdir(base)
	l, err := ledger.Open(ctx, filepath.Join("trimline-demo", "ledger.db"))
	if err != nil {
		t.Fatal(err)
	}
	defer l.Close()
	if l.Dir() != demo {
		t.Errorf("Dir() = %s, want %s", l.Dir(), demo)
	}
	pdf := []byte("%PDF-1.7 TL1-000001")
	rel := filepath.Join("trimline-demo", "certificates", "TL1-000001_SN1.pdf")
	if err := os.WriteFile(rel, pdf, 0o644); err != nil {
		t.Fatal(err)
	}
	outside := filepath.Join(elsewhere, "TL1-000002_SN2.pdf")
	number := mustRecord(t, l, makeRecord("r1", "SN1", sequencer.Pass, smallShape), "TL1")
	number2 := mustRecord(t, l, makeRecord("r2", "SN2", sequencer.Pass, smallShape), "TL1")
	if err := l.AddDocument(ctx, "r1", number, rel, sha(pdf), int64(len(pdf))); err != nil {
		t.Fatal(err)
	}
	if err := l.AddDocument(ctx, "r2", number2, outside, sha(pdf), int64(len(pdf))); err != nil {
		t.Fatal(err)
	}
	db := rawDB(t, filepath.Join(demo, "ledger.db"))
	for run, want := range map[string]string{"r1": "certificates/TL1-000001_SN1.pdf", "r2": outside} {
		var stored string
		if err := db.QueryRow(`SELECT path FROM documents WHERE run_id = ?`, run).Scan(&stored); err != nil || stored != want {
			t.Errorf("run %s: stored path %q (%v), want %q", run, stored, err, want)
		}
	}
	if rep, err := l.VerifyChain(ctx, ""); err != nil || !rep.OK {
		t.Errorf("VerifyChain %+v %v", rep, err)
	}

	t.Chdir(elsewhere)
	want := filepath.Join(demo, "certificates", "TL1-000001_SN1.pdf")
	if docs, err := l.DocumentsFor(ctx, number); err != nil || len(docs) != 1 || docs[0].Path != want {
		t.Errorf("DocumentsFor from another folder = %+v, %v; want path %s", docs, err, want)
	}
	if d, err := l.DocumentBySHA(ctx, sha(pdf)); err != nil || d.Path != want {
		t.Errorf("DocumentBySHA from another folder = %+v, %v; want path %s", d, err, want)
	}
	for stored, want := range map[string]string{
		"certificates/TL1-000001_SN1.pdf":                                  want,                                                      // as stored now
		"trimline-demo/certificates/TL1-000001_SN1.pdf":                    want,                                                      // relative to an old writer's working folder
		filepath.Join(base, "moved", "certificates", "TL1-000001_SN1.pdf"): want,                                                      // absolute, from where the folder was
		"trimline-demo/certificates/TL1-000009_SN9.pdf":                    filepath.Join(demo, "certificates", "TL1-000009_SN9.pdf"), // deleted: where it was issued
		outside: outside,
		filepath.Join(base, "gone", "TL1-000003.pdf"): filepath.Join(base, "gone", "TL1-000003.pdf"), // nothing known: as stored
	} {
		if got := l.Locate(stored); got != want {
			t.Errorf("Locate(%q) = %s, want %s", stored, got, want)
		}
	}
}
