package serve

import (
	"context"
	"errors"
	"strings"

	"trimline/instruments/sim"
)

// dutHandler serves the DUT fixture's trim port.
type dutHandler struct {
	dut          *sim.DUT
	lidOpenAfter int
}

// inject answers the first matching line with an error instead of carrying it out.
func (d *dutHandler) inject(string, func() (string, bool)) (string, bool) {
	return "ERR injected fault", true
}

func (d *dutHandler) handle(ctx context.Context, line string, f Fault, n int) (string, bool) {
	if d.lidOpenAfter > 0 && n >= d.lidOpenAfter && !d.dut.LidOpen() {
		d.dut.SetLid(true)
	}
	fields := strings.Fields(line)
	if len(fields) == 3 && fields[0] == "FIXTURE" && fields[1] == "LOAD" {
		if err := d.dut.LoadUnit(ctx, fields[2]); err != nil {
			return "ERR " + err.Error(), true
		}
		return "OK", true
	}
	r, err := d.dut.Query(ctx, line)
	var re *sim.ReplyError
	switch {
	case errors.As(err, &re):
		return re.Reply, true
	case err != nil:
		return "ERR " + err.Error(), true
	}
	if f.ReadbackMismatch {
		if m, ok := d.dut.MisreadCode(line, r); ok {
			r = m
		}
	}
	return r, true
}
