package ledger_test

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"slices"
	"strings"
	"testing"
	"time"

	"trimline/limits"
	"trimline/reports/ledger"
	"trimline/sequencer"
)

var ctx = context.Background()

func TestRoundTrip(t *testing.T) {
	l, path := openLedger(t)
	rec := makeRecord("run-1", "SN0001", sequencer.Pass, benchShape)
	rec.Sweeps[0].Points[0].Readings[0].Time = time.Now() // local zone with a monotonic reading
	want := totalReadings(rec)
	if want != 176 {
		t.Fatalf("test record has %d readings, want 176", want)
	}

	cert := mustRecord(t, l, rec, "TL1")
	if cert != "TL1-000001" {
		t.Errorf("certificate %q, want TL1-000001", cert)
	}
	got, err := l.Run(ctx, "run-1")
	if err != nil {
		t.Fatal(err)
	}
	requireSameRecord(t, rec, got)

	counts, err := l.Counts(ctx)
	if err != nil {
		t.Fatal(err)
	}
	wantCounts := map[string]int{
		"units": 1, "runs": 1, "readings": want, "results": len(rec.Results),
		"limit_outcomes": len(rec.Outcomes), "documents": 0, "fits": len(rec.Fits),
		"trims": len(rec.Trims), "files": len(rec.Files), "instruments": len(rec.Instruments),
		"blobs": 0, "audit_trail": 1, // no file contents given; one "create" entry
	}
	if !reflect.DeepEqual(counts, wantCounts) {
		t.Errorf("Counts = %v\nwant     %v", counts, wantCounts)
	}

	// The stored document is exactly json.Marshal of the record, with its SHA-256.
	marshaled, err := json.Marshal(rec)
	if err != nil {
		t.Fatal(err)
	}
	var doc []byte
	var sum string
	if err := rawDB(t, path).QueryRow(`SELECT record_json, record_sha256 FROM runs WHERE run_id = 'run-1'`).Scan(&doc, &sum); err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(doc, marshaled) {
		t.Errorf("record_json is not json.Marshal(rec):\n%s\nvs\n%s", doc, marshaled)
	}
	if s := sha256.Sum256(marshaled); sum != hex.EncodeToString(s[:]) {
		t.Errorf("record_sha256 %s, want %x", sum, s)
	}

	runs, err := l.Runs(ctx, "")
	if err != nil {
		t.Fatal(err)
	}
	wantSummary := ledger.RunSummary{RunID: "run-1", Serial: "SN0001", Product: "AMP-10", Revision: "C", Station: "EOL-2",
		Verdict: sequencer.Pass, Certificate: "TL1-000001", Started: rec.Started.UTC(), Finished: rec.Finished.UTC()}
	if len(runs) != 1 || runs[0] != wantSummary {
		t.Errorf("Runs = %+v\nwant   [%+v]", runs, wantSummary)
	}

	// Infinite degrees of freedom (every contribution had infinite dof) and a
	// REVIEW verdict: the record comes back exactly, the JSON says "Infinity", the
	// row has dof NULL beside a non-NULL u, and REVIEW gets the next number.
	inf := makeRecord("run-2", "SN0001", sequencer.Review, benchShape)
	inf.Results[0].Unc.DOF = math.Inf(1)
	inf.Outcomes[0].Decision.DOF = limits.DegreesOfFreedom(math.Inf(1)) // written 0 in the decision's JSON
	inf.Outcomes[0].Decision.Zone = "conditional pass"
	if cert := mustRecord(t, l, inf, "TL1"); cert != "TL1-000002" {
		t.Errorf("REVIEW run: certificate %q, want TL1-000002", cert)
	}
	got, err = l.Run(ctx, "run-2")
	if err != nil {
		t.Fatal(err)
	}
	requireSameRecord(t, inf, got)
	if !math.IsInf(got.Results[0].Unc.DOF, 1) {
		t.Errorf("dof came back as %v, want +Inf", got.Results[0].Unc.DOF)
	}
	db := rawDB(t, path)
	if err := db.QueryRow(`SELECT record_json FROM runs WHERE run_id = 'run-2'`).Scan(&doc); err != nil {
		t.Fatal(err)
	}
	if !bytes.Contains(doc, []byte(`"uncertainty":{"u":0.0000012,"dof":"Infinity","k":2.06,"U":0.000002472,"method":"GUM"}`)) {
		t.Errorf("record_json does not hold the infinite dof as \"Infinity\":\n%s", doc)
	}
	if !bytes.Contains(doc, []byte(`"u":1.2,"U":2.472,"k":2.06,"dof":0,`)) {
		t.Errorf("record_json does not hold the decision's infinite dof as 0, as records always have:\n%s", doc)
	}
	var u, dof *float64
	if err := db.QueryRow(`SELECT u, dof FROM results WHERE run_id = 'run-2' AND name = 'post_offset'`).Scan(&u, &dof); err != nil {
		t.Fatal(err)
	}
	if u == nil || *u != 1.2e-6 || dof != nil {
		t.Errorf("post_offset u %v dof %v, want 1.2e-06 and NULL (infinite)", u, dof)
	}
}

func TestRoundTripRows(t *testing.T) {
	l, path := openLedger(t)
	rec := makeRecord("run-rows", "SN0002", sequencer.Fail, recordShape{sweeps: 2, points: 3, readings: 2})
	mustRecord(t, l, rec, "TL1")
	db := rawDB(t, path)

	// Readings come back in order with their stimulus, value, flag and UTC time.
	rows, err := db.Query(`SELECT sweep, point_index, reading_index, stimulus_v, value_v, flag, taken_at FROM readings WHERE run_id = ? ORDER BY rowid`, rec.RunID)
	if err != nil {
		t.Fatal(err)
	}
	defer rows.Close()
	var i int
	for s, sw := range rec.Sweeps {
		for p, pt := range sw.Points {
			for r, rd := range pt.Readings {
				if !rows.Next() {
					t.Fatalf("only %d reading rows", i)
				}
				var sweep, flag, at string
				var pi, ri int
				var x, v float64
				if err := rows.Scan(&sweep, &pi, &ri, &x, &v, &flag, &at); err != nil {
					t.Fatal(err)
				}
				wantAt := rd.Time.UTC().Format("2006-01-02T15:04:05.000000000Z")
				if sweep != sw.Name || pi != p || ri != r || x != pt.Stimulus || v != rd.Value || flag != "ok" || at != wantAt {
					t.Errorf("reading %d/%d/%d row = %s %d %d %g %g %s %s", s, p, r, sweep, pi, ri, x, v, flag, at)
				}
				i++
			}
		}
	}
	if rows.Next() {
		t.Error("more reading rows than readings")
	}

	var verdict, reasons, cert, started string
	var fault *string
	if err := db.QueryRow(`SELECT verdict, reasons, certificate, fault, started FROM runs`).Scan(&verdict, &reasons, &cert, &fault, &started); err != nil {
		t.Fatal(err)
	}
	if verdict != "FAIL" || reasons != `["gain: post_gain_error out of limit"]` || cert != "TL1-000001" || fault != nil ||
		started != "2025-06-03T07:14:27.123456789Z" {
		t.Errorf("run row: %s %s %s %v %s", verdict, reasons, cert, fault, started)
	}
	var firstSeen, lastSeen string
	if err := db.QueryRow(`SELECT first_seen, last_seen FROM units WHERE serial = 'SN0002'`).Scan(&firstSeen, &lastSeen); err != nil {
		t.Fatal(err)
	}
	if firstSeen != "2025-06-03T07:14:27.123456789Z" || lastSeen != "2025-06-03T07:15:08.123456796Z" {
		t.Errorf("unit seen %s .. %s", firstSeen, lastSeen)
	}
	var values, cov string
	if err := db.QueryRow(`SELECT values_json FROM limit_outcomes WHERE name = 'linearity'`).Scan(&values); err != nil {
		t.Fatal(err)
	}
	if err := db.QueryRow(`SELECT cov_json FROM fits WHERE sweep = 'verify'`).Scan(&cov); err != nil {
		t.Fatal(err)
	}
	if values != `{"nonlinearity":1.2,"offset_code":2101}` || cov != `[[1.1e-12,-3e-14],[-3e-14,2.5e-13]]` {
		t.Errorf("values_json %s, cov_json %s", values, cov)
	}
	var identity string
	if err := db.QueryRow(`SELECT identity FROM instruments WHERE role = 'meter'`).Scan(&identity); err != nil {
		t.Fatal(err)
	}
	if identity != "SIM,DMM6,0002,2.3" {
		t.Errorf("identity %q", identity)
	}

	// Conditions and coverage of the run.
	var coverage, ambient *float64
	var source *string
	if err := db.QueryRow(`SELECT coverage, ambient_c, ambient_source FROM runs`).Scan(&coverage, &ambient, &source); err != nil {
		t.Fatal(err)
	}
	if coverage == nil || *coverage != 0.9545 || ambient == nil || *ambient != 23.1 || source == nil || *source != "entered" {
		t.Errorf("runs coverage %v ambient_c %v ambient_source %v", deref(coverage), deref(ambient), deref(source))
	}

	// Uncertainty of each result; all NULL where it was not evaluated.
	type uncRow struct {
		u, dof, k, expanded *float64
		method              *string
	}
	wantUnc := map[string]string{
		"post_offset":     "1.2e-06 37.4 2.06 2.472e-06 GUM",
		"post_gain_error": "3e-06 120 2 6e-06 MC",
		"nonlinearity":    "4e-07 9 2.32 9.28e-07 NULL",
		"offset_code":     "NULL NULL NULL NULL NULL",
	}
	rs, err := db.Query(`SELECT name, u, dof, k, expanded_u, method FROM results`)
	if err != nil {
		t.Fatal(err)
	}
	defer rs.Close()
	n := 0
	for rs.Next() {
		var name string
		var r uncRow
		if err := rs.Scan(&name, &r.u, &r.dof, &r.k, &r.expanded, &r.method); err != nil {
			t.Fatal(err)
		}
		got := fmt.Sprint(deref(r.u), " ", deref(r.dof), " ", deref(r.k), " ", deref(r.expanded), " ", deref(r.method))
		if got != wantUnc[name] {
			t.Errorf("results %s: u dof k U method = %s, want %s", name, got, wantUnc[name])
		}
		n++
	}
	if err := rs.Err(); err != nil || n != len(wantUnc) {
		t.Errorf("%d result rows, %v", n, err)
	}

	// Decision columns: filled for toleranced limits, NULL for an expression limit.
	wantDec := map[string]string{
		"offset":    "guarded 1 2.472 -50 50 -47.528 47.528 pass 1.5e-300 20.23 0 0 guarded acceptance, w = 1·U: pass",
		"gain":      "simple 0 0 NULL 100 NULL NULL fail 0 NULL 1 1 simple acceptance: pass",
		"linearity": "NULL NULL NULL NULL NULL NULL NULL NULL NULL NULL NULL NULL NULL",
	}
	ds, err := db.Query(`SELECT name, rule, guard_factor, guard, lower, upper, accept_lower, accept_upper, zone, p_outside, tur, tur_low, binary, statement FROM limit_outcomes`)
	if err != nil {
		t.Fatal(err)
	}
	defer ds.Close()
	n = 0
	for ds.Next() {
		var name string
		var rule, zone, statement *string
		var r, w, lo, hi, alo, ahi, p, tur *float64
		var turLow, binary *int64
		if err := ds.Scan(&name, &rule, &r, &w, &lo, &hi, &alo, &ahi, &zone, &p, &tur, &turLow, &binary, &statement); err != nil {
			t.Fatal(err)
		}
		got := strings.Join([]string{deref(rule), deref(r), deref(w), deref(lo), deref(hi), deref(alo), deref(ahi),
			deref(zone), deref(p), deref(tur), deref(turLow), deref(binary), deref(statement)}, " ")
		if got != wantDec[name] {
			t.Errorf("limit_outcomes %s:\n got %s\nwant %s", name, got, wantDec[name])
		}
		n++
	}
	if err := ds.Err(); err != nil || n != len(wantDec) {
		t.Errorf("%d limit outcome rows, %v", n, err)
	}
}

// deref prints a nullable column value, "NULL" for nil.
func deref[T any](p *T) string {
	if p == nil {
		return "NULL"
	}
	return fmt.Sprint(*p)
}

// A real run holds NaN and ±Inf (a flagged reading, an invalid result, the residual
// SD of a fit without degrees of freedom); json.Marshal refuses them, the ledger must not.
func TestRoundTripNonFinite(t *testing.T) {
	l, path := openLedger(t)
	rec := makeRecord("run-nan", "SN0003", sequencer.Fail, recordShape{sweeps: 2, points: 4, readings: 3, nonFinite: true})
	if _, err := json.Marshal(rec); err == nil {
		t.Fatal("test record should be one json.Marshal refuses")
	}
	mustRecord(t, l, rec, "TL1")
	got, err := l.Run(ctx, rec.RunID)
	if err != nil {
		t.Fatal(err)
	}
	requireSameRecord(t, rec, got)

	var nulls int
	if err := rawDB(t, path).QueryRow(`SELECT count(*) FROM readings WHERE value_v IS NULL`).Scan(&nulls); err != nil {
		t.Fatal(err)
	}
	if nulls != 3 {
		t.Errorf("%d readings with NULL value_v, want 3 (NaN, +Inf, -Inf)", nulls)
	}
}

func TestCanonicalJSONMatchesMarshal(t *testing.T) {
	for _, shape := range []recordShape{benchShape, {}, {sweeps: 1, points: 1, readings: 0}} {
		rec := makeRecord("r", "s", sequencer.Fail, shape)
		rec.Reasons = []string{} // omitempty, empty but not nil
		rec.Outcomes[0].Uses = nil
		rec.Outcomes[1].Values = map[string]float64{}
		rec.Results[0].Value = math.Copysign(0, -1)
		rec.Files[0].Title = "<&>\u2028 \"quoted\" \x01"
		rec.Fits = append(rec.Fits, sequencer.FitSummary{Slope: 1e21, Intercept: 1e-7, ResidualSD: 123456789012345678})
		want, err := json.Marshal(rec)
		if err != nil {
			t.Fatal(err)
		}
		got, err := ledger.CanonicalJSON(rec)
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(got, want) {
			t.Fatalf("canonical JSON differs from json.Marshal:\n%s\n%s", got, want)
		}
		var viaStd, viaExt sequencer.Record
		if err := json.Unmarshal(want, &viaStd); err != nil {
			t.Fatal(err)
		}
		if err := ledger.DecodeExtended(want, &viaExt); err != nil {
			t.Fatal(err)
		}
		requireSameRecord(t, &viaStd, &viaExt)
	}
	if _, err := ledger.CanonicalJSON(struct{ C chan int }{}); err == nil {
		t.Error("a channel should be refused")
	}
}

func TestCertificateNumbers(t *testing.T) {
	l, _ := openLedger(t)
	steps := []struct {
		verdict sequencer.Verdict
		prefix  string
		want    string
	}{
		{sequencer.Pass, "TL1", "TL1-000001"},
		{sequencer.Fail, "TL1", "TL1-000002"},
		{sequencer.Fault, "TL1", ""},
		{sequencer.Aborted, "TL1", ""},
		{sequencer.Pass, "TL2", "TL2-000001"},
		{sequencer.Fault, "", ""}, // no prefix needed without a certificate
		{sequencer.Pass, "TL1", "TL1-000003"},
		{sequencer.Fail, "TL2", "TL2-000002"},
		{sequencer.Pass, "TL2", "TL2-000003"},
		{sequencer.Pass, "TL1", "TL1-000004"},
	}
	for i, s := range steps {
		rec := makeRecord(fmt.Sprintf("run-%02d", i), "SN1", s.verdict, recordShape{sweeps: 1, points: 2, readings: 1})
		got := mustRecord(t, l, rec, s.prefix)
		if got != s.want {
			t.Errorf("step %d (%s, %q): certificate %q, want %q", i, s.verdict, s.prefix, got, s.want)
		}
	}
	runs, err := l.Runs(ctx, "SN1")
	if err != nil {
		t.Fatal(err)
	}
	for _, r := range runs {
		var i int
		fmt.Sscanf(r.RunID, "run-%d", &i)
		if r.Certificate != steps[i].want {
			t.Errorf("run %s stored certificate %q, want %q", r.RunID, r.Certificate, steps[i].want)
		}
	}
}

// A run that is refused or fails takes no number with it: the next one is consecutive.
func TestCertificateNoGapAfterFailure(t *testing.T) {
	l, _ := openLedger(t)
	shape := recordShape{sweeps: 1, points: 2, readings: 1}
	mustRecord(t, l, makeRecord("a", "SN1", sequencer.Pass, shape), "P")

	_, err := l.RecordRun(ctx, makeRecord("a", "SN1", sequencer.Pass, shape), "P")
	if !errors.Is(err, ledger.ErrDuplicateRun) {
		t.Errorf("duplicate run: %v, want ErrDuplicateRun", err)
	}
	bad := makeRecord("b", "SN1", sequencer.Pass, shape)
	bad.Sweeps[0].Points[0].Readings[0].Time = time.Date(10000, 1, 1, 0, 0, 0, 0, time.UTC) // not RFC 3339
	if _, err := l.RecordRun(ctx, bad, "P"); err == nil {
		t.Error("a record with a year-10000 time should be refused")
	}
	canceled, cancel := context.WithCancel(ctx)
	cancel()
	if _, err := l.RecordRun(canceled, makeRecord("c", "SN1", sequencer.Pass, shape), "P"); !errors.Is(err, context.Canceled) {
		t.Errorf("canceled context: %v", err)
	}
	for _, c := range []struct {
		name   string
		rec    *sequencer.Record
		prefix string
	}{
		{"nil record", nil, "P"},
		{"no run id", makeRecord("", "SN1", sequencer.Pass, shape), "P"},
		{"no serial", makeRecord("d", "", sequencer.Pass, shape), "P"},
		{"bad verdict", makeRecord("d", "SN1", "MAYBE", shape), "P"},
		{"empty prefix", makeRecord("d", "SN1", sequencer.Pass, shape), ""},
		{"space in prefix", makeRecord("d", "SN1", sequencer.Fail, shape), "T L"},
		{"slash in prefix", makeRecord("d", "SN1", sequencer.Fail, shape), "T/L"},
	} {
		if _, err := l.RecordRun(ctx, c.rec, c.prefix); !errors.Is(err, ledger.ErrInvalid) {
			t.Errorf("%s: %v, want ErrInvalid", c.name, err)
		}
	}
	if got := mustRecord(t, l, makeRecord("e", "SN1", sequencer.Fail, shape), "P"); got != "P-000002" {
		t.Errorf("after failures: %q, want P-000002", got)
	}
	counts, err := l.Counts(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if counts["runs"] != 2 || counts["readings"] != 4 {
		t.Errorf("counts after failures %v, want 2 runs and 4 readings", counts)
	}
}

func TestCertificateSequenceExhausted(t *testing.T) {
	l, path := openLedger(t)
	if _, err := rawDB(t, path).Exec(`INSERT INTO cert_sequences (prefix, last) VALUES ('X', 999998)`); err != nil {
		t.Fatal(err)
	}
	shape := recordShape{sweeps: 1, points: 1, readings: 1}
	if got := mustRecord(t, l, makeRecord("a", "S", sequencer.Pass, shape), "X"); got != "X-999999" {
		t.Errorf("last number %q", got)
	}
	if _, err := l.RecordRun(ctx, makeRecord("b", "S", sequencer.Pass, shape), "X"); !errors.Is(err, ledger.ErrSequenceExhausted) {
		t.Errorf("after 999999: %v, want ErrSequenceExhausted", err)
	}
}

func TestRunsNewestFirstAndFiltered(t *testing.T) {
	l, _ := openLedger(t)
	shape := recordShape{sweeps: 1, points: 1, readings: 1}
	base := time.Date(2025, 1, 1, 8, 0, 0, 0, time.UTC)
	// Recorded out of order; different zones; two serials.
	for i, off := range []int{3, 1, 4, 2, 5} {
		rec := makeRecord(fmt.Sprintf("r%d", off), fmt.Sprintf("S%d", off%2), sequencer.Fault, shape)
		rec.Started = base.Add(time.Duration(off) * time.Hour).In(time.FixedZone("z", (i-2)*3600))
		rec.Finished = rec.Started.Add(time.Minute)
		mustRecord(t, l, rec, "")
	}
	ids := func(serial string) []string {
		runs, err := l.Runs(ctx, serial)
		if err != nil {
			t.Fatal(err)
		}
		out := []string{}
		for _, r := range runs {
			out = append(out, r.RunID)
			if r.Started.Location() != time.UTC || r.Verdict != sequencer.Fault || r.Certificate != "" {
				t.Errorf("summary %+v", r)
			}
		}
		return out
	}
	if got := ids(""); !slices.Equal(got, []string{"r5", "r4", "r3", "r2", "r1"}) {
		t.Errorf("Runs(\"\") = %v", got)
	}
	if got := ids("S1"); !slices.Equal(got, []string{"r5", "r3", "r1"}) {
		t.Errorf("Runs(S1) = %v", got)
	}
	if got := ids("nobody"); len(got) != 0 {
		t.Errorf("Runs(nobody) = %v", got)
	}
	counts, _ := l.Counts(ctx)
	if counts["units"] != 2 || counts["runs"] != 5 {
		t.Errorf("counts %v", counts)
	}
}

func TestRunNotFound(t *testing.T) {
	l, _ := openLedger(t)
	if _, err := l.Run(ctx, "nope"); !errors.Is(err, ledger.ErrNotFound) {
		t.Errorf("Run(nope): %v, want ErrNotFound", err)
	}
}

func TestAppendOnlyAndTamperDetected(t *testing.T) {
	l, path := openLedger(t)
	mustRecord(t, l, makeRecord("r", "S", sequencer.Pass, recordShape{sweeps: 1, points: 2, readings: 2}), "P")
	db := rawDB(t, path)
	for _, q := range []string{
		`UPDATE runs SET verdict = 'FAIL'`,
		`DELETE FROM runs`,
		`UPDATE readings SET value_v = 0`,
		`DELETE FROM readings`,
		`UPDATE results SET value = 0`,
		`DELETE FROM limit_outcomes`,
		`UPDATE cert_sequences SET last = 0`,
		`DELETE FROM cert_sequences`,
	} {
		if _, err := db.Exec(q); err == nil {
			t.Errorf("%s: allowed", q)
		}
	}
	if _, err := db.Exec(`DROP TRIGGER runs_no_update`); err != nil {
		t.Fatal(err)
	}
	if _, err := db.Exec(`UPDATE runs SET record_json = replace(record_json, '"PASS"', '"FAIL"')`); err != nil {
		t.Fatal(err)
	}
	if _, err := l.Run(ctx, "r"); !errors.Is(err, ledger.ErrCorrupt) {
		t.Errorf("tampered record: %v, want ErrCorrupt", err)
	}
}

func TestAddDocument(t *testing.T) {
	l, path := openLedger(t)
	created := time.Date(2025, 6, 3, 12, 0, 0, 42, zone)
	l.Now = func() time.Time { return created }
	shape := recordShape{sweeps: 1, points: 2, readings: 2}
	cert := mustRecord(t, l, makeRecord("p", "S", sequencer.Pass, shape), "TL1")
	mustRecord(t, l, makeRecord("f", "S", sequencer.Fault, shape), "TL1")
	pdf := []byte("%PDF-1.4 certificate")
	sum := sha256.Sum256(pdf)
	hexSum := hex.EncodeToString(sum[:])

	if err := l.AddDocument(ctx, "p", cert, "/certs/"+cert+".pdf", hexSum, int64(len(pdf))); err != nil {
		t.Fatal(err)
	}
	var number, p, s, at string
	var size int64
	if err := rawDB(t, path).QueryRow(`SELECT number, path, sha256, size, created_at FROM documents`).Scan(&number, &p, &s, &size, &at); err != nil {
		t.Fatal(err)
	}
	if number != cert || p != "/certs/TL1-000001.pdf" || s != hexSum || size != int64(len(pdf)) || at != "2025-06-03T10:00:00.000000042Z" {
		t.Errorf("document row %s %s %s %d %s", number, p, s, size, at)
	}
	// Upper-case hex is accepted and stored in lower case; a re-issue is another row.
	if err := l.AddDocument(ctx, "p", cert, "/certs/again.pdf", strings.ToUpper(hexSum), 1); err != nil {
		t.Fatal(err)
	}
	counts, _ := l.Counts(ctx)
	if counts["documents"] != 2 {
		t.Errorf("documents %d, want 2", counts["documents"])
	}

	for _, c := range []struct {
		name              string
		run, number, path string
		sum               string
		size              int64
		want              error
	}{
		{"unknown run", "zz", cert, "x.pdf", hexSum, 1, ledger.ErrNotFound},
		{"wrong number", "p", "TL1-000002", "x.pdf", hexSum, 1, ledger.ErrInvalid},
		{"run without certificate", "f", "", "x.pdf", hexSum, 1, ledger.ErrInvalid},
		{"short hash", "p", cert, "x.pdf", hexSum[:10], 1, ledger.ErrInvalid},
		{"not hex", "p", cert, "x.pdf", "g" + hexSum[1:], 1, ledger.ErrInvalid},
		{"empty path", "p", cert, "", hexSum, 1, ledger.ErrInvalid},
		{"negative size", "p", cert, "x.pdf", hexSum, -1, ledger.ErrInvalid},
	} {
		if err := l.AddDocument(ctx, c.run, c.number, c.path, c.sum, c.size); !errors.Is(err, c.want) {
			t.Errorf("%s: %v, want %v", c.name, err, c.want)
		}
	}
}

func TestMigrations(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "ledger.db")
	l, err := ledger.Open(ctx, path)
	if err != nil {
		t.Fatal(err)
	}
	first, err := l.Migrations(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if len(first) != ledger.LatestMigration() || first[0].Version != 1 || first[0].Name != "init" || first[1].Version != 2 || first[1].Name != "uncertainty" ||
		first[2].Version != 3 || first[2].Name != "tamper_evidence" ||
		time.Since(first[0].AppliedAt) > time.Minute || first[1].AppliedAt.Before(first[0].AppliedAt) || first[2].AppliedAt.Before(first[1].AppliedAt) {
		t.Fatalf("Migrations = %+v", first)
	}
	mustRecord(t, l, makeRecord("r", "S", sequencer.Pass, recordShape{sweeps: 1, points: 1, readings: 1}), "P")
	l.Close()

	// Reopening applies nothing again and keeps the data.
	l, err = ledger.Open(ctx, path)
	if err != nil {
		t.Fatal(err)
	}
	again, err := l.Migrations(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.EqualFunc(first, again, func(a, b ledger.Migration) bool {
		return a.Version == b.Version && a.Name == b.Name && a.AppliedAt.Equal(b.AppliedAt)
	}) {
		t.Errorf("after reopen Migrations = %+v, want %+v", again, first)
	}
	if got := mustRecord(t, l, makeRecord("r2", "S", sequencer.Pass, recordShape{sweeps: 1, points: 1, readings: 1}), "P"); got != "P-000002" {
		t.Errorf("after reopen %q", got)
	}
	l.Close()

	// A file migrated by a newer program is refused.
	db := rawDB(t, path)
	if _, err := db.Exec(`INSERT INTO schema_migrations (version, name, applied_at) VALUES (?, 'future', '2030-01-01T00:00:00.000000000Z')`, ledger.LatestMigration()+1); err != nil {
		t.Fatal(err)
	}
	if _, err := ledger.Open(ctx, path); !errors.Is(err, ledger.ErrSchemaTooNew) {
		t.Errorf("newer schema: %v, want ErrSchemaTooNew", err)
	}
	// So is one whose migration 1 is not ours.
	if _, err := db.Exec(`DELETE FROM schema_migrations WHERE name = 'future'; UPDATE schema_migrations SET name = 'other' WHERE version = 1`); err != nil {
		t.Fatal(err)
	}
	if _, err := ledger.Open(ctx, path); !errors.Is(err, ledger.ErrCorrupt) {
		t.Errorf("renamed migration: %v, want ErrCorrupt", err)
	}
}

func TestOpenPaths(t *testing.T) {
	if _, err := ledger.Open(ctx, ""); !errors.Is(err, ledger.ErrInvalid) {
		t.Errorf("empty path: %v", err)
	}
	if _, err := ledger.Open(ctx, filepath.Join(t.TempDir(), "missing", "ledger.db")); err == nil {
		t.Error("a missing directory should fail")
	}
	dir := t.TempDir()
	name := "odd name?x=1#frag%20.db"
	l, err := ledger.Open(ctx, filepath.Join(dir, name))
	if err != nil {
		t.Fatal(err)
	}
	defer l.Close()
	if _, err := os.Stat(filepath.Join(dir, name)); err != nil {
		t.Errorf("ledger not created under its own name: %v", err)
	}
	var mode string
	if err := rawDB(t, filepath.Join(dir, "odd name%3fx=1%23frag%2520.db")).QueryRow(`PRAGMA journal_mode`).Scan(&mode); err != nil || mode != "wal" {
		t.Errorf("journal mode %q, %v", mode, err)
	}
}
