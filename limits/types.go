// Package limits loads the limit files that quality engineers own, compiles every
// limit expression once at load (expr-lang), and judges a unit's named results.
//
// An expression limit is a boolean expression over named results, in the limit's own
// unit: with unit "uV", the result post_offset (volts inside the engine) appears in
// the expression as microvolts. A result that is missing, NaN, infinite or flagged
// can never pass: the judge fails it before the expression runs, because expr-lang
// compares NaN as false and `!(x > 60)` would pass a NaN.
//
// A toleranced limit instead gives one result a tolerance (lower, upper or both, in
// the limit's unit) and judges it under a decision rule with the result's
// measurement uncertainty: simple or guarded acceptance with binary or non-binary
// statements (ILAC-G8:09/2019, JCGM 106:2012), the probability that the true value
// is outside the tolerance, and the test uncertainty ratio (ANSI/NCSL Z540.3-2006
// §5.3). The file's decision section sets the rule and what the unit's overall
// verdict makes of each zone (Set.Policy, Set.Overall).
//
// One file may also hold variants, the limits of other product revisions or
// grades written as changes to its limits list; Load compiles each, and
// Set.Variant and Set.VariantFor return a variant's effective set.
package limits

import (
	"encoding/json"
	"math"

	"trimline/instruments/units"
)

// Catalog lists the result names the engine produces and the dimension of each
// (units.Volt, units.Ratio, units.Count, units.Number). A limit may only use names in the catalog.
type Catalog map[string]units.Dim

// Value is one result handed to Judge: V in SI base units, Valid false when the
// measurement behind it was not a finite, unflagged number (Why says what happened).
type Value struct {
	V     float64
	Valid bool
	Why   string
	// Uncertainty of V in SI units: standard u, expanded U at the limit set's
	// coverage probability with coverage factor K, and effective dof (math.Inf(1)
	// for infinite; 0, not given, is read as infinite too). All zero means "not evaluated": a toleranced limit then judges
	// by simple acceptance and says so in its statement.
	Std, U, K, DOF float64
	// Interval is the kind of Monte Carlo coverage interval U comes from
	// (JCGM 101:2008: "symmetric", §7.7, or "shortest", §7.8); "" for an
	// uncertainty by the law of propagation (JCGM 100), whose k follows from
	// DOF. For a Monte Carlo U the statement names the interval, not νeff.
	Interval string
}

// Outcome is one limit's verdict on one unit, as stored in the run record.
type Outcome struct {
	Name string `json:"name"`
	// Channel is the unit's channel the outcome judges: a limit over
	// per-channel results gives one outcome per channel (or one for the channel
	// it names); "" for a limit of the whole unit. Name and Channel together are
	// unique among a unit's outcomes.
	Channel     string             `json:"channel,omitempty"`
	Description string             `json:"description"`
	Expr        string             `json:"expr"`
	Unit        string             `json:"unit"`
	Uses        []string           `json:"uses"`
	Values      map[string]float64 `json:"values"` // each used result in the limit's unit
	Pass        bool               `json:"pass"`
	Reason      string             `json:"reason,omitempty"`   // why it failed, in words
	Decision    *Decision          `json:"decision,omitempty"` // for toleranced limits
	// Tolerance is set for a toleranced limit that could not be judged under its
	// rule (a result it uses is missing or invalid, or its uncertainty is no
	// number), so no Decision was made: the tolerance as the limit file wrote it,
	// for reports to show as such. nil for expression limits and beside a Decision.
	Tolerance *Unjudged `json:"tolerance,omitempty"`
}

// Unjudged is the tolerance of a toleranced limit that has no Decision, in the
// limit's unit, with the rule it would have been judged by.
type Unjudged struct {
	Lower       *float64 `json:"lower,omitempty"` // tolerance limits TL; nil = unbounded on that side
	Upper       *float64 `json:"upper,omitempty"`
	Rule        string   `json:"rule"`         // RuleSimple or RuleGuarded
	GuardFactor float64  `json:"guard_factor"` // r
	Binary      bool     `json:"binary"`
}

// Zones of a toleranced result (ILAC-G8:09/2019 §4.2.3).
const (
	ZonePass            = "pass"
	ZoneConditionalPass = "conditional pass" // inside the tolerance, within w of it
	ZoneConditionalFail = "conditional fail" // outside the tolerance, within w of it
	ZoneFail            = "fail"
)

// Decision is the decision-rule evaluation of one toleranced limit. Every number is
// in the limit's unit.
type Decision struct {
	Result      string           `json:"result"`
	Lower       *float64         `json:"lower,omitempty"` // tolerance limits TL; nil = unbounded on that side
	Upper       *float64         `json:"upper,omitempty"`
	Rule        string           `json:"rule"`                   // "simple" (w = 0) or "guarded" (w = r·U)
	GuardFactor float64          `json:"guard_factor"`           // r
	Guard       float64          `json:"guard"`                  // w
	AcceptLower *float64         `json:"accept_lower,omitempty"` // acceptance limits AL = TL ± w
	AcceptUpper *float64         `json:"accept_upper,omitempty"`
	Value       float64          `json:"value"`
	Std         float64          `json:"u"`         // standard uncertainty; 0 with U and K when not evaluated
	U           float64          `json:"U"`         // expanded uncertainty at the set's coverage
	K           float64          `json:"k"`         // coverage factor of U
	DOF         DegreesOfFreedom `json:"dof"`       // effective degrees of freedom; +Inf = infinite (normal distribution), written 0 in JSON
	Binary      bool             `json:"binary"`    // binary statement (pass/fail) or non-binary (four zones)
	Zone        string           `json:"zone"`      // one of the Zone constants
	POutside    float64          `json:"p_outside"` // probability that the true value lies outside the tolerance; for an accepted result the specific false-accept probability
	TUR         float64          `json:"tur"`       // (upper − lower)/(2·U95); 0 when one-sided or U unknown
	TURLow      bool             `json:"tur_low"`   // below the set's minimum TUR
	Statement   string           `json:"statement"` // the decision rule and its outcome in words
}

// DegreesOfFreedom is the effective degrees of freedom of an uncertainty:
// math.Inf(1) for infinite, as everywhere in trimline. JSON has no infinity, so in
// JSON an infinite value is written 0 (no finite dof is 0) and 0 is read back as
// infinite; a record's JSON is the same as when the decision kept 0 in memory.
// NaN and −Inf, which the judge never produces, are written as the ledger's
// canonical JSON writes them ("NaN", "-Infinity") and read back.
type DegreesOfFreedom float64

// MarshalJSON writes the number as json.Marshal writes a float64, 0 for +Inf.
func (d DegreesOfFreedom) MarshalJSON() ([]byte, error) {
	v := float64(d)
	switch {
	case math.IsInf(v, 1):
		return []byte("0"), nil
	case math.IsInf(v, -1):
		return []byte(`"-Infinity"`), nil
	case math.IsNaN(v):
		return []byte(`"NaN"`), nil
	}
	return json.Marshal(v)
}

// UnmarshalJSON reads a number, 0 as +Inf, or the strings "NaN", "Infinity" and
// "-Infinity".
func (d *DegreesOfFreedom) UnmarshalJSON(b []byte) error {
	var s string
	if json.Unmarshal(b, &s) == nil {
		switch s {
		case "NaN":
			*d = DegreesOfFreedom(math.NaN())
			return nil
		case "Infinity":
			*d = DegreesOfFreedom(math.Inf(1))
			return nil
		case "-Infinity":
			*d = DegreesOfFreedom(math.Inf(-1))
			return nil
		}
	}
	var v float64
	if err := json.Unmarshal(b, &v); err != nil {
		return err
	}
	if v == 0 {
		v = math.Inf(1)
	}
	*d = DegreesOfFreedom(v)
	return nil
}
