package stats

import (
	"context"
	"errors"
	"fmt"
	"io/fs"
	"os"

	"trimline/reports/ledger"
)

// ErrNoRuns: no run of the ledger matched the filter (or every run that did
// was an engineering run left out). Read and Open wrap it, and still return
// the Report they computed, so a caller may show its counts.
var ErrNoRuns = errors.New("stats: no runs match")

// Read reads the runs of led that finished within o.Since and o.Until
// (Ledger.QualityRuns) and computes their Report (Compute). It fails with
// ErrNoRuns (wrapped, with the Report) when no run counts, and with the
// ledger's errors. Safe for concurrent use as the Ledger is; a cancelled ctx
// stops the read.
func Read(ctx context.Context, led *ledger.Ledger, o Options) (Report, error) {
	runs, err := led.QualityRuns(ctx, o.Since, o.Until)
	if err != nil {
		return Report{}, fmt.Errorf("stats: %w", err)
	}
	r := Compute(runs, o)
	if r.Counts.Runs == 0 { // review decisions alone measured nothing: their REVIEW runs lie outside the filter
		switch {
		case r.Counts.Engineering > 0:
			return r, fmt.Errorf("%w: %d engineering run(s) match, left out without include-engineering", ErrNoRuns, r.Counts.Engineering)
		case len(runs) > 0:
			return r, fmt.Errorf("%w the filter (%d run(s) in the time range)", ErrNoRuns, len(runs))
		}
		return r, fmt.Errorf("%w: the ledger has no run in the time range", ErrNoRuns)
	}
	return r, nil
}

// Open opens the ledger file at path, Reads it with o and closes it. A path
// with no file is an error (fs.ErrNotExist, wrapped), never a new empty ledger.
// o.Ledger defaults to path.
func Open(ctx context.Context, path string, o Options) (Report, error) {
	if _, err := os.Stat(path); err != nil {
		if errors.Is(err, fs.ErrNotExist) {
			return Report{}, fmt.Errorf("stats: no ledger at %s: %w", path, err)
		}
		return Report{}, fmt.Errorf("stats: %w", err)
	}
	led, err := ledger.Open(ctx, path)
	if err != nil {
		return Report{}, fmt.Errorf("stats: %w", err)
	}
	if o.Ledger == "" {
		o.Ledger = path
	}
	r, err := Read(ctx, led, o)
	if cerr := led.Close(); cerr != nil && err == nil {
		err = fmt.Errorf("stats: close %s: %w", path, cerr)
	}
	return r, err
}
