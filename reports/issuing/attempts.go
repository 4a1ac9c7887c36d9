package issuing

import (
	"context"
	"errors"
	"fmt"
)

// ErrAttemptsUsed is what a refusal of a serial that has had as many measured
// runs as the sequence allows (retest.max_attempts) wraps. Like ErrTestedBefore
// it is found before any instrument is touched, but no --retest lifts it: the
// unit goes to rework.
var ErrAttemptsUsed = errors.New("attempts used")

// AttemptsUsedError is one serial refused because its attempts are used.
type AttemptsUsedError struct {
	Serial      string
	Attempts    int  // its measured runs (ledger.MeasuredAttempts), with any earlier in the same batch
	MaxAttempts int  // the sequence's retest.max_attempts
	Engineering bool // counted among the engineering runs
}

func (e *AttemptsUsedError) Error() string {
	runs := "measured runs"
	if e.Engineering {
		runs = "measured engineering runs"
	}
	return fmt.Sprintf("%s has had %d %s, as many as the sequence allows (retest.max_attempts: %d): send it to rework",
		e.Serial, e.Attempts, runs, e.MaxAttempts)
}

// Unwrap returns ErrAttemptsUsed.
func (e *AttemptsUsedError) Unwrap() error { return ErrAttemptsUsed }

// Attempts is how many measured runs serial has had (ledger.MeasuredAttempts:
// PASS, FAIL or REVIEW, a reviewer's disposition not counted), among the
// engineering runs when the Issuer is for engineering runs. After a run is
// recorded it is that run's attempt number (sequencer.ForOperator's attempt).
func (is *Issuer) Attempts(ctx context.Context, serial string) (int, error) {
	return is.Ledger.MeasuredAttempts(ctx, serial, is.Engineering)
}

// attemptsUsed refuses every serial of a batch whose measured runs, with its
// earlier runs in the batch, have reached the sequence's retest.max_attempts:
// one *AttemptsUsedError, or several joined; nil when all may run or the
// sequence sets no limit.
func (is *Issuer) attemptsUsed(ctx context.Context, serials []string) error {
	if is.Sequence == nil || is.Sequence.MaxAttempts <= 0 {
		return nil
	}
	limit := is.Sequence.MaxAttempts
	var errs []error
	inBatch := map[string]int{}
	for _, sn := range serials {
		n, err := is.Attempts(ctx, sn)
		if err != nil {
			return err
		}
		n += inBatch[sn]
		inBatch[sn]++
		if n >= limit {
			if inBatch[sn] == 1 || n == limit { // each serial once
				errs = append(errs, &AttemptsUsedError{Serial: sn, Attempts: n, MaxAttempts: limit, Engineering: is.Engineering})
			}
		}
	}
	return errors.Join(errs...)
}
