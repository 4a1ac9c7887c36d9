package sequencer

// Stimulus levels as sequence files write them: a voltage, or a current when
// the ideal gain is per ampere (Sequence.StimulusDim).

import (
	"github.com/goccy/go-yaml/ast"

	"trimline/instruments/units"
)

// level is one stimulus level as a step writes it ("2.5 mV", "4 mA"). Its
// dimension is known only once the sequence's ideal gain is read, so it is
// decoded as any quantity and checked against the stimulus when the step is
// checked (Checker.level).
type level struct {
	text string // as written
	ok   bool   // it parsed as a quantity (a parse error was reported at decode)
}

// UnmarshalYAML keeps the level's text; a value that is no quantity at all is
// refused here, positioned at the value.
func (l *level) UnmarshalYAML(n ast.Node) error {
	var q units.Quantity
	err := q.UnmarshalYAML(n)
	*l = level{text: nodeText(n), ok: err == nil}
	return err
}

// nodeText is the text of a scalar node as units reads it.
func nodeText(n ast.Node) string {
	switch v := n.(type) {
	case *ast.StringNode:
		return v.Value
	}
	if tk := n.GetToken(); tk != nil {
		return tk.Value
	}
	return ""
}

// level returns l in the sequence's stimulus dimension, SI units, or reports at
// key that it is of another dimension (as units.ParseAs words it) and returns
// false. A level that did not parse was reported when it was decoded.
func (c *Checker) level(key string, l level) (float64, bool) {
	if !l.ok {
		return 0, false
	}
	v, err := units.ParseAs(l.text, c.seq.stimDim())
	if err != nil {
		per, what := "volt", "voltage"
		if c.seq.stimDim() == units.Ampere {
			per, what = "ampere", "current"
		}
		c.Errorf(key, "%v (the ideal gain is per %s, so the stimulus is a %s)", err, per, what)
		return 0, false
	}
	return v, true
}

// fmtStim formats a stimulus level of dimension d for messages: volts, or
// amperes for a current stimulus.
func fmtStim(d units.Dim, v float64) string {
	if d == units.Ampere {
		return units.Format(v, "A", 4)
	}
	return fmtV(v)
}
