package sequencer

// The fixture interlock, read before the output is switched on and before every
// sweep point.

import (
	"context"
	"fmt"
	"strings"

	"trimline/instruments"
)

// checkInterlock reads the fixture interlock, when the station has one, and stops
// the run unless it answers closed. It runs before the output is switched on and
// before every sweep point.
func (e *Engine) checkInterlock(ctx context.Context) error {
	il := e.cfg.Station.Interlock
	if il == nil {
		return nil
	}
	q := e.all[il.Role].(instruments.Querier)
	got, err := q.Query(ctx, il.Query)
	if err != nil {
		return e.blame(il.Role, err.Error(), fmt.Errorf("interlock: %s %q: %w", il.Role, il.Query, err))
	}
	if strings.TrimSpace(got) != il.Closed {
		return e.blame(il.Role, fmt.Sprintf("%q to %q (closed is %q)", strings.TrimSpace(got), il.Query, il.Closed),
			&stop{verdict: Fault, msg: fmt.Sprintf("interlock open: %s answered %q to %q, expected %q; close the fixture lid", il.Role, strings.TrimSpace(got), il.Query, il.Closed)})
	}
	return nil
}
