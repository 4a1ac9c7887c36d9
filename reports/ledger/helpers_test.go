package ledger_test

import (
	"context"
	"database/sql"
	"fmt"
	"math"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
	"time"

	"trimline/instruments"
	"trimline/limits"
	"trimline/reports/ledger"
	"trimline/sequencer"
)

// recordShape says how big a test record is.
type recordShape struct {
	sweeps, points, readings int
	nonFinite                bool // put NaN and ±Inf where real runs have them
}

// benchShape is the benchmark's run: a pre-trim and a verify sweep of 11 points each
// (22 points) with 8 readings per point, 176 readings.
var benchShape = recordShape{sweeps: 2, points: 11, readings: 8}

var zone = time.FixedZone("station", 2*3600)

// makeRecord builds a plausible record. Times are in a non-UTC zone with nanoseconds,
// so a round trip that dropped either would show.
func makeRecord(runID, serial string, verdict sequencer.Verdict, shape recordShape) *sequencer.Record {
	start := time.Date(2025, 6, 3, 9, 14, 27, 123456789, zone)
	rec := &sequencer.Record{
		Schema:   sequencer.RecordSchema,
		RunID:    runID,
		Serial:   serial,
		Product:  "AMP-10",
		Revision: "C",
		Station:  "EOL-2",
		Operator: "op17",
		Software: "trimline 0.1.0",
		Started:  start,
		Finished: start.Add(41*time.Second + 7),
		Files: []sequencer.FileRef{
			{Kind: "station", Name: "station.yaml", Title: "EOL station 2", SHA256: strings.Repeat("ab", 32)},
			{Kind: "sequence", Name: "amp10.yaml", Title: "AMP-10 trim <rev C> & verify", SHA256: strings.Repeat("cd", 32)},
			{Kind: "limits", Name: "amp10-limits.yaml", Title: "AMP-10 limits", SHA256: strings.Repeat("ef", 32)},
		},
		Instruments: []sequencer.InstrumentRef{
			{Role: "source", Address: "sim://source", Asset: "A-100", CalDue: "2026-01-31", Accuracy: "0.01 % + 50 uV",
				Identity: instruments.Identity{Maker: "SIM", Model: "SRC1", Serial: "0001", Firmware: "1.0"}},
			{Role: "meter", Address: "sim://meter", Asset: "A-101", CalDue: "2026-02-28",
				Identity: instruments.Identity{Maker: "SIM", Model: "DMM6", Serial: "0002", Firmware: "2.3"}},
			{Role: "dut", Address: "sim://dut", Asset: "", CalDue: "",
				Identity: instruments.Identity{Maker: "0", Model: "0", Serial: "0", Firmware: "0"}},
		},
		IdealGain:   2,
		IdealOffset: 0.5,
		FullScale:   10,
		Verdict:     verdict,
	}
	names := []string{"pre-trim", "verify", "extra-1", "extra-2"}
	t := start
	for s := range shape.sweeps {
		sw := sequencer.Sweep{Name: names[s%len(names)]}
		for p := range shape.points {
			x := -2.0 + 4.0*float64(p)/float64(max(shape.points-1, 1))
			pt := sequencer.Point{Stimulus: x}
			sum := 0.0
			for r := range shape.readings {
				t = t.Add(100*time.Millisecond + time.Duration(r))
				v := 0.5 + 2*x + 1e-6*float64(r-3) + 1.0/3.0*1e-7
				pt.Readings = append(pt.Readings, instruments.Reading{Value: v, Flag: instruments.FlagNone, Time: t})
				sum += v
			}
			if shape.readings > 0 {
				pt.Mean = sum / float64(shape.readings)
				pt.SD = 2.449e-6
				pt.Valid = shape.readings
			}
			sw.Points = append(sw.Points, pt)
		}
		rec.Sweeps = append(rec.Sweeps, sw)
		rec.Fits = append(rec.Fits, sequencer.FitSummary{
			Sweep: sw.Name, Slope: 2.000013, Intercept: 0.4999871,
			Cov:        [2][2]float64{{1.1e-12, -3e-14}, {-3e-14, 2.5e-13}},
			ResidualSD: 1.7e-6, DOF: shape.points - 2,
			Residuals:    make([]float64, shape.points),
			Nonlinearity: 1.2e-6,
		})
	}
	rec.Trims = []sequencer.TrimCode{
		{DAC: "offset", Before: 2048, Code: 2101, Ideal: 2100.62, Readback: 2101, Stored: true},
		{DAC: "gain", Before: 2048, Code: 1990, Ideal: 1989.71, Readback: 1990, Stored: true},
	}
	rec.Coverage = 0.9545
	rec.Conditions = sequencer.Conditions{AmbientC: 23.1, AmbientSource: "entered"}
	rec.Results = []sequencer.Result{
		{Name: "post_offset", Value: 3.1e-6, Unit: "V", Valid: true,
			Unc: sequencer.Uncertainty{Std: 1.2e-6, DOF: 37.4, K: 2.06, Expanded: 2.472e-6, Method: "GUM"}},
		{Name: "post_gain_error", Value: -1.2e-5, Unit: "ratio", Valid: true,
			Unc: sequencer.Uncertainty{Std: 3e-6, DOF: 120, K: 2.0, Expanded: 6e-6, Method: "MC"}},
		{Name: "nonlinearity", Value: 1.2e-6, Unit: "ratio", Valid: true,
			Unc: sequencer.Uncertainty{Std: 4e-7, DOF: 9, K: 2.32, Expanded: 9.28e-7}},
		{Name: "offset_code", Value: 2101, Unit: "code", Valid: true}, // exact: no uncertainty
	}
	rec.Outcomes = []limits.Outcome{
		{Name: "offset", Description: "post-trim offset", Expr: "abs(post_offset) <= 50", Unit: "uV",
			Uses: []string{"post_offset"}, Values: map[string]float64{"post_offset": 3.1}, Pass: true,
			Decision: &limits.Decision{Result: "post_offset", Lower: f64(-50), Upper: f64(50),
				Rule: "guarded", GuardFactor: 1, Guard: 2.472, AcceptLower: f64(-47.528), AcceptUpper: f64(47.528),
				Value: 3.1, Std: 1.2, U: 2.472, K: 2.06, DOF: 37.4, Binary: false, Zone: limits.ZonePass,
				POutside: 1.5e-300, TUR: 20.23, Statement: "guarded acceptance, w = 1·U: pass"}},
		{Name: "gain", Description: "post-trim gain error", Expr: "abs(post_gain_error) <= 100", Unit: "ppm",
			Uses: []string{"post_gain_error"}, Values: map[string]float64{"post_gain_error": -12}, Pass: true,
			Decision: &limits.Decision{Result: "post_gain_error", Upper: f64(100),
				Rule: "simple", Value: -12, Std: 3, U: 6, K: 2, DOF: 120, Binary: true, Zone: limits.ZonePass,
				TURLow: true, Statement: "simple acceptance: pass"}},
		{Name: "linearity", Expr: "nonlinearity < 10 && offset_code < 4000", Unit: "ppm",
			Uses: []string{"nonlinearity", "offset_code"}, Values: map[string]float64{"nonlinearity": 1.2, "offset_code": 2101}, Pass: true},
	}
	switch verdict {
	case sequencer.Fail:
		rec.Outcomes[1].Pass = false
		rec.Outcomes[1].Reason = "post_gain_error = -12 ppm, limit abs(x) <= 100 \"ppm\""
		rec.Outcomes[1].Decision.Zone = limits.ZoneFail
		rec.Reasons = []string{"gain: post_gain_error out of limit"}
	case sequencer.Fault:
		rec.Reasons = []string{"meter did not answer"}
		rec.Fault = "meter: read: timeout after 2s"
	case sequencer.Aborted:
		rec.Reasons = []string{"aborted by operator"}
		rec.Fault = "context canceled"
	}
	if shape.nonFinite && len(rec.Sweeps) > 0 && len(rec.Sweeps[0].Points) > 1 && shape.readings > 1 {
		p := &rec.Sweeps[0].Points[1]
		p.Readings[0] = instruments.Reading{Value: math.NaN(), Flag: instruments.FlagNaN, Time: p.Readings[0].Time}
		p.Readings[1] = instruments.Reading{Value: math.Inf(1), Flag: instruments.FlagOverload, Time: p.Readings[1].Time}
		rec.Sweeps[0].Points[2].Readings[0].Value = math.Inf(-1)
		rec.Sweeps[0].Points[2].Readings[0].Flag = instruments.FlagOverload
		p.SD = math.NaN()
		rec.Fits[0].ResidualSD = math.NaN()
		rec.Fits[0].Cov[1][1] = math.Inf(1)
		rec.Fits[0].Residuals[0] = math.NaN()
		rec.Trims[0].Ideal = math.Inf(-1)
		rec.Results[0] = sequencer.Result{Name: "post_offset", Value: math.NaN(), Unit: "V", Valid: false, Note: "no valid reading at 0 V"}
		rec.Outcomes[0].Values["post_offset"] = math.NaN()
		rec.Outcomes[0].Pass = false
		rec.Outcomes[0].Reason = "post_offset is not a valid number"
	}
	return rec
}

func f64(v float64) *float64 { return &v }

// totalReadings counts the readings of rec.
func totalReadings(rec *sequencer.Record) int {
	n := 0
	for _, s := range rec.Sweeps {
		for _, p := range s.Points {
			n += len(p.Readings)
		}
	}
	return n
}

// requireSameRecord fails t unless got equals want field by field: times compared
// with time.Time.Equal, floats equal bit for bit or both NaN, nil and empty slices
// distinguished.
func requireSameRecord(t testing.TB, want, got *sequencer.Record) {
	t.Helper()
	var diffs []string
	diffValues(&diffs, "Record", reflect.ValueOf(want), reflect.ValueOf(got))
	if len(diffs) > 0 {
		if len(diffs) > 20 {
			diffs = append(diffs[:20], fmt.Sprintf("... and %d more", len(diffs)-20))
		}
		t.Fatalf("records differ:\n%s", strings.Join(diffs, "\n"))
	}
}

var timeType = reflect.TypeFor[time.Time]()

func diffValues(diffs *[]string, path string, a, b reflect.Value) {
	add := func(format string, args ...any) { *diffs = append(*diffs, path+": "+fmt.Sprintf(format, args...)) }
	if a.IsValid() != b.IsValid() {
		add("one side is missing")
		return
	}
	if !a.IsValid() {
		return
	}
	if a.Type() != b.Type() {
		add("type %s vs %s", a.Type(), b.Type())
		return
	}
	if a.Type() == timeType {
		ta, tb := a.Interface().(time.Time), b.Interface().(time.Time)
		if !ta.Equal(tb) {
			add("time %s vs %s", ta.Format(time.RFC3339Nano), tb.Format(time.RFC3339Nano))
		}
		return
	}
	switch a.Kind() {
	case reflect.Float32, reflect.Float64:
		fa, fb := a.Float(), b.Float()
		if !(math.IsNaN(fa) && math.IsNaN(fb)) && math.Float64bits(fa) != math.Float64bits(fb) {
			add("%v vs %v", fa, fb)
		}
	case reflect.Pointer, reflect.Interface:
		if a.IsNil() != b.IsNil() {
			add("nil vs non-nil")
			return
		}
		if !a.IsNil() {
			diffValues(diffs, path, a.Elem(), b.Elem())
		}
	case reflect.Slice:
		if a.IsNil() != b.IsNil() {
			add("nil %v vs nil %v", a.IsNil(), b.IsNil())
			return
		}
		fallthrough
	case reflect.Array:
		if a.Len() != b.Len() {
			add("length %d vs %d", a.Len(), b.Len())
			return
		}
		for i := range a.Len() {
			diffValues(diffs, fmt.Sprintf("%s[%d]", path, i), a.Index(i), b.Index(i))
		}
	case reflect.Map:
		if a.IsNil() != b.IsNil() {
			add("nil %v vs nil %v", a.IsNil(), b.IsNil())
			return
		}
		if a.Len() != b.Len() {
			add("%d keys vs %d", a.Len(), b.Len())
		}
		for _, k := range a.MapKeys() {
			bv := b.MapIndex(k)
			if !bv.IsValid() {
				add("key %v missing", k)
				continue
			}
			diffValues(diffs, fmt.Sprintf("%s[%v]", path, k), a.MapIndex(k), bv)
		}
	case reflect.Struct:
		for i := range a.NumField() {
			diffValues(diffs, path+"."+a.Type().Field(i).Name, a.Field(i), b.Field(i))
		}
	default:
		if !reflect.DeepEqual(a.Interface(), b.Interface()) {
			add("%#v vs %#v", a.Interface(), b.Interface())
		}
	}
}

// openLedger opens a fresh ledger in t's temporary directory and closes it at the end.
func openLedger(t testing.TB) (*ledger.Ledger, string) {
	t.Helper()
	path := filepath.Join(t.TempDir(), "ledger.db")
	l, err := ledger.Open(context.Background(), path)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { l.Close() })
	return l, path
}

// oldFile makes a ledger file at path as trimline's first versions did, foreign
// keys and WAL on and only the schema_migrations table in it, and returns it open
// with exec, which runs a statement and fails t if it fails. The caller closes db.
func oldFile(t *testing.T, path string) (db *sql.DB, exec func(q string, args ...any)) {
	t.Helper()
	db, err := sql.Open("sqlite", "file:"+path+"?_pragma=foreign_keys(1)&_pragma=journal_mode(WAL)")
	if err != nil {
		t.Fatal(err)
	}
	exec = func(q string, args ...any) {
		t.Helper()
		if _, err := db.Exec(q, args...); err != nil {
			t.Fatalf("%.60s: %v", q, err)
		}
	}
	exec(`CREATE TABLE schema_migrations (version INTEGER PRIMARY KEY, name TEXT NOT NULL, applied_at TEXT NOT NULL) STRICT`)
	return db, exec
}

// rawDB opens the ledger file directly, for looking at (or damaging) rows.
func rawDB(t testing.TB, path string) *sql.DB {
	t.Helper()
	db, err := sql.Open("sqlite", "file:"+path+"?_pragma=busy_timeout(5000)")
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { db.Close() })
	return db
}

func mustRecord(t testing.TB, l *ledger.Ledger, rec *sequencer.Record, prefix string) string {
	t.Helper()
	cert, err := l.RecordRun(context.Background(), rec, prefix)
	if err != nil {
		t.Fatalf("RecordRun %s: %v", rec.RunID, err)
	}
	return cert
}

// insertRecordRows inserts rec's query rows as the ledger has always written them,
// into the columns the file's tables have (an old schema has fewer; the columns
// added later are NULL for the records of its time, but for those migration
// 0007 and 0008 fill from the record, and the tables 0007 adds, which it fills). exec is oldFile's.
func insertRecordRows(t *testing.T, db *sql.DB, exec func(q string, args ...any), rec *sequencer.Record) {
	t.Helper()
	tables, columns, rows := ledger.RecordRows(rec)
	for _, table := range tables {
		have := map[string]bool{}
		info, err := db.Query(`SELECT name FROM pragma_table_info(?)`, table)
		if err != nil {
			t.Fatal(err)
		}
		for info.Next() {
			var c string
			info.Scan(&c)
			have[c] = true
		}
		info.Close()
		if len(have) == 0 {
			continue // a table of a later migration, which fills it
		}
		for _, r := range rows[table] {
			var cols []string
			var args []any
			for i, c := range columns[table] {
				if have[c] {
					cols = append(cols, c)
					args = append(args, r[i])
				} else if r[i] != nil && !filledByMigration[table+"."+c] && !(c == "channel" && r[i] == "") {
					// (0009's channel is '' by default: a record of before channels.)
					t.Fatalf("%s.%s: the old schema has no such column, but the record gives it %v", table, c, r[i])
				}
			}
			exec(`INSERT INTO `+table+` (`+strings.Join(cols, ", ")+`) VALUES (?`+strings.Repeat(", ?", len(cols)-1)+`)`, args...)
		}
	}
}

// filledByMigration are the columns migrations 0007 and 0008 add and fill
// from the record.
var filledByMigration = map[string]bool{
	"results.stage": true, "results.step": true,
	"fits.step": true, "fits.fit_order": true, "fits.coef_json": true,
	"fits.lack_of_fit_method": true, "fits.lack_of_fit": true, "fits.lack_of_fit_p": true,
	"instruments.kind": true,
}
