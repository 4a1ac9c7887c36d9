package issuing

import (
	"context"
	"errors"
	"fmt"
	"strings"
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

// AttemptsUsed is every serial of a batch refused because its attempts are
// used, in batch order. Its message names the first few in full and counts the
// rest, as TestedBefore's does.
type AttemptsUsed []*AttemptsUsedError

func (a AttemptsUsed) Error() string {
	var b strings.Builder
	for i, e := range a {
		if i == shownInFull {
			rest := make([]string, 0, len(a)-i)
			for _, r := range a[i:] {
				rest = append(rest, r.Serial)
			}
			fmt.Fprintf(&b, "\n… and %d more serial(s) whose attempts are used: %s", len(rest), strings.Join(rest, ", "))
			break
		}
		if i > 0 {
			b.WriteString("\n")
		}
		b.WriteString(e.Error())
	}
	return b.String()
}

// Unwrap returns each refusal, so errors.Is(err, ErrAttemptsUsed) holds and
// errors.As finds the first *AttemptsUsedError.
func (a AttemptsUsed) Unwrap() []error {
	errs := make([]error, len(a))
	for i, e := range a {
		errs[i] = e
	}
	return errs
}

// attemptsUsed refuses every serial of a batch whose measured runs, with its
// earlier runs in the batch, have reached the sequence's retest.max_attempts:
// an AttemptsUsed; nil when all may run or the sequence sets no limit.
func (is *Issuer) attemptsUsed(ctx context.Context, serials []string) error {
	if is.Sequence == nil || is.Sequence.MaxAttempts <= 0 {
		return nil
	}
	limit := is.Sequence.MaxAttempts
	var errs AttemptsUsed
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
	if len(errs) == 0 {
		return nil
	}
	return errs
}
