// The step kind DEVELOPERS.md shows (How to add a step kind), compiled and run
// by TestPortReadingKind.

package sequencer_test

import (
	"context"
	"fmt"
	"strconv"
	"strings"

	"trimline/instruments/units"
	"trimline/sequencer"
)

func init() {
	sequencer.RegisterStep(sequencer.StepKind{Name: "port_reading",
		About: "asks the unit for a number over its port and records it as a result",
		New:   func() sequencer.Step { return new(portReading) }})
}

// portReading is port_reading as the sequence file writes it: the loader decodes
// the step's keys (all but kind, name and skip_if) into these fields.
type portReading struct {
	Port   string `yaml:"port"`   // the DUT port role; default dut
	Query  string `yaml:"query"`  // what the unit answers with a number
	Unit   string `yaml:"unit"`   // V (default) or code
	Result string `yaml:"result"` // the name limit files judge it by
}

// Check runs once, at load: it reports every problem at its key and declares
// the role and the result.
func (s *portReading) Check(c *sequencer.Checker) {
	if s.Port == "" {
		s.Port = sequencer.RoleDUT
	}
	c.Use(s.Port, sequencer.DUTPort)
	if s.Query == "" {
		c.Errorf("", "missing required key \"query\" (what the unit answers with a number)")
	}
	dim := units.Volt
	switch s.Unit {
	case "", "V":
	case "code":
		dim = units.Count
	default:
		c.Errorf("unit", "expected V or code, found %q", s.Unit)
	}
	if s.Result == "" {
		c.Errorf("", "missing required key \"result\" (the name limit files judge it by)")
		return
	}
	c.Declare("result", sequencer.ResultDef{Name: s.Result, Dim: dim, About: "the answer to " + s.Query})
}

// Run does the step for one unit. The step value is shared by every unit: what
// the run learns goes into u.
func (s *portReading) Run(ctx context.Context, u *sequencer.Unit) error {
	switch {
	case u.Replaying(): // what the unit answered is a fact of the run: take it from the record
		for _, r := range u.Stored().Results {
			if r.Name == s.Result && r.Valid {
				u.Set(s.Result, r.Value)
				return nil
			}
		}
		u.Invalid(s.Result, "no valid "+s.Result+" in the stored record")
		return nil
	case u.Predicting(): // on paper: the station's instruments add no uncertainty to it
		return nil
	}
	port, err := u.Port(s.Port)
	if err != nil {
		return err
	}
	var reply string
	err = u.Do(ctx, func(ctx context.Context) (err error) {
		reply, err = port.Query(ctx, s.Query)
		return err
	})
	if err != nil { // the station could not ask: a station fault
		return fmt.Errorf("%s: %q: %w", s.Port, s.Query, err)
	}
	v, err := strconv.ParseFloat(strings.TrimSpace(reply), 64)
	if err != nil { // the unit answered nonsense: every limit that uses it fails
		u.Invalid(s.Result, fmt.Sprintf("%s answered %q to %q: not a number", s.Port, reply, s.Query))
		return nil
	}
	u.Set(s.Result, v)
	return nil
}
