package whatif

import (
	"context"
	"errors"
	"fmt"
	"io"
	"maps"
	"slices"
	"strings"
	"time"

	"trimline/instruments/files"
	"trimline/limits"
	"trimline/reports/ledger"
	"trimline/sequencer"
)

// Request is one what-if question: how would New have judged the units stored in
// a ledger?
type Request struct {
	Ledger   string      // the ledger file to read
	New, Old *limits.Set // Old nil: the limit file in force on the newest run re-judged
	// NewFile and OldFile, read when New and Old are nil, are limit files Run
	// loads itself (LoadFile) against the results of the runs it read.
	NewFile, OldFile string
	Product          string // only units of this product (ignoring case); "" for every product
	// Only runs finished on or after Since and before Until; a zero time is no bound.
	Since, Until time.Time
	PDF          string    // also write the report with histograms to this file; "" for none
	Generated    time.Time // the PDF's date
}

// ErrNoRuns is returned (wrapped) by Run when no judged run of the ledger matches
// the request.
var ErrNoRuns = errors.New("no judged runs match")

type noRunsError struct{ ledger string }

func (e noRunsError) Error() string        { return fmt.Sprintf("no judged runs in %s match", e.ledger) }
func (e noRunsError) Is(target error) bool { return target == ErrNoRuns }

// Run answers req: it reads the judged runs of the ledger that match (Units),
// loads req.NewFile and req.OldFile when New and Old are nil (LoadFile, against
// the units read), re-judges them (Rejudge), writes the report as text to w and,
// when req.PDF is set, as a PDF (WriteFile). It returns the report. Errors: ErrNoRuns when nothing
// matches; a *LoadError when a limit file does not load; otherwise the ledger's
// or the file system's.
func Run(ctx context.Context, req Request, w io.Writer) (Report, error) {
	led, err := ledger.Open(ctx, req.Ledger)
	if err != nil {
		return Report{}, err
	}
	defer led.Close()
	units, inForce, err := Units(ctx, led, req)
	if err != nil {
		return Report{}, err
	}
	if len(units) == 0 {
		return Report{}, noRunsError{req.Ledger}
	}
	nw, old := req.New, req.Old
	if nw == nil {
		if nw, err = LoadFile(req.NewFile, units); err != nil {
			return Report{}, err
		}
	}
	if old == nil && req.OldFile != "" {
		if old, err = LoadFile(req.OldFile, units); err != nil {
			return Report{}, err
		}
	}
	if old == nil {
		old = inForce
	}
	rep := Rejudge(old, nw, units)
	rep.WriteText(w)
	if req.PDF != "" {
		if err := WriteFile(req.PDF, rep, req.Generated); err != nil {
			return rep, err
		}
	}
	return rep, nil
}

// LoadError is returned by Run and LoadFile when a limit file does not load; Err
// is the loader's error (files.Errs finds the file's problems through it).
type LoadError struct {
	Path string
	Err  error
}

func (e *LoadError) Error() string { return e.Err.Error() }
func (e *LoadError) Unwrap() error { return e.Err }

// LoadFile loads the limit file at path to re-judge units with. Its result names
// are those of the sequence files beside it that name it or are for its product
// (sequencer.CatalogFor); when none does, those the stored runs of its product
// (limit_set.product) recorded (Catalog), for those are the results it will
// judge; when there are none of those either, the first layout's. Errors are a
// *LoadError: the file's problems, or a result recorded in two units.
func LoadFile(path string, units []StoredUnit) (*limits.Set, error) {
	cat, seq, _ := sequencer.CatalogFor(path)
	if seq == nil {
		data, err := files.ReadFile(path)
		if err != nil {
			return nil, &LoadError{path, err}
		}
		if product := sequencer.LimitsProduct(data); product != "" {
			stored, err := Catalog(units, product)
			if err != nil {
				return nil, &LoadError{path, fmt.Errorf("%s: %w", path, err)}
			}
			if stored != nil {
				cat = stored
			}
		}
	}
	set, err := limits.LoadFile(path, cat)
	if err != nil {
		return nil, &LoadError{path, err}
	}
	return set, nil
}

// Catalog is the union of the catalogues of the units of product (ignoring
// case): every result their runs recorded, in its recorded dimension. It is nil
// when no unit is of product. A result recorded in one dimension by one run and
// in another by a second is an error that names both runs.
func Catalog(units []StoredUnit, product string) (limits.Catalog, error) {
	var cat limits.Catalog
	from := map[string]int{} // result name → the unit whose run first recorded it
	for i, u := range units {
		if !strings.EqualFold(u.Product, product) {
			continue
		}
		if cat == nil {
			cat = limits.Catalog{}
		}
		for _, name := range slices.Sorted(maps.Keys(u.Catalog)) { // sorted: the same conflict named every time
			dim := u.Catalog[name]
			if had, ok := cat[name]; ok && had != dim {
				return nil, fmt.Errorf("result %q of %s was recorded as %s by run %s (%s) and as %s by run %s (%s): the stored runs do not say which unit it is in",
					name, product, had, units[from[name]].RunID, units[from[name]].Serial, dim, u.RunID, u.Serial)
			}
			if _, ok := cat[name]; !ok {
				cat[name], from[name] = dim, i
			}
		}
	}
	return cat, nil
}

// Units reads the runs of led that req selects (product, finished between Since
// and Until), newest first, as stored units: only runs that were judged (pass,
// review or fail; faulted and aborted runs never were), not engineering runs
// (they never shipped and say nothing about yield) and not the records of review
// decisions (each repeats the measurement of its REVIEW run, which is read as it
// was judged; a unit counts once). inForce is the limit set of the
// newest such run, as stored in the ledger; it is not read when req.Old is set
// (nil then, and when it cannot be read).
func Units(ctx context.Context, led *ledger.Ledger, req Request) (units []StoredUnit, inForce *limits.Set, err error) {
	runs, err := led.Runs(ctx, "")
	if err != nil {
		return nil, nil, err
	}
	for _, r := range runs {
		if (!req.Since.IsZero() && r.Finished.Before(req.Since)) || (!req.Until.IsZero() && !r.Finished.Before(req.Until)) {
			continue
		}
		if req.Product != "" && !strings.EqualFold(r.Product, req.Product) {
			continue
		}
		verdict, judged := r.Verdict.Judged()
		if !judged {
			continue // faulted and aborted runs were never judged
		}
		rec, err := led.Run(ctx, r.RunID)
		if err != nil {
			return nil, nil, err
		}
		if rec.Engineering {
			continue // engineering runs never shipped; they say nothing about yield
		}
		if rec.Disposition != nil {
			continue // a review decision repeats its REVIEW run's measurement, which is judged as it was
		}
		if inForce == nil && req.Old == nil {
			// Runs are newest first: the first one's limit file is the one in force.
			for _, f := range rec.Files {
				if f.Kind != "limits" {
					continue
				}
				if b, err := led.Blob(ctx, f.SHA256); err == nil {
					inForce, _ = limits.Load(f.Name, b, sequencer.RecordCatalog(rec))
				}
			}
		}
		u := StoredUnit{Serial: rec.Serial, RunID: rec.RunID, Finished: rec.Finished, Product: rec.Product,
			OldVerdict: verdict, Values: map[string]limits.Value{}, Catalog: sequencer.RecordCatalog(rec)}
		for _, res := range rec.Results {
			// A per-channel result under name@channel, as the limits judge it.
			u.Values[limits.ChannelKey(res.Name, res.Channel)] = limits.Value{V: res.Value, Valid: res.Valid, Why: res.Note,
				Std: res.Unc.Std, U: res.Unc.Expanded, K: res.Unc.K, DOF: res.Unc.DOF}
		}
		units = append(units, u)
	}
	return units, inForce, nil
}
