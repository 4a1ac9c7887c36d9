package ledger_test

import (
	"database/sql"
	"io/fs"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"trimline/reports/ledger"
	"trimline/reports/ledger/ledgertest"
	"trimline/sequencer"
)

// openSchema1Demo opens (and so migrates) a copy of the schema-1 demo's ledger,
// closed when the test ends; it returns the ledger's path too.
func openSchema1Demo(t testing.TB) (string, *ledger.Ledger) {
	t.Helper()
	path := filepath.Join(schema1Demo(t), "ledger.db")
	l, err := ledger.Open(ctx, path)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { l.Close() })
	return path, l
}

// schema1Demo copies testdata/schema1-demo, a one-unit demo folder made by
// `trimline demo --units 1` before sequences were step lists (its ledger has
// migrations up to 0006 and one signed run of schema 1), into a new folder and
// returns that folder. Key files and folders get the modes the station wants.
func schema1Demo(t testing.TB) string {
	t.Helper()
	src, dst := filepath.Join("testdata", "schema1-demo"), t.TempDir()
	err := filepath.WalkDir(src, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(src, p)
		to := filepath.Join(dst, rel)
		if d.IsDir() {
			return os.MkdirAll(to, 0o700)
		}
		b, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		return os.WriteFile(to, b, 0o600)
	})
	if err != nil {
		t.Fatal(err)
	}
	return dst
}

// A ledger made before migration 0007 opens (the migration runs), its chain
// and every query row still check, and the rows of its schema-1 run carry the
// stages the first layout stands for and (0008) the kinds its role names
// stand for: old rows query like new ones.
func TestSchema1LedgerMigrates(t *testing.T) {
	dir := schema1Demo(t)
	path := filepath.Join(dir, "ledger.db")
	l, err := ledger.Open(ctx, path)
	if err != nil {
		t.Fatalf("open a ledger of schema-1 records: %v", err)
	}
	defer l.Close()
	migs, err := l.Migrations(ctx)
	if err != nil || len(migs) != ledger.LatestMigration() || migs[6].Name != "steps" {
		t.Fatalf("migrations %+v, %v", migs, err)
	}
	rep, err := l.VerifyChain(ctx, "", ledger.ChainOptions{RequireSignatures: true})
	if err != nil || !rep.OK || rep.Runs != 1 {
		t.Fatalf("VerifyChain after migration: %+v, %v", rep, err)
	}
	db := rawDB(t, path)
	var schema int
	if err := db.QueryRow(`SELECT json_extract(record_json, '$.schema') FROM runs`).Scan(&schema); err != nil || schema != 1 {
		t.Fatalf("fixture's run has schema %d (%v), want 1", schema, err)
	}
	for _, c := range []struct{ query, want string }{
		{`SELECT group_concat(name || '=' || coalesce(stage, 'NULL') || '/' || coalesce(step, 'NULL'), ' ') FROM (SELECT * FROM results ORDER BY rowid)`,
			"pre_offset=as_found/NULL pre_gain_error=as_found/NULL pre_nonlinearity=as_found/NULL offset_code=adjustment/NULL gain_code=adjustment/NULL " +
				"post_offset=as_left/NULL post_gain_error=as_left/NULL post_nonlinearity=as_left/NULL post_max_error=as_left/NULL post_noise=as_left/NULL"},
		{`SELECT group_concat(sweep || '=' || stage || '/' || points, ' ') FROM (SELECT * FROM sweeps ORDER BY rowid)`, "pre-trim=as_found/11 verify=as_left/11"},
		{`SELECT group_concat(sweep || '=' || fit_order || '/' || coalesce(step, 'NULL'), ' ') FROM (SELECT * FROM fits ORDER BY rowid)`, "pre-trim=1/NULL verify=1/NULL"},
		{`SELECT count(*) FROM steps`, "0"},
		{`SELECT count(*) FROM readings r JOIN sweeps s USING (run_id, sweep) WHERE s.stage = 'as_left'`, "88"},
		// 0008: the kind of each role, by its name in a record of schema 1.
		{`SELECT group_concat(role || '=' || coalesce(kind, 'NULL'), ' ') FROM (SELECT * FROM instruments ORDER BY rowid)`,
			"source=voltage_source meter=meter dut=dut_port"},
	} {
		var got string
		if err := db.QueryRow(c.query).Scan(&got); err != nil || got != c.want {
			t.Errorf("%s\n got %q (%v)\nwant %q", c.query, got, err, c.want)
		}
	}
	// The migrated columns are covered by the row check.
	if _, err := db.Exec(`DROP TRIGGER results_no_update`); err != nil {
		t.Fatal(err)
	}
	if _, err := db.Exec(`UPDATE results SET stage = 'as_left' WHERE name = 'pre_offset'`); err != nil {
		t.Fatal(err)
	}
	if _, err := db.Exec(`CREATE TRIGGER results_no_update BEFORE UPDATE ON results BEGIN SELECT RAISE(ABORT, 'ledger: results are append-only'); END`); err != nil {
		t.Fatal(err)
	}
	rep, err = l.VerifyChain(ctx, "")
	if err != nil || rep.OK || rep.BrokenTable != "results" || rep.BrokenColumn != "stage" {
		t.Fatalf("VerifyChain with a stage changed: %+v, %v; want results.stage broken", rep, err)
	}
}

// A run of schema 2 whose roles have names of the station's choosing stores
// each role's kind from the record; a changed kind breaks the row check.
func TestInstrumentKindsOfSchema2(t *testing.T) {
	path, l := openSchema1Demo(t)
	rec := makeRecord("run-kinds", "SN-KINDS", sequencer.Pass, recordShape{sweeps: 2, points: 2, readings: 2})
	for i, k := range []struct {
		role string
		kind sequencer.RoleKind
	}{{"input", sequencer.VoltageSource}, {"dmm", sequencer.VoltMeter}, {"card", sequencer.DUTPort}} {
		rec.Instruments[i].Role, rec.Instruments[i].Kind = k.role, k.kind
	}
	mustRecord(t, l, rec, "S2")
	if rep, err := l.VerifyChain(ctx, ""); err != nil || !rep.OK || rep.Runs != 2 {
		t.Fatalf("VerifyChain: %+v, %v", rep, err)
	}
	db := rawDB(t, path)
	var got string
	err := db.QueryRow(`SELECT group_concat(role || '=' || coalesce(kind, 'NULL'), ' ') FROM (SELECT * FROM instruments WHERE run_id = 'run-kinds' ORDER BY rowid)`).Scan(&got)
	if want := "input=voltage_source dmm=meter card=dut_port"; err != nil || got != want {
		t.Fatalf("instrument kinds: %q (%v), want %q", got, err, want)
	}
	if _, err := db.Exec(`UPDATE instruments SET kind = 'meter' WHERE role = 'input'`); err == nil {
		t.Fatal("an instruments row was updated with its append-only trigger in place")
	}
	if _, err := db.Exec(`INSERT INTO instruments (run_id, role, address, asset, cal_due, identity, kind) VALUES ('run-kinds', 'x', '', '', '', '', 'scope')`); err == nil {
		t.Fatal("an instruments row took kind 'scope'")
	}
	if err := ledgertest.EditRow(path, "instruments", "kind = 'meter'", "run_id = 'run-kinds' AND role = 'input'"); err != nil {
		t.Fatal(err)
	}
	rep, err := l.VerifyChain(ctx, "")
	if err != nil || rep.OK || rep.BrokenTable != "instruments" || rep.BrokenColumn != "kind" || rep.BrokenAt != "run-kinds" {
		t.Fatalf("VerifyChain with a kind changed: %+v, %v; want instruments.kind of run-kinds broken", rep, err)
	}
}

// A run of schema 2 stores its step log, stages and steps in the query rows,
// beside the migrated schema-1 run, and the log answers "which units had step
// X skipped"; a changed step row breaks the check.
func TestStepRowsOfSchema2(t *testing.T) {
	path, l := openSchema1Demo(t)
	rec := makeRecord("run-steps", "SN-STEPS", sequencer.Pass, recordShape{sweeps: 2, points: 2, readings: 2})
	rec.Sweeps[0].Stage, rec.Sweeps[1].Stage = sequencer.AsFound, sequencer.AsLeft
	for i := range rec.Results {
		rec.Results[i].Stage, rec.Results[i].Step = sequencer.AsLeft, "verify fit"
	}
	for i := range rec.Fits {
		rec.Fits[i].Step, rec.Fits[i].Order = "fit "+rec.Fits[i].Sweep, 2
		rec.Fits[i].Coef = []float64{0.001, 2, -0.5}
		rec.Fits[i].LackOfFit = &sequencer.LackOfFit{Method: "chi2/dof", Statistic: 1.25, DOF1: 7, P: 0.27}
	}
	rec.Steps = []sequencer.StepRun{
		{Name: "pre-trim", Kind: "sweep", Stage: sequencer.AsFound, Status: sequencer.StepDone},
		{Name: "store", Kind: "store", Stage: sequencer.AsLeft, Status: sequencer.StepSkipped, Note: "skip_if held: offset_code == 0"},
		{Name: "verify", Kind: "sweep", Stage: sequencer.AsLeft, Status: sequencer.StepDone},
	}
	mustRecord(t, l, rec, "S2")
	if rep, err := l.VerifyChain(ctx, ""); err != nil || !rep.OK || rep.Runs != 2 {
		t.Fatalf("VerifyChain: %+v, %v", rep, err)
	}
	db := rawDB(t, path)
	var got string
	err := db.QueryRow(`SELECT group_concat(r.serial || ':' || s.note, ';') FROM steps s JOIN runs r USING (run_id)
		WHERE s.name = 'store' AND s.status = 'skipped'`).Scan(&got)
	if err != nil || got != "SN-STEPS:skip_if held: offset_code == 0" {
		t.Fatalf("units where store was skipped: %q, %v", got, err)
	}
	var order int
	var coef, method sql.NullString
	if err := db.QueryRow(`SELECT fit_order, coef_json, lack_of_fit_method FROM fits WHERE run_id = 'run-steps' ORDER BY rowid LIMIT 1`).Scan(&order, &coef, &method); err != nil ||
		order != 2 || !strings.HasPrefix(coef.String, "[0.001,2,") || method.String != "chi2/dof" {
		t.Fatalf("fit row: order %d coef %v method %v (%v)", order, coef, method, err)
	}
	if _, err := db.Exec(`DROP TRIGGER steps_no_update`); err != nil {
		t.Fatal(err)
	}
	if _, err := db.Exec(`UPDATE steps SET status = 'done' WHERE name = 'store'`); err != nil {
		t.Fatal(err)
	}
	if _, err := db.Exec(`CREATE TRIGGER steps_no_update BEFORE UPDATE ON steps BEGIN SELECT RAISE(ABORT, 'ledger: steps are append-only'); END`); err != nil {
		t.Fatal(err)
	}
	if rep, err := l.VerifyChain(ctx, ""); err != nil || rep.OK || rep.BrokenTable != "steps" || rep.BrokenColumn != "status" {
		t.Fatalf("VerifyChain with a step's status changed: %+v, %v; want steps.status broken", rep, err)
	}
}
