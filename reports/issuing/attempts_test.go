package issuing_test

import (
	"context"
	"errors"
	"strings"
	"testing"

	"trimline/reports/issuing"
)

// A serial gets the sequence's retest.max_attempts measured runs (3 for the
// demo); then it is refused even with --retest, saying to send it to rework.
// A serial given again in the same batch counts too.
func TestAttemptsUsedRefusesEvenARetest(t *testing.T) {
	ctx := context.Background()
	_, _, is, rec, _ := issuedUnit(t)
	if is.Sequence.MaxAttempts != 3 {
		t.Fatalf("demo sequence max_attempts %d, want 3", is.Sequence.MaxAttempts)
	}
	attempts := func() int {
		t.Helper()
		n, err := is.Attempts(ctx, rec.Serial)
		if err != nil {
			t.Fatal(err)
		}
		return n
	}
	if n := attempts(); n != 1 {
		t.Fatalf("after one run: %d attempts", n)
	}
	if err := is.CheckRetests(ctx, []string{rec.Serial}, true); err != nil {
		t.Fatalf("a second attempt refused: %v", err)
	}
	if err := is.CheckRetests(ctx, []string{rec.Serial, rec.Serial, rec.Serial}, true); !errors.Is(err, issuing.ErrAttemptsUsed) {
		t.Errorf("attempts 2, 3 and 4 in one batch: %v, want the fourth refused", err)
	}
	again := *rec
	again.RunID, again.RetestOf = rec.RunID+"-2", ""
	if _, err := is.Record(ctx, &again); err != nil {
		t.Fatal(err)
	}
	third := again
	third.RunID, third.RetestOf = rec.RunID+"-3", ""
	if _, err := is.Record(ctx, &third); err != nil {
		t.Fatal(err)
	}
	if n := attempts(); n != 3 {
		t.Fatalf("after three runs: %d attempts", n)
	}
	for _, retest := range []bool{true, false} {
		err := is.CheckRetests(ctx, []string{"BRX-00002", rec.Serial}, retest)
		var used *issuing.AttemptsUsedError
		if !errors.As(err, &used) || used.Serial != rec.Serial || used.Attempts != 3 || used.MaxAttempts != 3 {
			t.Fatalf("retest %v: %v, want an AttemptsUsedError for %s", retest, err, rec.Serial)
		}
		if want := "BRX-00001 has had 3 measured runs, as many as the sequence allows (retest.max_attempts: 3): send it to rework"; err.Error() != want {
			t.Errorf("message %q, want %q", err, want)
		}
		if errors.Is(err, issuing.ErrTestedBefore) || strings.Contains(err.Error(), "--retest") {
			t.Errorf("an exhausted serial reads as one --retest would let run: %v", err)
		}
	}
	// Engineering runs have attempts of their own.
	eng := *is
	eng.Engineering = true
	if err := eng.CheckRetests(ctx, []string{rec.Serial}, false); err != nil {
		t.Errorf("engineering run of a serial with production attempts used: %v", err)
	}
}
