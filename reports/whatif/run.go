package whatif

import (
	"context"
	"errors"
	"fmt"
	"io"
	"strings"
	"time"

	"trimline/limits"
	"trimline/reports/ledger"
	"trimline/sequencer"
)

// Request is one what-if question: how would New have judged the units stored in
// a ledger?
type Request struct {
	Ledger   string      // the ledger file to read
	New, Old *limits.Set // Old nil: the limit file in force on the newest run re-judged
	Product  string      // only units of this product (ignoring case); "" for every product
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
// re-judges them (Rejudge), writes the report as text to w and, when req.PDF is
// set, as a PDF (WriteFile). It returns the report. Errors: ErrNoRuns when nothing
// matches; otherwise the ledger's or the file system's.
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
	old := req.Old
	if old == nil {
		old = inForce
	}
	rep := Rejudge(old, req.New, units)
	rep.WriteText(w)
	if req.PDF != "" {
		if err := WriteFile(req.PDF, rep, req.Generated); err != nil {
			return rep, err
		}
	}
	return rep, nil
}

// Units reads the runs of led that req selects (product, finished between Since
// and Until), newest first, as stored units: only runs that were judged (pass,
// review or fail; faulted and aborted runs never were) and not engineering runs
// (they never shipped and say nothing about yield). inForce is the limit set of the
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
			OldVerdict: verdict, Values: map[string]limits.Value{}}
		for _, res := range rec.Results {
			u.Values[res.Name] = limits.Value{V: res.Value, Valid: res.Valid, Why: res.Note,
				Std: res.Unc.Std, U: res.Unc.Expanded, K: res.Unc.K, DOF: res.Unc.DOF}
		}
		units = append(units, u)
	}
	return units, inForce, nil
}
