package sequencer

// Trim-code I/O: writing a code to the unit's trim port and reading it back.

import (
	"context"
	"fmt"
	"strconv"
	"strings"
)

// writeCode writes code to the DAC d under the step deadline and reads it back; a
// read-back that differs stops the run as a station fault.
func (e *Engine) writeCode(ctx context.Context, d DAC, code int) error {
	return e.step(ctx, func(ctx context.Context) error { return e.writeCodeStep(ctx, d, code) })
}

func (e *Engine) writeCodeStep(ctx context.Context, d DAC, code int) error {
	name := d.Name
	line := strings.ReplaceAll(d.Write, "{code}", strconv.Itoa(code))
	if err := e.dut.Command(ctx, line); err != nil {
		return fmt.Errorf("dut: write %s trim code %d: %w", name, code, err)
	}
	got, err := e.readCode(ctx, d)
	if err != nil {
		return err
	}
	if got != code {
		return &stop{Fault, fmt.Sprintf("dut: %s trim read back %d after writing %d", name, got, code)}
	}
	return nil
}

// readCode reads the code the DAC d holds; a reply that is not a code stops the run
// as a station fault.
func (e *Engine) readCode(ctx context.Context, d DAC) (int, error) {
	name := d.Name
	reply, err := e.dut.Query(ctx, d.Read)
	if err != nil {
		return 0, fmt.Errorf("dut: read %s trim code: %w", name, err)
	}
	c, err := strconv.Atoi(strings.TrimSpace(reply))
	if err != nil {
		return 0, &stop{Fault, fmt.Sprintf("dut: %s trim read-back %q is not a code", name, reply)}
	}
	return c, nil
}
