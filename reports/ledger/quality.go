package ledger

import (
	"context"
	"database/sql"
	"encoding/json"
	"fmt"
	"math"
	"time"

	"trimline/sequencer"
)

// QualityRun is what quality numbers need of one stored run: its header, the
// few facts of the record that have no column (lot, site, engineering, a review
// decision), its results and its limit outcomes. QualityRuns reads it from the
// rows, not by decoding the whole record, so a report over thousands of units
// is quick.
type QualityRun struct {
	RunID, Serial, Product, Revision, Station string
	Site, Lot                                 string // Record.Site and Record.Lot, "" when none
	Started, Finished                         time.Time
	Verdict                                   sequencer.Verdict
	Certificate                               string // "" for FAULT and ABORTED
	RetestOf                                  string // the run this one repeats, "" for a first test
	Engineering                               bool
	// Disposition is set on a reviewer's decision record: the REVIEW run it
	// decides (Record.Disposition.Of) and the decision (sequencer.DecisionAccept
	// or DecisionReject). The record's Verdict is the final verdict.
	Disposition *QualityDisposition
	Results     []QualityResult  // in record order
	Outcomes    []QualityOutcome // in record order
}

// QualityDisposition is a review decision: the run decided on and the decision.
type QualityDisposition struct {
	Of, Decision string
}

// QualityResult is one result of a run, as the results table holds it.
type QualityResult struct {
	Name, Channel string
	Value         float64 // SI base units (Result.Value); NaN when not a finite number
	Unit          string  // the record's dimension name: "V", "A", "ratio", "code", "count", "number"
	Valid         bool
	ExpandedU     float64 // expanded uncertainty, SI base units; NaN when not evaluated
	Stage         sequencer.Stage
	// Quantity is what the result measures (Result.QuantityOf): the record's
	// own word, or the first layout's for records without it.
	Quantity string
}

// QualityOutcome is one limit outcome of a run, as the limit_outcomes table
// holds it. Every number is in the limit's Unit.
type QualityOutcome struct {
	Name, Channel string
	Unit          string
	Pass          bool
	// Values are the results the limit used, each in the limit's unit, by
	// result name (without the channel).
	Values map[string]float64
	// Rule is the decision rule of a toleranced limit that was judged by it
	// ("simple" or "guarded"), "" for an expression limit and for a toleranced
	// limit whose result was not a valid number.
	Rule         string
	Lower, Upper *float64 // tolerance limits, nil where unbounded or when Rule is ""
	Zone         string   // limits.Zone…, "" when Rule is ""
}

// QualityRuns returns every stored run that finished on or after since and
// before until (a zero time is no bound), in the order the ledger recorded
// them (a retest always after the run it repeats, a review decision after the
// run it decides, whatever the clocks of the stations said), with its results and limit outcomes. It reads the runs, results and
// limit_outcomes tables in three queries and takes from each record's JSON
// only the lot, site, engineering mark, review decision and the results'
// quantities. It returns an empty slice when no run matches. Errors: ctx's,
// database errors, and ErrCorrupt (wrapped) for a stored time or values_json
// that does not parse.
func (l *Ledger) QualityRuns(ctx context.Context, since, until time.Time) ([]QualityRun, error) {
	tx, err := l.db.BeginTx(ctx, &sql.TxOptions{ReadOnly: true})
	if err != nil {
		return nil, fmt.Errorf("ledger: quality runs: %w", err)
	}
	defer tx.Rollback()

	where, args := `1`, []any{}
	if !since.IsZero() {
		where += ` AND finished >= ?`
		args = append(args, formatTime(since))
	}
	if !until.IsZero() {
		where += ` AND finished < ?`
		args = append(args, formatTime(until))
	}
	q := quality{strs: map[string]string{}, quantity: map[string]string{}}
	idx := map[string]int{}
	err = eachRow(ctx, tx, `SELECT run_id, serial, product, revision, station, started, finished, verdict,
		coalesce(certificate, ''), coalesce(retest_of, ''),
		json_extract(record_json, '$.lot', '$.site', '$.engineering', '$.disposition.of', '$.disposition.decision'),
		json_extract(record_json, '$.results')
		FROM runs WHERE `+where+` ORDER BY rowid`, args, func(rows *sql.Rows) error {
		var r QualityRun
		var started, finished, verdict string
		var facts, results []byte
		if err := rows.Scan(&r.RunID, &r.Serial, &r.Product, &r.Revision, &r.Station, &started, &finished, &verdict,
			&r.Certificate, &r.RetestOf, &facts, &results); err != nil {
			return err
		}
		var err error
		if r.Started, err = parseTime(started); err != nil {
			return fmt.Errorf("run %s: %w", r.RunID, err)
		}
		if r.Finished, err = parseTime(finished); err != nil {
			return fmt.Errorf("run %s: %w", r.RunID, err)
		}
		r.Verdict = sequencer.Verdict(q.intern(verdict))
		r.Product, r.Revision, r.Station = q.intern(r.Product), q.intern(r.Revision), q.intern(r.Station)
		var f recordFacts
		if err := f.decode(facts, results); err != nil {
			return fmt.Errorf("%w: run %s: record facts: %v", ErrCorrupt, r.RunID, err)
		}
		r.Lot, r.Site, r.Engineering = q.intern(f.Lot), q.intern(f.Site), f.Engineering
		if f.Of != "" {
			r.Disposition = &QualityDisposition{Of: f.Of, Decision: f.Decision}
		}
		for _, e := range f.Results {
			if e.Quantity != "" {
				q.quantity[q.key(r.RunID, e.Name, e.Channel)] = q.intern(e.Quantity)
			}
		}
		idx[r.RunID] = len(q.runs)
		q.runs = append(q.runs, r)
		return nil
	})
	if err != nil {
		return nil, fmt.Errorf("ledger: quality runs: %w", err)
	}
	if len(q.runs) == 0 {
		return []QualityRun{}, nil
	}
	in := `run_id IN (SELECT run_id FROM runs WHERE ` + where + `)`
	err = eachRow(ctx, tx, `SELECT run_id, name, channel, value, unit, valid, expanded_u, stage FROM results
		WHERE `+in+` ORDER BY rowid`, args, func(rows *sql.Rows) error {
		var id, name, ch, unit string
		var value, u sql.NullFloat64
		var valid bool
		var stage sql.NullString
		if err := rows.Scan(&id, &name, &ch, &value, &unit, &valid, &u, &stage); err != nil {
			return err
		}
		i, ok := idx[id]
		if !ok {
			return nil
		}
		res := QualityResult{Name: q.intern(name), Channel: q.intern(ch), Value: nullNaN(value), Unit: q.intern(unit),
			Valid: valid, ExpandedU: nullNaN(u)}
		if stage.Valid {
			if err := res.Stage.UnmarshalText([]byte(stage.String)); err != nil {
				return fmt.Errorf("%w: run %s: result %s: %v", ErrCorrupt, id, name, err)
			}
		}
		sr := sequencer.Result{Name: name, Stage: res.Stage, Quantity: q.quantity[q.key(id, name, ch)]}
		res.Stage, res.Quantity = sr.StageOf(), q.intern(sr.QuantityOf())
		q.runs[i].Results = append(q.runs[i].Results, res)
		return nil
	})
	if err != nil {
		return nil, fmt.Errorf("ledger: quality runs: results: %w", err)
	}
	err = eachRow(ctx, tx, `SELECT run_id, name, channel, unit, pass, values_json, coalesce(rule, ''), lower, upper, coalesce(zone, '')
		FROM limit_outcomes WHERE `+in+` ORDER BY rowid`, args, func(rows *sql.Rows) error {
		var id, name, ch, unit, vj, rule, zone string
		var pass bool
		var lower, upper sql.NullFloat64
		if err := rows.Scan(&id, &name, &ch, &unit, &pass, &vj, &rule, &lower, &upper, &zone); err != nil {
			return err
		}
		i, ok := idx[id]
		if !ok {
			return nil
		}
		o := QualityOutcome{Name: q.intern(name), Channel: q.intern(ch), Unit: q.intern(unit), Pass: pass,
			Rule: q.intern(rule), Zone: q.intern(zone)}
		if err := q.values(vj, &o.Values); err != nil {
			return fmt.Errorf("%w: run %s: limit %s: values: %v", ErrCorrupt, id, name, err)
		}
		if rule != "" {
			o.Lower, o.Upper = nullPtr(lower), nullPtr(upper)
		}
		q.runs[i].Outcomes = append(q.runs[i].Outcomes, o)
		return nil
	})
	if err != nil {
		return nil, fmt.Errorf("ledger: quality runs: limit outcomes: %w", err)
	}
	return q.runs, nil
}

// quality is QualityRuns' working state: the runs read so far, the results'
// quantities by run, name and channel, and one copy of each repeated string.
type quality struct {
	runs     []QualityRun
	strs     map[string]string
	quantity map[string]string
}

func (q *quality) intern(s string) string {
	if v, ok := q.strs[s]; ok {
		return v
	}
	q.strs[s] = s
	return s
}

func (q *quality) key(run, name, ch string) string {
	return run + "\x00" + name + "\x00" + ch
}

// values decodes values_json: an object of numbers, where the canonical JSON
// writes a number that is not finite as a string ("NaN", "Infinity").
func (q *quality) values(doc string, out *map[string]float64) error {
	if doc == "{}" {
		return nil
	}
	var raw map[string]any
	if err := json.Unmarshal([]byte(doc), &raw); err != nil {
		return err
	}
	m := make(map[string]float64, len(raw))
	for k, v := range raw {
		switch v := v.(type) {
		case float64:
			m[q.intern(k)] = v
		case string:
			switch v {
			case jsonNaN:
				m[q.intern(k)] = math.NaN()
			case jsonPosInf:
				m[q.intern(k)] = math.Inf(1)
			case jsonNegInf:
				m[q.intern(k)] = math.Inf(-1)
			default:
				return fmt.Errorf("%s is %q, not a number", k, v)
			}
		default:
			return fmt.Errorf("%s is %v, not a number", k, v)
		}
	}
	*out = m
	return nil
}

func nullNaN(v sql.NullFloat64) float64 {
	if !v.Valid {
		return math.NaN()
	}
	return v.Float64
}

func nullPtr(v sql.NullFloat64) *float64 {
	if !v.Valid {
		return nil
	}
	f := v.Float64
	return &f
}

// recordFacts are what QualityRuns takes from a record's JSON.
type recordFacts struct {
	Lot, Site, Of, Decision string
	Engineering             bool
	Results                 []struct{ Name, Channel, Quantity string }
}

// decode reads the array json_extract makes of a record's lot, site,
// engineering mark and decision (the run decided on, the decision), a missing
// member null, and the record's results.
func (f *recordFacts) decode(facts, results []byte) error {
	var a [5]json.RawMessage
	if err := json.Unmarshal(facts, &a); err != nil {
		return err
	}
	for i, dst := range []any{&f.Lot, &f.Site, &f.Engineering, &f.Of, &f.Decision} {
		if len(a[i]) == 0 || string(a[i]) == "null" {
			continue
		}
		if err := json.Unmarshal(a[i], dst); err != nil {
			return err
		}
	}
	if len(results) == 0 {
		return nil
	}
	return json.Unmarshal(results, &f.Results)
}
