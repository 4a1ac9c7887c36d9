// Package limits loads the limit files that quality engineers own, compiles every
// limit expression once at load (expr-lang), and judges a unit's named results.
//
// A limit is a boolean expression over named results, written in the limit's own
// unit: with unit "uV", the result post_offset (volts inside the engine) appears in
// the expression as microvolts. A result that is missing, NaN, infinite or flagged
// can never pass: the judge fails it before the expression runs, because expr-lang
// compares NaN as false and `!(x > 60)` would pass a NaN.
package limits

import "trimline/sequencer/units"

// Catalog lists the result names the engine produces and the dimension of each
// (units.Volt, units.Ratio, units.Count). A limit may only use names in the catalog.
type Catalog map[string]units.Dim

// Value is one result handed to Judge: V in SI base units, Valid false when the
// measurement behind it was not a finite, unflagged number (Why says what happened).
type Value struct {
	V     float64
	Valid bool
	Why   string
}

// Outcome is one limit's verdict on one unit, as stored in the run record.
type Outcome struct {
	Name        string             `json:"name"`
	Description string             `json:"description"`
	Expr        string             `json:"expr"`
	Unit        string             `json:"unit"`
	Uses        []string           `json:"uses"`
	Values      map[string]float64 `json:"values"` // each used result in the limit's unit
	Pass        bool               `json:"pass"`
	Reason      string             `json:"reason,omitempty"` // why it failed, in words
}
