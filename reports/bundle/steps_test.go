package bundle_test

import (
	"os"
	"path/filepath"
	"testing"

	"trimline/reports/bundle"
	"trimline/reports/ledger"
	"trimline/sequencer"
)

// A run of schema 2 (sweeps of any names and number, each with its stage,
// results with stage and step, a step log) exports, opens back to the same
// record, and imports into a ledger made before migration 0007, which Open
// migrates: both ledgers verify.
func TestSchema2RunIntoMigratedLedger(t *testing.T) {
	s := newStationWith(t, func(rec *sequencer.Record) {
		rec.Sweeps[0].Name, rec.Sweeps[0].Stage = "as found", sequencer.AsFound
		rec.Sweeps[1].Name, rec.Sweeps[1].Stage = "after trim", sequencer.AsLeft
		extra := rec.Sweeps[1]
		extra.Name = "after store"
		rec.Sweeps = append(rec.Sweeps, extra)
		for i := range rec.Fits {
			rec.Fits[i].Sweep, rec.Fits[i].Step, rec.Fits[i].Order = rec.Sweeps[i].Name, "fit "+rec.Sweeps[i].Name, 1
		}
		rec.Results[0].Stage, rec.Results[0].Step = sequencer.AsLeft, "fit after trim"
		rec.Steps = []sequencer.StepRun{
			{Name: "as found", Kind: "sweep", Stage: sequencer.AsFound, Status: sequencer.StepDone},
			{Name: "after trim", Kind: "sweep", Stage: sequencer.AsLeft, Status: sequencer.StepDone},
			{Name: "store", Kind: "store", Stage: sequencer.AsLeft, Status: sequencer.StepSkipped, Note: "skip_if held"},
			{Name: "after store", Kind: "sweep", Stage: sequencer.AsLeft, Status: sequencer.StepDone},
		}
	})
	if rep, err := s.led.VerifyChain(ctx, ""); err != nil || !rep.OK {
		t.Fatalf("source ledger: %+v, %v", rep, err)
	}
	data, _ := export(t, s.led, s.number, s.all())
	b, err := open(data)
	if err != nil {
		t.Fatalf("open a schema-2 bundle: %v", err)
	}
	sameRecord(t, s.rec, b.Record)

	// A ledger of the first layout's time (migrations up to 0006, one schema-1 run).
	old, err := os.ReadFile(filepath.Join("..", "ledger", "testdata", "schema1-demo", "ledger.db"))
	if err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(t.TempDir(), "audit.db")
	if err := os.WriteFile(path, old, 0o600); err != nil {
		t.Fatal(err)
	}
	audit, err := ledger.Open(ctx, path)
	if err != nil {
		t.Fatalf("open an old ledger: %v", err)
	}
	defer audit.Close()
	if err := bundle.Import(ctx, audit, b, "auditor-anna"); err != nil {
		t.Fatalf("import into a migrated ledger: %v", err)
	}
	rec, _, err := audit.ImportedRunByCertificate(ctx, s.number)
	if err != nil {
		t.Fatal(err)
	}
	sameRecord(t, s.rec, rec)
	if rep, err := audit.VerifyChain(ctx, ""); err != nil || !rep.OK || rep.Runs != 1 {
		t.Fatalf("migrated ledger after the import: %+v, %v", rep, err)
	}
	if rep, err := audit.VerifyImports(ctx); err != nil || !rep.OK {
		t.Fatalf("imports of the migrated ledger: %+v, %v", rep, err)
	}
}
