package sequencer

// Instrument error queues, read after every sweep point and before the verdict.

import (
	"context"
	"fmt"

	"trimline/instruments"
)

// roleQueue is an opened instrument that queues its errors.
type roleQueue struct {
	role string
	q    instruments.ErrorQueue
}

// checkErrors reads the error queue of every instrument that has one, in role
// order. An entry, or a failure to read the queue, is a station fault: where says
// what the station was doing (e.g. "pre-trim sweep at 10 mV"); it is called only
// then, so a clean point costs no formatting.
func (e *Engine) checkErrors(ctx context.Context, where func() string) error {
	for _, rq := range e.queues {
		if err := rq.q.CheckErrors(ctx); err != nil {
			return e.blame(rq.role, err.Error(), fmt.Errorf("%s: %s: %w", where(), rq.role, err))
		}
	}
	return nil
}
