package certificate

import (
	"strings"

	"trimline/limits"
	"trimline/sequencer"
)

// One quantity, one number: a recorded result is written the same way in every
// table of the certificate that shows it (the results table, the fits table,
// the budget's headings, "Other results", the trim's effect, the station zero).
// The results table sets the form: a result a toleranced limit judged is
// written as that limit's decision writes it (its value to U's decimal place,
// JCGM 100:2008 §7.2.6, in the limit's unit: Decision.ValueText, UText), any
// other in the unit resultUnit picks for it (fmtResultU). Quantities that are
// not results (a fit's intercept and slope, its residual s) keep their own
// digits.

// shown is how every table writes one result: the value alone and the value
// with its U, each with its unit ("−0.43 mV", "−0.43 mV ± 0.10 mV"), and the
// unit and SI scale of the numbers (for a column of standard uncertainties
// beside them: "mV", 1e-3).
type shown struct {
	value, withU string
	unit         string
	scale        float64
}

// judgedBy is the toleranced outcome whose decision judged result r (its name
// and channel), first in the results table's order; false when none did.
func (d *doc) judgedBy(r sequencer.Result) (limits.Outcome, bool) {
	for _, o := range d.outcomesByStage() {
		dd := o.Decision
		if dd == nil || dd.Result != r.Name {
			continue
		}
		if ch := outcomeChannel(o); ch == r.Channel || ch == "" {
			return o, true
		}
	}
	return limits.Outcome{}, false
}

// shown returns how result r is written wherever it appears: as the results
// table writes it.
func (d *doc) shown(r sequencer.Result) shown {
	if o, ok := d.judgedBy(r); ok && r.Valid && finite(r.Value) && finite(o.Decision.Value) {
		so := d.shownOutcome(o)
		withU := fmtDecisionWithU(o.Decision, so.Unit)
		if unit := baseUnit(so.Unit); unitScale(unit) > 0 {
			return shown{value: valueOf(withU), withU: withU, unit: unit, scale: unitScale(unit)}
		}
	}
	withU := fmtResultU(r)
	unit, scale := resultUnit(shownResult(r))
	return shown{value: valueOf(withU), withU: withU, unit: unit, scale: scale}
}

// valueOf is the value of "v unit ± U unit" with its unit: "v unit"; of
// "v ± U counts" (a long unit written once), "v counts".
func valueOf(withU string) string {
	v, rest, ok := strings.Cut(withU, " ± ")
	if !ok {
		return withU
	}
	if i := strings.LastIndexByte(rest, ' '); i >= 0 && !strings.Contains(v, " ") {
		return v + rest[i:]
	}
	return v
}

// fitResult is the result of quantity (a fit's "offset", "gain_error",
// "nonlinearity") that fit f computed, found by its step and channel; false in
// records that do not name the step of a result (schema 1) or when the fit
// step did not declare it.
func (d *doc) fitResult(f sequencer.FitSummary, quantity string) (sequencer.Result, bool) {
	if f.Step == "" {
		return sequencer.Result{}, false
	}
	for _, r := range d.rec.Results {
		if r.Step == f.Step && r.Channel == f.Channel && r.QuantityOf() == quantity && r.Valid && finite(r.Value) {
			return r, true
		}
	}
	return sequencer.Result{}, false
}
