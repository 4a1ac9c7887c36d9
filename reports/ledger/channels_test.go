package ledger_test

import (
	"testing"

	"trimline/instruments"
	"trimline/reports/ledger/ledgertest"
	"trimline/sequencer"
)

// A run of a two-channel unit, stored in a migrated schema-1 ledger beside its
// old run: it comes back unchanged, its rows carry their channels (the old run's
// ”), a switch is an instrument kind the rows take, and a changed channel
// breaks the check.
func TestChannelRowsRoundTrip(t *testing.T) {
	path, l := openSchema1Demo(t)
	rec := makeRecord("run-chan", "SN-CHAN", sequencer.Pass, recordShape{sweeps: 2, points: 2, readings: 2})
	rec.Sweeps[0].Channel, rec.Sweeps[1].Channel = "1", "2"
	rec.Sweeps[1].Name = rec.Sweeps[0].Name // one sweep step, two channels
	rec.Fits[0].Channel, rec.Fits[1].Channel = "1", "2"
	rec.Trims[0].Channel, rec.Trims[1].Channel = "1", "2"
	rec.Results[0].Channel, rec.Results[1].Channel = "1", "2"
	rec.Results[1].Name = rec.Results[0].Name
	rec.Outcomes[0].Channel = "2"
	rec.Steps = []sequencer.StepRun{{Name: "pre", Kind: "sweep", Status: sequencer.StepDone, Channel: "1"}, {Name: "pre", Kind: "sweep", Status: sequencer.StepDone, Channel: "2"}}
	rec.Instruments = append(rec.Instruments, sequencer.InstrumentRef{Role: "mux", Kind: sequencer.SwitchRole, Address: "sim://switch", Asset: "MUX-1",
		Identity: instruments.Identity{Maker: "SIM", Model: "MUX8", Serial: "0003", Firmware: "1.0"}})
	mustRecord(t, l, rec, "S2")
	got, err := l.Run(ctx, "run-chan")
	if err != nil {
		t.Fatal(err)
	}
	requireSameRecord(t, rec, got)
	if rep, err := l.VerifyChain(ctx, ""); err != nil || !rep.OK || rep.Runs != 2 {
		t.Fatalf("VerifyChain: %+v, %v", rep, err)
	}
	db := rawDB(t, path)
	for _, q := range []struct{ query, want string }{
		{`SELECT group_concat(name || '@' || channel, ' ') FROM (SELECT * FROM results WHERE run_id = 'run-chan' ORDER BY rowid)`,
			"post_offset@1 post_offset@2 nonlinearity@ offset_code@"},
		{`SELECT group_concat(name || '@' || channel, ' ') FROM (SELECT * FROM limit_outcomes WHERE run_id = 'run-chan' ORDER BY rowid)`,
			"offset@2 gain@ linearity@"},
		{`SELECT group_concat(dac || '@' || channel, ' ') FROM (SELECT * FROM trims WHERE run_id = 'run-chan' ORDER BY rowid)`, "offset@1 gain@2"},
		{`SELECT group_concat(sweep || '@' || channel, ' ') FROM (SELECT * FROM fits WHERE run_id = 'run-chan' ORDER BY rowid)`, "pre-trim@1 verify@2"},
		{`SELECT group_concat(sweep || '@' || channel, ' ') FROM (SELECT * FROM sweeps WHERE run_id = 'run-chan' ORDER BY rowid)`, "pre-trim@1 pre-trim@2"},
		{`SELECT count(*) || ' ' || sum(channel = '2') FROM readings WHERE run_id = 'run-chan'`, "8 4"},
		{`SELECT group_concat(name || '@' || channel, ' ') FROM (SELECT * FROM steps WHERE run_id = 'run-chan' ORDER BY rowid)`, "pre@1 pre@2"},
		{`SELECT group_concat(role || '=' || coalesce(kind, 'NULL'), ' ') FROM (SELECT * FROM instruments WHERE run_id = 'run-chan' ORDER BY rowid)`,
			"source=voltage_source meter=meter dut=dut_port mux=switch"},
		// The schema-1 run's rows are of the whole unit.
		{`SELECT count(*) || ' ' || sum(channel = '') FROM results WHERE run_id <> 'run-chan'`, "10 10"},
	} {
		var got string
		if err := db.QueryRow(q.query).Scan(&got); err != nil || got != q.want {
			t.Errorf("%s\n = %q (%v), want %q", q.query, got, err, q.want)
		}
	}
	if _, err := db.Exec(`UPDATE results SET channel = '3' WHERE run_id = 'run-chan'`); err == nil {
		t.Fatal("a results row was updated with its append-only trigger in place")
	}
	if err := ledgertest.EditRow(path, "limit_outcomes", "channel = '1'", "run_id = 'run-chan' AND name = 'offset'"); err != nil {
		t.Fatal(err)
	}
	rep, err := l.VerifyChain(ctx, "")
	if err != nil || rep.OK || rep.BrokenTable != "limit_outcomes" || rep.BrokenColumn != "channel" || rep.BrokenAt != "run-chan" {
		t.Fatalf("VerifyChain with a channel changed: %+v, %v; want limit_outcomes.channel of run-chan broken", rep, err)
	}
}

// TestCurrentSourceAndChamberStored: a run on a station with a current source and
// a temperature chamber is committed with its instruments' kinds (migration 0010;
// before it the instruments table's CHECK refused both and the run could not be
// stored), on a ledger migrated from schema 1.
func TestCurrentSourceAndChamberStored(t *testing.T) {
	path, l := openSchema1Demo(t)
	rec := makeRecord("run-kinds", "SN-KINDS", sequencer.Pass, recordShape{sweeps: 1, points: 2, readings: 2})
	rec.Instruments[0].Kind = sequencer.CurrentSource
	rec.Instruments = append(rec.Instruments, sequencer.InstrumentRef{Role: "chamber", Kind: sequencer.ThermalRole, Address: "sim://chamber", Asset: "CH-1",
		Identity: instruments.Identity{Maker: "SIM", Model: "TC-150", Serial: "0004", Firmware: "1.0"}})
	mustRecord(t, l, rec, "S2")
	got, err := l.Run(ctx, "run-kinds")
	if err != nil {
		t.Fatal(err)
	}
	requireSameRecord(t, rec, got)
	var kinds string
	if err := rawDB(t, path).QueryRow(`SELECT group_concat(role || '=' || kind, ' ') FROM (SELECT * FROM instruments WHERE run_id = 'run-kinds' ORDER BY rowid)`).Scan(&kinds); err != nil ||
		kinds != "source=current_source meter=meter dut=dut_port chamber=thermal" {
		t.Errorf("instruments %q (%v)", kinds, err)
	}
}
