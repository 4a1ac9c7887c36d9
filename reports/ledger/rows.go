package ledger

import (
	"context"
	"database/sql"
	"errors"
	"fmt"
	"math"
	"runtime"
	"slices"
	"strconv"
	"strings"

	"trimline/sequencer"
)

// The query rows of a run (readings, results, limit outcomes, fits, trims, files,
// instruments) are copies of its record. recordRows is the one place that turns a
// record into them: RecordRunWith inserts what it returns, and VerifyChain compares
// every stored row with what it returns for the signed record_json, so the writer
// and the check cannot drift apart.

// derivedTable is one table whose rows are derived from a record.
type derivedTable struct {
	name    string
	columns []string // after run_id, in the order of derivedRow.vals
}

// derivedRow is one row of a derivedTable: its values after run_id, and what it
// is (what), in words for a person ("sweep pre-trim point 3 reading 2"). The
// words are put together only when needed, from a prefix, a name and, for a
// reading, its point and reading index: a ledger check reads every row and
// names at most one.
type derivedRow struct {
	prefix, name string
	point, index int // a reading's; -1 for other rows
	vals         []any
}

// what is the row in words.
func (r derivedRow) what() string {
	if r.point < 0 {
		return r.prefix + r.name
	}
	return "sweep " + r.name + " point " + strconv.Itoa(r.point) + " reading " + strconv.Itoa(r.index)
}

// namedRow is a derivedRow other than a reading: prefix + name in words.
func namedRow(prefix, name string, vals []any) derivedRow {
	return derivedRow{prefix: prefix, name: name, point: -1, vals: vals}
}

// derivedTables are the tables recordRows fills, in the order it fills them.
var derivedTables = []derivedTable{
	{"readings", []string{"sweep", "point_index", "reading_index", "stimulus_v", "value_v", "flag", "taken_at", "channel"}},
	{"results", []string{"name", "value", "unit", "valid", "note", "u", "dof", "k", "expanded_u", "method", "stage", "step", "channel"}},
	{"limit_outcomes", []string{"name", "expr", "unit", "pass", "reason", "values_json",
		"rule", "guard_factor", "guard", "lower", "upper", "accept_lower", "accept_upper", "zone", "p_outside", "tur", "tur_low", "binary", "statement",
		"channel"}},
	{"fits", []string{"sweep", "slope", "intercept_v", "residual_sd_v", "dof", "nonlinearity", "cov_json",
		"step", "fit_order", "coef_json", "lack_of_fit_method", "lack_of_fit", "lack_of_fit_p", "channel"}},
	{"trims", []string{"dac", "before_code", "code", "ideal", "readback", "saturated", "stored", "channel"}},
	{"files", []string{"kind", "name", "title", "sha256"}},
	{"instruments", []string{"role", "address", "asset", "cal_due", "identity", "kind"}},
	{"sweeps", []string{"sweep", "stage", "points", "channel"}},
	{"steps", []string{"step_index", "name", "kind", "stage", "status", "note", "channel"}},
}

// recordRows returns the rows of every derivedTable for rec, indexed like
// derivedTables.
func recordRows(rec *sequencer.Record) ([][]derivedRow, error) {
	out := make([][]derivedRow, len(derivedTables))
	n := 0
	for _, sw := range rec.Sweeps {
		for _, pt := range sw.Points {
			n += len(pt.Readings)
		}
	}
	rs := make([]derivedRow, 0, n)
	for _, sw := range rec.Sweeps {
		for pi, pt := range sw.Points {
			for ri, r := range pt.Readings {
				rs = append(rs, derivedRow{name: sw.Name, point: pi, index: ri,
					vals: []any{sw.Name, pi, ri, realOrNull(pt.Stimulus), realOrNull(r.Value), r.Flag.String(), formatTime(r.Time), sw.Channel}})
			}
		}
	}
	out[0] = rs
	for _, r := range rec.Results {
		out[1] = append(out[1], namedRow("result ", r.Name,
			append(append([]any{r.Name, realOrNull(r.Value), r.Unit, r.Valid, r.Note}, uncertaintyArgs(r.Unc)...),
				stageOrNull(r.StageOf()), nullText(r.Step), r.Channel)))
	}
	for _, o := range rec.Outcomes {
		vals := o.Values
		if vals == nil {
			vals = map[string]float64{}
		}
		vj, err := canonicalJSON(vals)
		if err != nil {
			return nil, fmt.Errorf("limit %s: values: %w", o.Name, err)
		}
		out[2] = append(out[2], namedRow("limit ", o.Name,
			append(append([]any{o.Name, o.Expr, o.Unit, o.Pass, o.Reason, string(vj)}, decisionArgs(o.Decision)...), o.Channel)))
	}
	for _, f := range rec.Fits {
		cj, err := canonicalJSON(f.Cov)
		if err != nil {
			return nil, fmt.Errorf("fit of %s: covariance: %w", f.Sweep, err)
		}
		var coef any
		if f.Coef != nil {
			b, err := canonicalJSON(f.Coef)
			if err != nil {
				return nil, fmt.Errorf("fit of %s: coefficients: %w", f.Sweep, err)
			}
			coef = string(b)
		}
		order := f.Order
		if order == 0 {
			order = 1 // a record of schema 1: every fit a line
		}
		lof := []any{nil, nil, nil}
		if f.LackOfFit != nil {
			lof = []any{f.LackOfFit.Method, realOrNull(f.LackOfFit.Statistic), realOrNull(f.LackOfFit.P)}
		}
		out[3] = append(out[3], namedRow("fit of sweep ", f.Sweep,
			append([]any{f.Sweep, realOrNull(f.Slope), realOrNull(f.Intercept), realOrNull(f.ResidualSD), f.DOF, realOrNull(f.Nonlinearity), string(cj),
				nullText(f.Step), order, coef}, append(lof, f.Channel)...)))
	}
	for _, t := range rec.Trims {
		out[4] = append(out[4], namedRow("trim DAC ", t.DAC,
			[]any{t.DAC, t.Before, t.Code, realOrNull(t.Ideal), t.Readback, t.Saturated, t.Stored, t.Channel}))
	}
	for _, f := range rec.Files {
		out[5] = append(out[5], namedRow(f.Kind+" file ", f.Name, []any{f.Kind, f.Name, f.Title, f.SHA256}))
	}
	for _, in := range rec.Instruments {
		out[6] = append(out[6], namedRow("instrument ", in.Role, []any{in.Role, in.Address, in.Asset, in.CalDue, in.Identity.String(),
			nullText(string(in.RoleKind()))}))
	}
	for _, sw := range rec.Sweeps {
		out[7] = append(out[7], namedRow("sweep ", sw.Name, []any{sw.Name, stageOrNull(sw.StageOf()), len(sw.Points), sw.Channel}))
	}
	for i, st := range rec.Steps {
		out[8] = append(out[8], namedRow("step ", st.Name, []any{i, st.Name, st.Kind, stageOrNull(st.Stage), st.Status, nullText(st.Note), st.Channel}))
	}
	return out, nil
}

// stageOrNull is a stage as the record spells it ("as_found", "adjustment",
// "as_left"), NULL for none (0: a result or sweep of schema 1 the first layout
// did not name, or a step with no stage).
func stageOrNull(s sequencer.Stage) any {
	b, err := s.MarshalText()
	if err != nil {
		return nil
	}
	return string(b)
}

// runColumns are the columns of a runs row that repeat its record, and
// runColumnValues their values for rec (reasonsJSON is the canonical JSON of its
// reasons, an empty array for none).
var runColumns = []string{"run_id", "serial", "product", "revision", "station", "operator", "software", "started", "finished",
	"verdict", "fault", "reasons", "coverage", "ambient_c", "ambient_source", "retest_of"}

func runColumnValues(rec *sequencer.Record, reasonsJSON string) []any {
	return []any{rec.RunID, rec.Serial, rec.Product, rec.Revision, rec.Station, rec.Operator, rec.Software,
		formatTime(rec.Started), formatTime(rec.Finished), string(rec.Verdict), nullText(rec.Fault), reasonsJSON,
		positiveOrNull(rec.Coverage), ambientC(rec.Conditions), nullText(rec.Conditions.AmbientSource), nullText(rec.RetestOf)}
}

// reasonsJSON is runs.reasons for rec: the canonical JSON of its reasons, [] for none.
func reasonsJSON(rec *sequencer.Record) (string, error) {
	reasons := rec.Reasons
	if reasons == nil {
		reasons = []string{}
	}
	b, err := canonicalJSON(reasons)
	return string(b), err
}

// unitRow is a units row: the unit as its runs so far describe it.
type unitRow struct{ serial, product, firstSeen, lastSeen string }

// nextUnit is the units row after a run of rec, given the row before it (ok
// false: the serial's first run). first_seen and last_seen span the Started and
// Finished times of all its runs; product is that of the run with the latest
// last_seen, the later-stored on a tie. RecordRunWith stores it and VerifyChain
// recomputes every unit with it from the runs in the order they were stored.
func nextUnit(before unitRow, ok bool, rec *sequencer.Record) unitRow {
	first, last := formatTime(rec.Started), formatTime(rec.Finished)
	if last < first {
		last = first
	}
	u := unitRow{rec.Serial, rec.Product, first, last}
	if !ok {
		return u
	}
	if last < before.lastSeen {
		u.product = before.product
	}
	u.firstSeen, u.lastSeen = min(before.firstSeen, first), max(before.lastSeen, last)
	return u
}

// storeUnit inserts or updates the units row of rec.Serial (nextUnit).
func storeUnit(ctx context.Context, tx *sql.Tx, rec *sequencer.Record) error {
	var before unitRow
	err := tx.QueryRowContext(ctx, `SELECT serial, product, first_seen, last_seen FROM units WHERE serial = ?`, rec.Serial).
		Scan(&before.serial, &before.product, &before.firstSeen, &before.lastSeen)
	if err != nil && !errors.Is(err, sql.ErrNoRows) {
		return fmt.Errorf("unit %s: %w", rec.Serial, err)
	}
	u := nextUnit(before, err == nil, rec)
	if _, err := tx.ExecContext(ctx, `
		INSERT INTO units (serial, product, first_seen, last_seen) VALUES (?, ?, ?, ?)
		ON CONFLICT (serial) DO UPDATE SET product = excluded.product, first_seen = excluded.first_seen, last_seen = excluded.last_seen`,
		u.serial, u.product, u.firstSeen, u.lastSeen); err != nil {
		return fmt.Errorf("unit %s: %w", rec.Serial, err)
	}
	return nil
}

// units is VerifyChain's check of the units table (whole ledger only): each row
// is the one nextUnit gives from the runs of its serial in the order they were
// stored (rowid), and every serial with a run has one.
func (c *chainCheck) units() error {
	want := map[string]unitRow{}
	var order []string
	err := eachRow(c.ctx, c.tx, `SELECT serial, product, started, finished FROM runs ORDER BY rowid`, nil, func(rows *sql.Rows) error {
		var serial, product, started, finished string
		if err := rows.Scan(&serial, &product, &started, &finished); err != nil {
			return err
		}
		s, err := parseTime(started)
		if err != nil {
			return err
		}
		f, err := parseTime(finished)
		if err != nil {
			return err
		}
		before, ok := want[serial]
		if !ok {
			order = append(order, serial)
		}
		want[serial] = nextUnit(before, ok, &sequencer.Record{Serial: serial, Product: product, Started: s, Finished: f})
		return nil
	})
	if err != nil {
		return err
	}
	seen := map[string]bool{}
	err = eachRow(c.ctx, c.tx, `SELECT serial, product, first_seen, last_seen FROM units ORDER BY serial`, nil, func(rows *sql.Rows) error {
		var got unitRow
		if err := rows.Scan(&got.serial, &got.product, &got.firstSeen, &got.lastSeen); err != nil {
			return err
		}
		w, ok := want[got.serial]
		if !ok {
			return c.brokenRow("units", "", "", "unit %s has no run in the ledger", got.serial)
		}
		seen[got.serial] = true
		for _, f := range []struct{ col, got, want string }{
			{"product", got.product, w.product}, {"first_seen", got.firstSeen, w.firstSeen}, {"last_seen", got.lastSeen, w.lastSeen},
		} {
			if f.got != f.want {
				return c.brokenRow("units", f.col, "", "unit %s: %s is %q in the table, %q from its signed runs", got.serial, f.col, f.got, f.want)
			}
		}
		return nil
	})
	if err != nil {
		return err
	}
	for _, sn := range order {
		if !seen[sn] {
			return c.brokenRow("units", "", "", "unit %s, which has runs, has no row", sn)
		}
	}
	return nil
}

// storeRows inserts the rows of every derivedTable for rec.
func storeRows(ctx context.Context, tx *sql.Tx, rec *sequencer.Record) error {
	all, err := recordRows(rec)
	if err != nil {
		return err
	}
	for i, t := range derivedTables {
		if err := insertRows(ctx, tx, t, rec.RunID, all[i]); err != nil {
			return err
		}
	}
	return nil
}

// insertRows inserts rows, the rows of table t of run runID.
func insertRows(ctx context.Context, tx *sql.Tx, t derivedTable, runID string, rows []derivedRow) error {
	if len(rows) == 0 {
		return nil
	}
	q := "INSERT INTO " + t.name + " (run_id, " + strings.Join(t.columns, ", ") + ") VALUES (?" + strings.Repeat(", ?", len(t.columns)) + ")"
	st, err := tx.PrepareContext(ctx, q)
	if err != nil {
		return fmt.Errorf("%s: %w", t.name, err)
	}
	defer st.Close()
	for _, r := range rows {
		if _, err := st.ExecContext(ctx, append([]any{runID}, r.vals...)...); err != nil {
			return fmt.Errorf("%s: %s: %w", t.name, r.what(), err)
		}
	}
	return nil
}

// backfill0007 is the Go step of migration 0007: it gives every stored run's
// results and fits rows the columns 0007 adds, and inserts its sweeps and steps
// rows (for a record of schema 1, the first layout's stages by name; see the
// migration).
func backfill0007(ctx context.Context, tx *sql.Tx) error {
	return backfillRuns(ctx, tx, map[string][]string{
		"results": {"stage", "step"},
		"fits":    {"step", "fit_order", "coef_json", "lack_of_fit_method", "lack_of_fit", "lack_of_fit_p"},
	}, []string{"sweeps", "steps"})
}

// backfill0008 is the Go step of migration 0008: it gives every stored run's
// instruments rows their kind (for a record of schema 1, the kind of the
// role's name; see the migration).
func backfill0008(ctx context.Context, tx *sql.Tx) error {
	return backfillRuns(ctx, tx, map[string][]string{"instruments": {"kind"}}, nil)
}

// backfillRuns is a migration's Go step: for every stored run, in the order
// stored, it decodes the signed record and sets the columns added[table] of
// its rows of each table, and inserts its rows of each table in created, all
// as recordRows derives them. A run whose record does not decode, or whose
// rows are not as many as its record's, is left as it is: VerifyChain reports
// it, as it did before the migration.
func backfillRuns(ctx context.Context, tx *sql.Tx, added map[string][]string, created []string) error {
	var ids []string
	err := eachRow(ctx, tx, `SELECT run_id FROM runs ORDER BY rowid`, nil, func(rows *sql.Rows) error {
		var id string
		err := rows.Scan(&id)
		ids = append(ids, id)
		return err
	})
	if err != nil {
		return err
	}
	for _, id := range ids {
		var doc []byte
		if err := tx.QueryRowContext(ctx, `SELECT record_json FROM runs WHERE run_id = ?`, id).Scan(&doc); err != nil {
			return fmt.Errorf("run %s: %w", id, err)
		}
		rec := new(sequencer.Record)
		if decodeCanonical(doc, rec) != nil {
			continue
		}
		all, err := recordRows(rec)
		if err != nil {
			continue
		}
		for ti, t := range derivedTables {
			if cols, ok := added[t.name]; ok {
				if err := backfillColumns(ctx, tx, t, id, cols, all[ti]); err != nil {
					return fmt.Errorf("run %s: %w", id, err)
				}
			}
			if slices.Contains(created, t.name) {
				if err := insertExisting(ctx, tx, t, id, all[ti]); err != nil {
					return fmt.Errorf("run %s: %w", id, err)
				}
			}
		}
	}
	return nil
}

// insertExisting inserts rows into the columns of table t the file has now: a
// migration's backfill runs before the later migrations add their columns, whose
// defaults then stand for the records of its time.
func insertExisting(ctx context.Context, tx *sql.Tx, t derivedTable, runID string, rows []derivedRow) error {
	have := map[string]bool{}
	err := eachRow(ctx, tx, `SELECT name FROM pragma_table_info(?)`, []any{t.name}, func(r *sql.Rows) error {
		var c string
		err := r.Scan(&c)
		have[c] = true
		return err
	})
	if err != nil {
		return fmt.Errorf("%s: %w", t.name, err)
	}
	sub := derivedTable{name: t.name}
	var idx []int
	for i, c := range t.columns {
		if have[c] {
			sub.columns = append(sub.columns, c)
			idx = append(idx, i)
		}
	}
	if len(idx) == len(t.columns) {
		return insertRows(ctx, tx, t, runID, rows)
	}
	subRows := make([]derivedRow, len(rows))
	for n, r := range rows {
		subRows[n] = r
		subRows[n].vals = make([]any, len(idx))
		for k, i := range idx {
			subRows[n].vals[k] = r.vals[i]
		}
	}
	return insertRows(ctx, tx, sub, runID, subRows)
}

// backfillColumns sets the columns cols of run id's rows of table t, in rowid
// order, to those of want; it changes nothing when the run has not exactly
// len(want) rows.
func backfillColumns(ctx context.Context, tx *sql.Tx, t derivedTable, id string, cols []string, want []derivedRow) error {
	var rowids []int64
	err := eachRow(ctx, tx, `SELECT rowid FROM `+t.name+` WHERE run_id = ? ORDER BY rowid`, []any{id}, func(rows *sql.Rows) error {
		var r int64
		err := rows.Scan(&r)
		rowids = append(rowids, r)
		return err
	})
	if err != nil || len(rowids) != len(want) {
		return err
	}
	idx := make([]int, len(cols))
	set := make([]string, len(cols))
	for i, c := range cols {
		idx[i] = slices.Index(t.columns, c)
		set[i] = c + " = ?"
	}
	st, err := tx.PrepareContext(ctx, `UPDATE `+t.name+` SET `+strings.Join(set, ", ")+` WHERE rowid = ?`)
	if err != nil {
		return fmt.Errorf("%s: %w", t.name, err)
	}
	defer st.Close()
	for n, rowid := range rowids {
		args := make([]any, 0, len(cols)+1)
		for _, i := range idx {
			args = append(args, want[n].vals[i])
		}
		if _, err := st.ExecContext(ctx, append(args, rowid)...); err != nil {
			return fmt.Errorf("%s: %s: %w", t.name, want[n].what(), err)
		}
	}
	return nil
}

// sqlValue is v as SQLite gives it back: INTEGER as int64 (bools 0 or 1), REAL as
// float64, TEXT as string, NULL as nil.
func sqlValue(v any) any {
	switch x := v.(type) {
	case bool:
		if x {
			return int64(1)
		}
		return int64(0)
	case int:
		return int64(x)
	case int32:
		return int64(x)
	case []byte:
		return string(x)
	}
	return v
}

// sameValue reports whether the stored value got is the value want the record
// gives: floats compare exactly (==; SQLite keeps a REAL's 64 bits, and gives a
// whole number it stored as an integer back as the same float).
func sameValue(got, want any) bool {
	got, want = sqlValue(got), sqlValue(want)
	switch w := want.(type) {
	case nil:
		return got == nil
	case float64:
		g, ok := got.(float64)
		return ok && g == w
	case int64:
		g, ok := got.(int64)
		return ok && g == w
	case string:
		g, ok := got.(string)
		return ok && g == w
	}
	return false
}

// showValue writes a stored or derived value for a person: floats in full
// (the shortest text that reads back as the same float), text quoted, NULL.
func showValue(v any) string {
	switch x := sqlValue(v).(type) {
	case nil:
		return "NULL"
	case float64:
		if math.IsInf(x, 0) || math.IsNaN(x) {
			return fmt.Sprint(x)
		}
		return strconv.FormatFloat(x, 'g', -1, 64)
	case int64:
		return strconv.FormatInt(x, 10)
	case string:
		return strconv.Quote(x)
	default:
		return fmt.Sprintf("%v (%T)", x, x)
	}
}

// tableCursor reads one derived table's rows in run_id order.
type tableCursor struct {
	t      derivedTable
	rows   *sql.Rows
	rowid  int64
	runID  string
	vals   []any
	dest   []any // Scan's destinations: rowid, runID, then vals
	ok     bool  // a row is held
	closed bool
}

func (c *tableCursor) next() error {
	c.ok = false
	if c.closed {
		return nil
	}
	if !c.rows.Next() {
		c.closed = true
		return c.rows.Err()
	}
	if c.dest == nil { // the same destinations for every row: a row is compared before the next is read
		c.vals = make([]any, len(c.t.columns))
		c.dest = append(make([]any, 0, len(c.vals)+2), &c.rowid, &c.runID)
		for i := range c.vals {
			c.dest = append(c.dest, &c.vals[i])
		}
	}
	if err := c.rows.Scan(c.dest...); err != nil {
		return err
	}
	c.ok = true
	return nil
}

// rows is VerifyChain's check of the query rows: every runs row's columns that
// repeat its record, and every row of every derivedTable, against recordRows of
// the signed record_json, run by run in run id order; then rows whose run is not
// in the ledger. It reports the first difference with its table, run and column.
func (c *chainCheck) rows() error {
	// The runs checked: those of c.station (all when ""), but for those trusted
	// through a saved head (sinceFilter). Rows whose run is not in the ledger are
	// looked for only when every station is checked.
	var conds []string
	var args []any
	if c.station != "" {
		conds, args = append(conds, "station = ?"), append(args, c.station)
	}
	if cond, a := c.sinceFilter(); cond != "" {
		// station >= '' lets SQLite find the runs by the index on (station,
		// chain_seq), without reading the rows of those it skips.
		conds, args = append(conds, "station >= '' AND NOT ("+cond+")"), append(args, a...)
	}
	where := ""
	if len(conds) > 0 {
		where = " WHERE run_id IN (SELECT run_id FROM runs WHERE " + strings.Join(conds, " AND ") + ")"
	}
	if c.station == "" && where != "" {
		// The cursors read only the rows of the runs checked: look for rows
		// whose run is not in the ledger apart.
		if err := c.orphanRows(); err != nil {
			return err
		}
	}
	curs := make([]*tableCursor, len(derivedTables))
	for i, t := range derivedTables {
		rows, err := c.tx.QueryContext(c.ctx, "SELECT rowid, run_id, "+strings.Join(t.columns, ", ")+" FROM "+t.name+where+" ORDER BY run_id, rowid", args...)
		if err != nil {
			return err
		}
		defer rows.Close()
		curs[i] = &tableCursor{t: t, rows: rows}
		if err := curs[i].next(); err != nil {
			return err
		}
	}
	q := "SELECT station, record_sha256, record_json, " + strings.Join(runColumns, ", ") + " FROM runs"
	if len(conds) > 0 {
		q += " WHERE " + strings.Join(conds, " AND ")
	}
	runs, err := c.tx.QueryContext(c.ctx, q+" ORDER BY run_id", args...)
	if err != nil {
		return err
	}
	defer runs.Close()
	// Each run's record is decoded (decodeRun) in a goroutine of its own, a few
	// runs ahead of the one whose rows are compared, in run id order.
	ahead := 2 * runtime.GOMAXPROCS(0)
	var queue []*decodedRun
	for {
		for len(queue) < ahead && runs.Next() {
			d := &decodedRun{got: make([]any, len(runColumns)), done: make(chan struct{})}
			var doc []byte
			dest := []any{&d.station, &d.sum, &doc}
			for i := range d.got {
				dest = append(dest, &d.got[i])
			}
			if err := runs.Scan(dest...); err != nil {
				return err
			}
			d.id, _ = sqlValue(d.got[0]).(string)
			go d.decode(doc)
			queue = append(queue, d)
		}
		if len(queue) == 0 {
			break
		}
		d := queue[0]
		queue = queue[1:]
		<-d.done
		if err := c.runRows(d, curs); err != nil {
			return err
		}
	}
	if err := runs.Err(); err != nil {
		return err
	}
	for _, cur := range curs {
		if cur.ok {
			return c.brokenRow(cur.t.name, "", cur.runID, "row %d belongs to run %s, which is not in the ledger", cur.rowid, cur.runID)
		}
	}
	if c.station != "" {
		return nil // a unit's runs may be of several stations
	}
	return c.units()
}

// orphanRows reports the first row of a derivedTable whose run is not in the
// ledger, for a check whose cursors read only some runs' rows.
func (c *chainCheck) orphanRows() error {
	for _, t := range derivedTables {
		var rowid int64
		var runID string
		err := c.tx.QueryRowContext(c.ctx, "SELECT rowid, run_id FROM "+t.name+" WHERE run_id NOT IN (SELECT run_id FROM runs) LIMIT 1").Scan(&rowid, &runID)
		if errors.Is(err, sql.ErrNoRows) {
			continue
		}
		if err != nil {
			return err
		}
		return c.brokenRow(t.name, "", runID, "row %d belongs to run %s, which is not in the ledger", rowid, runID)
	}
	return nil
}

// decodedRun is a run of the rows check: its runs row (station, id, its
// record_sha256 sum, and got, the columns of runColumns) and what decode made of
// its record_json, ready when done is closed.
type decodedRun struct {
	station, id, sum string
	got              []any
	done             chan struct{}

	docSum       string // SHA-256 of record_json
	rec          *sequencer.Record
	decodeErr    error
	reasons      string
	reasonsErr   error
	all          [][]derivedRow
	recordRowErr error
}

// decode decodes doc, the run's record_json, and derives its rows, then closes
// d.done. It touches nothing but d.
func (d *decodedRun) decode(doc []byte) {
	defer close(d.done)
	d.docSum = sha256Hex(doc)
	if d.docSum != d.sum {
		return
	}
	rec := new(sequencer.Record)
	if d.decodeErr = decodeCanonical(doc, rec); d.decodeErr != nil {
		return
	}
	d.rec = rec
	if d.reasons, d.reasonsErr = reasonsJSON(rec); d.reasonsErr != nil {
		return
	}
	d.all, d.recordRowErr = recordRows(rec)
}

// runRows checks one run's signed record and rows, its record_json decoded
// once (decodedRun): the record hashes to its record_sha256; the runs row's
// columns are the record's; and the derived rows are recordRows'.
func (c *chainCheck) runRows(d *decodedRun, curs []*tableCursor) error {
	st, id, got := d.station, d.id, d.got
	fail := func(format string, args ...any) error {
		return c.broken(st, id, 0, "station %q, run %s: %s", st, id, fmt.Sprintf(format, args...))
	}
	if d.docSum != d.sum {
		return fail("record_json has SHA-256 %s, record_sha256 is %s", d.docSum, d.sum)
	}
	if d.decodeErr != nil {
		return fail("record_json does not decode: %v", d.decodeErr)
	}
	rec, rj := d.rec, d.reasons
	if d.reasonsErr != nil {
		return d.reasonsErr
	}
	if err := c.header(fail, rec, rj, got); err != nil {
		return err
	}
	for i, want := range runColumnValues(rec, rj) {
		if !sameValue(got[i], want) {
			return c.brokenRow("runs", runColumns[i], id, "run %s: %s is %s in the table, %s in the signed record",
				id, runColumns[i], showValue(got[i]), showValue(want))
		}
	}
	all, err := d.all, d.recordRowErr
	if err != nil {
		return c.broken(st, id, 0, "station %q, run %s: %v", st, id, err)
	}
	for ti, cur := range curs {
		name := cur.t.name
		// Rows of a run id before this one: that run is not in the ledger.
		if cur.ok && cur.runID < id {
			return c.brokenRow(name, "", cur.runID, "row %d belongs to run %s, which is not in the ledger", cur.rowid, cur.runID)
		}
		want := all[ti]
		n := 0
		for ; cur.ok && cur.runID == id; n++ {
			if n >= len(want) {
				return c.brokenRow(name, "", id, "run %s: row %d is one more than the signed record's %d", id, cur.rowid, len(want))
			}
			w := want[n]
			for k, col := range cur.t.columns {
				if !sameValue(cur.vals[k], w.vals[k]) {
					return c.brokenRow(name, col, id, "run %s, %s: %s is %s in the table, %s in the signed record",
						id, w.what(), col, showValue(cur.vals[k]), showValue(w.vals[k]))
				}
			}
			if err := cur.next(); err != nil {
				return err
			}
		}
		if n < len(want) {
			return c.brokenRow(name, "", id, "run %s, %s: no row; the signed record has %d, the table %d", id, want[n].what(), len(want), n)
		}
	}
	return nil
}

// headerColumns are the runs columns that name the run, as the chain has always
// checked them first (before the other columns of runColumns), with their words.
var headerColumns = []string{"run_id", "serial", "product", "revision", "station", "operator", "software",
	"started", "finished", "verdict", "reasons", "fault", "retest_of"}

// header checks the runs row's columns that name the run (got, in runColumns
// order) against rec: each is the record's, and fault is NULL rather than empty.
func (c *chainCheck) header(fail func(string, ...any) error, rec *sequencer.Record, reasons string, got []any) error {
	want := runColumnValues(rec, reasons)
	for _, name := range headerColumns {
		i := slices.Index(runColumns, name)
		row, _ := sqlValue(got[i]).(string) // NULL is ""
		rec, _ := sqlValue(want[i]).(string)
		if row != rec {
			return fail("column %s is %q, the record has %q", name, row, rec)
		}
	}
	if f := sqlValue(got[slices.Index(runColumns, "fault")]); f == "" {
		return fail("column fault is empty instead of NULL")
	}
	return nil
}

// brokenRow records a difference between a query row and its signed record.
func (c *chainCheck) brokenRow(table, column, runID, format string, args ...any) error {
	err := c.broken(c.stationOf(runID), runID, 0, "%s: %s", table, fmt.Sprintf(format, args...))
	c.rep.BrokenTable, c.rep.BrokenColumn = table, column
	return err
}

// stationOf is the station of a run the walk has seen, "" otherwise.
func (c *chainCheck) stationOf(runID string) string {
	if ref := c.creates[runID]; ref != nil {
		return ref.create.Station
	}
	return ""
}
