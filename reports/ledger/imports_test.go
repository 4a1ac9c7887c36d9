package ledger_test

import (
	"bytes"
	"errors"
	"strings"
	"testing"

	"trimline/reports/ledger"
	"trimline/sequencer"
)

// importOf is the ImportedRun of a run recorded in src (another station's ledger).
func importOf(t *testing.T, src *ledger.Ledger, runID string, files map[string][]byte) ledger.ImportedRun {
	t.Helper()
	rec, meta, err := src.RunByID(ctx, runID)
	if err != nil {
		t.Fatal(err)
	}
	doc, err := ledger.Canonical(rec)
	if err != nil {
		t.Fatal(err)
	}
	return ledger.ImportedRun{RunID: rec.RunID, Number: meta.Certificate, Station: rec.Station, Serial: rec.Serial,
		RecordJSON: doc, RecordSHA256: meta.RecordSHA256, KeyID: meta.KeyID, Signature: meta.Signature,
		ImportedBy: "auditor", Source: "test", Files: files, PDF: []byte("%PDF-1.4 test\n")}
}

// Imported runs are stored apart: found by number and id, not among the ledger's
// own runs, checked on the way in, append-only, and verified by VerifyImports
// (VerifyChain, which does not read them, stays OK).
func TestImportRun(t *testing.T) {
	signer := newSigner("src-key")
	src, _ := openLedger(t)
	files, refs := filesInForce("src")
	rec := makeRecord("src-1", "SN-1", sequencer.Pass, recordShape{sweeps: 2, points: 3, readings: 2, nonFinite: true})
	rec.Station, rec.Files = "SRC", refs
	if _, err := src.RecordRunWith(ctx, rec, ledger.RecordOptions{Prefix: "SRC", Files: files, Sign: signer.sign("src-key")}); err != nil {
		t.Fatal(err)
	}
	fault := makeRecord("src-2", "SN-2", sequencer.Fault, recordShape{sweeps: 1, points: 1, readings: 1})
	fault.Station = "SRC"
	mustRecord(t, src, fault, "SRC")

	dst, path := openLedger(t)
	ir := importOf(t, src, "src-1", files)

	// Refused on the way in.
	for what, c := range map[string]struct {
		edit func(*ledger.ImportedRun)
		want error
	}{
		"wrong record hash": {func(r *ledger.ImportedRun) { r.RecordSHA256 = strings.Repeat("0", 64) }, ledger.ErrInvalid},
		"changed record": {func(r *ledger.ImportedRun) {
			r.RecordJSON = bytes.Replace(r.RecordJSON, []byte("SN-1"), []byte("SN-9"), 1)
		}, ledger.ErrInvalid},
		"serial not record's": {func(r *ledger.ImportedRun) { r.Serial = "SN-9" }, ledger.ErrInvalid},
		"no number":           {func(r *ledger.ImportedRun) { r.Number = "" }, ledger.ErrInvalid},
		"no importer":         {func(r *ledger.ImportedRun) { r.ImportedBy = "" }, ledger.ErrInvalid},
		"key without sig":     {func(r *ledger.ImportedRun) { r.Signature = nil }, ledger.ErrInvalid},
		"bad file content":    {func(r *ledger.ImportedRun) { r.Files = map[string][]byte{refs[0].SHA256: []byte("x")} }, ledger.ErrInvalid},
		"wrong PDF hash":      {func(r *ledger.ImportedRun) { r.PDFSHA256 = strings.Repeat("1", 64) }, ledger.ErrInvalid},
		"non-canonical JSON": {func(r *ledger.ImportedRun) {
			r.RecordJSON = append(append([]byte(nil), r.RecordJSON...), ' ')
			r.RecordSHA256 = sha(r.RecordJSON)
		}, ledger.ErrInvalid},
	} {
		bad := ir
		c.edit(&bad)
		if err := dst.ImportRun(ctx, bad); !errors.Is(err, c.want) {
			t.Errorf("%s: %v, want %v", what, err, c.want)
		}
	}
	if err := src.ImportRun(ctx, ir); !errors.Is(err, ledger.ErrDuplicateRun) {
		t.Errorf("import of a run of the ledger's own: %v, want ErrDuplicateRun", err)
	}

	if err := dst.ImportRun(ctx, ir); err != nil {
		t.Fatal(err)
	}
	if err := dst.ImportRun(ctx, importOf(t, src, "src-2", nil)); err != nil {
		t.Fatal(err)
	}
	again := ir
	again.Source, again.ImportedBy = "another copy", "someone else"
	if err := dst.ImportRun(ctx, again); !errors.Is(err, ledger.ErrAlreadyImported) {
		t.Errorf("the same import again: %v, want ErrAlreadyImported", err)
	}
	clash := importOf(t, src, "src-2", nil)
	clash.PDF = []byte("%PDF other")
	if err := dst.ImportRun(ctx, clash); !errors.Is(err, ledger.ErrImportConflict) {
		t.Errorf("other contents for an imported run: %v, want ErrImportConflict", err)
	}

	got, gir, err := dst.ImportedRunByCertificate(ctx, "SRC-000001")
	if err != nil {
		t.Fatal(err)
	}
	requireSameRecord(t, rec, got)
	if gir.RunID != "src-1" || gir.PDFSHA256 != sha(ir.PDF) || gir.Source != "test" || gir.ImportedBy != "auditor" || gir.Files != nil {
		t.Errorf("imported run %+v", gir)
	}
	list, err := dst.ImportedRuns(ctx)
	if err != nil || len(list) != 2 || list[0].RunID != "src-1" || list[1].RunID != "src-2" || list[0].RecordJSON != nil {
		t.Errorf("ImportedRuns %+v %v", list, err)
	}
	if _, _, err := dst.RunByCertificate(ctx, "SRC-000001"); !errors.Is(err, ledger.ErrNotFound) {
		t.Errorf("an imported run among the ledger's own: %v", err)
	}
	if runs, _ := dst.Runs(ctx, ""); len(runs) != 0 {
		t.Errorf("Runs lists %d runs", len(runs))
	}
	for _, k := range []string{refs[0].SHA256, refs[1].SHA256, refs[2].SHA256, sha(ir.PDF)} {
		if _, err := dst.Blob(ctx, k); err != nil {
			t.Errorf("blob %s: %v", k, err)
		}
	}

	opts := ledger.ChainOptions{Verify: signer.verify}
	if rep, err := dst.VerifyChain(ctx, ""); err != nil || !rep.OK {
		t.Fatalf("VerifyChain: %+v %v", rep, err)
	}
	if rep, err := dst.VerifyImports(ctx, opts); err != nil || !rep.OK || rep.Imports != 2 || rep.Signed != 1 || rep.Verified != 1 || rep.Unsigned != 1 {
		t.Fatalf("VerifyImports: %+v %v", rep, err)
	}

	db := rawDB(t, path)
	for _, q := range []string{`UPDATE imported_runs SET serial = 'x'`, `DELETE FROM imported_runs`} {
		if _, err := db.Exec(q); err == nil {
			t.Errorf("allowed: %s", q)
		}
	}
	// Changes past the triggers show in VerifyImports (VerifyChain does not read
	// imported_runs). Each is made with the trigger off, then undone.
	const noUpdate = `CREATE TRIGGER imported_runs_no_update BEFORE UPDATE ON imported_runs BEGIN SELECT RAISE(ABORT, 'ledger: imported runs are append-only'); END`
	for _, q := range []string{
		`UPDATE imported_runs SET record_json = replace(record_json, 'AMP-10', 'AMP-11') WHERE run_id = 'src-1'`,
		`UPDATE imported_runs SET signature = unhex('00' || hex(signature)) WHERE run_id = 'src-1'`,
		`UPDATE imported_runs SET number = 'SRC-000002' WHERE run_id = 'src-1'`,
		`UPDATE imported_runs SET source = 'elsewhere' WHERE run_id = 'src-2'`,
		`UPDATE imported_runs SET pdf_sha256 = NULL WHERE run_id = 'src-1'`,
	} {
		if _, err := db.Exec(`DROP TRIGGER imported_runs_no_update`); err != nil {
			t.Fatal(err)
		}
		if _, err := db.Exec(`BEGIN; CREATE TEMP TABLE keep AS SELECT * FROM imported_runs; ` + q + `; ` + noUpdate + `; COMMIT`); err != nil {
			t.Fatalf("%s: %v", q, err)
		}
		rep, err := dst.VerifyImports(ctx, opts)
		if err != nil || rep.OK {
			t.Errorf("%s: not detected (%+v, %v)", q, rep, err)
		} else {
			t.Logf("%-90.90s -> %s", q, rep.Reason)
		}
		const cols = `number, station, serial, record_json, record_sha256, key_id, signature, pdf_sha256, seal_sha256,
			public_key_sha256, imported_at, imported_by, source`
		if _, err := db.Exec(`DROP TRIGGER imported_runs_no_update;
			UPDATE imported_runs SET (` + cols + `) = (SELECT ` + cols + ` FROM temp.keep k WHERE k.run_id = imported_runs.run_id);
			DROP TABLE temp.keep; ` + noUpdate); err != nil {
			t.Fatal(err)
		}
		if rep, err := dst.VerifyImports(ctx, opts); err != nil || !rep.OK {
			t.Fatalf("after restoring: %+v %v", rep, err)
		}
	}
	if _, err := db.Exec(`DROP TRIGGER imported_runs_no_delete`); err != nil {
		t.Fatal(err)
	}
	if rep, _ := dst.VerifyImports(ctx); rep.OK || !strings.Contains(rep.Reason, "imported_runs_no_delete") {
		t.Errorf("missing trigger: %+v", rep)
	}
}
