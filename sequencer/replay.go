package sequencer

import (
	"context"
	"errors"
	"fmt"
	"maps"
	"math"
	"slices"
	"strings"

	"trimline/limits"
)

// ErrNotReplayable is returned for records the station could not judge (FAULT,
// ABORTED), and for schema-1 records without a sweep: there is nothing to
// recompute. A schema-2 record judged before any sweep (a DUT reply that failed
// the unit) replays: its steps say why it ended.
var ErrNotReplayable = errors.New("record has no measurement to replay")

// Replay recomputes a stored record from its raw readings with the files that were
// in force (cfg.Station and cfg.Sequence must be loaded from the stored bytes):
// point statistics, fits, uncertainties, trim codes, results, limit verdicts and
// the unit's verdict, by the same code the engine runs. It touches no instrument.
// The returned record differs from the stored one only where this release computes
// differently; Differences lists where.
func Replay(cfg Config, stored *Record) (*Record, error) {
	if stored.Verdict == Fault || stored.Verdict == Aborted || len(stored.Sweeps) == 0 && stored.Schema < 2 {
		return nil, fmt.Errorf("%s (%s): %w", stored.RunID, stored.Verdict, ErrNotReplayable)
	}
	seq := cfg.Sequence
	rec := &Record{
		Schema: stored.Schema, Metrology: stored.Metrology, RunID: stored.RunID, Serial: stored.Serial, Product: stored.Product, Revision: stored.Revision,
		Station: stored.Station, Operator: stored.Operator, Software: stored.Software,
		Started: stored.Started, Finished: stored.Finished, Files: stored.Files, Instruments: stored.Instruments,
		IdealGain: seq.IdealGain, IdealOffset: seq.IdealOffset, FullScale: seq.FullScale, ResponseUnit: seq.recordResponseUnit(),
		Conditions: stored.Conditions, Coverage: coverage(seq), Engineering: stored.Engineering, RetestOf: stored.RetestOf, Lot: stored.Lot, Site: stored.Site,
		Simulated: stored.Simulated, StimulusUnit: seq.recordStimulusUnit(),
	}
	u := newUnit(cfg, rec, replaying)
	u.stored = stored
	// The steps take the facts of the run (readings, read-backs, what was stored)
	// from the stored record and compute everything else.
	if err := runSteps(context.Background(), u); err != nil {
		return nil, fmt.Errorf("%s: replay: %w", stored.RunID, err)
	}
	finish(u)
	// A review decision applies to a run held for REVIEW: the unit then takes the
	// decision's verdict. On a run that recomputes to anything else it does not
	// apply, and Differences says so.
	if dp := stored.Disposition; dp != nil && rec.Verdict == Review {
		if v, ok := dp.Final(); ok {
			copied := *dp
			rec.Verdict, rec.Disposition = v, &copied
		}
	}
	return rec, nil
}

// Differences lists, in words, one line per difference, every number (and
// every judgement) that a replay computes again and two records of the same run
// state differently: the verdict and every step's status; the ideal transfer,
// units and coverage probability taken from the files; each sweep's point
// statistics; each fit (coefficients, covariances, residuals, degrees of
// freedom, nonlinearity, lack of fit); trim codes, coefficient writes, zero
// checks and re-trim passes; each result's value, validity and whole
// uncertainty (u, νeff, k, U, method, the Monte Carlo interval and its
// validation, the budget's rows); each limit's pass, values and decision
// (tolerance, acceptance limits, guard band, zone, probability outside, TUR).
// A record of metrology revision 0 that has no budget on any result, or no
// lack of fit on any fit, was made before they were kept: they are then not
// compared.
// A record that carries a review decision (Record.Disposition) recomputes to
// REVIEW and then takes the decision's verdict (PASS on accept, FAIL on
// reject); a decision on a run that recomputes to anything but REVIEW is a
// difference.
// Facts of the run that a replay takes from the stored record (readings,
// read-backs, soaks, identities, times) and words (notes, reasons,
// statements) are not compared. Numbers agree when they match to 1e-9
// relative (or 1e-15 absolute), infinities and NaN only themselves; anything
// else is reported with the recorded and the recomputed value, and so is
// every sweep, fit, result or limit that only one of the two records has.
func Differences(recorded, replayed *Record) []string {
	var d differ
	d.same("verdict", recorded.Verdict, replayed.Verdict)
	if dp := recorded.Disposition; dp != nil && replayed.Disposition == nil {
		if _, ok := dp.Final(); !ok {
			d.add("review decision %q: neither %s nor %s", dp.Decision, DecisionAccept, DecisionReject)
		} else {
			d.add("review decision %s of %s: the run recomputes to %s, not REVIEW, so no review decision applies to it",
				dp.Decision, dp.OfCertificate, replayed.Verdict)
		}
	}
	d.num("ideal gain", recorded.IdealGain, replayed.IdealGain)
	d.num("ideal offset", recorded.IdealOffset, replayed.IdealOffset)
	d.num("full scale", recorded.FullScale, replayed.FullScale)
	d.text("stimulus unit", recorded.StimulusUnit, replayed.StimulusUnit)
	d.text("response unit", recorded.ResponseUnit, replayed.ResponseUnit)
	d.num("coverage probability", recorded.Coverage, replayed.Coverage)
	if recorded.Schema >= 2 || len(recorded.Steps) > 0 { // records of schema 1 kept no steps
		d.count("steps", len(recorded.Steps), len(replayed.Steps))
		for i := range min(len(recorded.Steps), len(replayed.Steps)) {
			a, b := recorded.Steps[i], replayed.Steps[i]
			what := fmt.Sprintf("step %d %s", i+1, limits.ChannelKey(a.Name, a.Channel))
			d.text(what+" name", limits.ChannelKey(a.Name, a.Channel), limits.ChannelKey(b.Name, b.Channel))
			d.text(what+" kind", a.Kind, b.Kind)
			d.same(what+" stage", a.Stage, b.Stage)
			d.text(what+" status", a.Status, b.Status)
		}
	}
	sweepDifferences(&d, recorded.Sweeps, replayed.Sweeps)
	fitDifferences(&d, recorded.Fits, replayed.Fits, recorded.Metrology >= 1)
	trimEffectDifferences(&d, recorded.TrimEffects, replayed.TrimEffects)
	d.count("trim codes", len(recorded.Trims), len(replayed.Trims))
	for i := range min(len(recorded.Trims), len(replayed.Trims)) {
		a, b := recorded.Trims[i], replayed.Trims[i]
		dac := limits.ChannelKey(a.DAC, a.Channel)
		d.text(fmt.Sprintf("trim %d DAC", i+1), dac, limits.ChannelKey(b.DAC, b.Channel))
		d.same(dac+" code before trim", a.Before, b.Before)
		d.same(dac+" trim code", a.Code, b.Code)
		d.num(dac+" trim ideal code", a.Ideal, b.Ideal)
		d.num(dac+" trim ideal code u", a.IdealU, b.IdealU)
		d.same(dac+" trim saturated", a.Saturated, b.Saturated)
		d.text(dac+" trim offset", a.Offset, b.Offset)
	}
	coefDifferences(&d, recorded.Coefficients, replayed.Coefficients)
	zeroDifferences(&d, recorded.Zeros, replayed.Zeros)
	d.count("re-trim passes", len(recorded.Retrims), len(replayed.Retrims))
	for i := range min(len(recorded.Retrims), len(replayed.Retrims)) {
		a, b := recorded.Retrims[i], replayed.Retrims[i]
		what := fmt.Sprintf("re-trim %s pass %d (%s)", a.Step, a.Pass, limits.ChannelKey(a.DAC, a.Channel))
		d.text(what, fmt.Sprintf("%s pass %d (%s)", a.Step, a.Pass, limits.ChannelKey(a.DAC, a.Channel)),
			fmt.Sprintf("%s pass %d (%s)", b.Step, b.Pass, limits.ChannelKey(b.DAC, b.Channel)))
		d.same(what+" code", a.Code, b.Code)
		d.num(what+" error", a.Error, b.Error)
		d.num(what+" error u", a.ErrorU, b.ErrorU)
		d.num(what+" sensitivity", a.Sensitivity, b.Sensitivity)
		d.same(what+" sensitivity measured", a.Measured, b.Measured)
		d.same(what+" within bound", a.Within, b.Within)
		d.same(what+" next code", a.Next, b.Next)
	}
	// A per-channel result or outcome is named name@channel.
	budgets := recorded.Metrology >= 1 || slices.ContainsFunc(recorded.Results, func(r Result) bool { return len(r.Budget) > 0 })
	got := map[string]Result{}
	for _, r := range replayed.Results {
		got[limits.ChannelKey(r.Name, r.Channel)] = r
	}
	for _, a := range recorded.Results {
		name := limits.ChannelKey(a.Name, a.Channel)
		b, ok := got[name]
		if !ok {
			d.add("result %s: not computed by this release", name)
			continue
		}
		what := "result " + name
		d.same(what+" valid", a.Valid, b.Valid)
		d.num(what, a.Value, b.Value)
		d.text(what+" unit", a.Unit, b.Unit)
		d.unc(what, a.Unc, b.Unc)
		if budgets { // else the record was made before budgets were kept
			budgetDifferences(&d, what, a.Budget, b.Budget)
		}
	}
	kept := map[string]bool{}
	for _, a := range recorded.Results {
		kept[limits.ChannelKey(a.Name, a.Channel)] = true
	}
	for _, b := range replayed.Results {
		if name := limits.ChannelKey(b.Name, b.Channel); !kept[name] {
			d.add("result %s: not in the record, recomputed %.9g", name, b.Value)
		}
	}
	outs := map[string]limits.Outcome{}
	for _, o := range replayed.Outcomes {
		outs[limits.ChannelKey(o.Name, o.Channel)] = o
	}
	for _, a := range recorded.Outcomes {
		name := limits.ChannelKey(a.Name, a.Channel)
		b, ok := outs[name]
		if !ok {
			d.add("limit %q: not judged by this release", name)
			continue
		}
		outcomeDifferences(&d, fmt.Sprintf("limit %q", name), a, b)
	}
	judged := map[string]bool{}
	for _, a := range recorded.Outcomes {
		judged[limits.ChannelKey(a.Name, a.Channel)] = true
	}
	for _, b := range replayed.Outcomes {
		if name := limits.ChannelKey(b.Name, b.Channel); !judged[name] {
			d.add("limit %q: not in the record, recomputed pass=%v", name, b.Pass)
		}
	}
	return d.d
}

// differ collects differences, one message each, naming the quantity with the
// recorded and the recomputed value.
type differ struct{ d []string }

func (d *differ) add(format string, args ...any) { d.d = append(d.d, fmt.Sprintf(format, args...)) }

// num compares two numbers by same.
func (d *differ) num(what string, a, b float64) {
	if !same(a, b) {
		d.add("%s: recorded %.9g, recomputed %.9g", what, a, b)
	}
}

// text compares two words.
func (d *differ) text(what, a, b string) {
	if a != b {
		d.add("%s: recorded %q, recomputed %q", what, a, b)
	}
}

// same compares two exact values (counts, codes, flags, verdicts).
func (d *differ) same(what string, a, b any) {
	if a != b {
		d.add("%s: recorded %v, recomputed %v", what, a, b)
	}
}

// count compares the lengths of two lists of what.
func (d *differ) count(what string, a, b int) {
	if a != b {
		d.add("%s: recorded %d, recomputed %d", what, a, b)
	}
}

// nums compares two lists of numbers element by element.
func (d *differ) nums(what string, a, b []float64) {
	d.count(what+" count", len(a), len(b))
	for i := range min(len(a), len(b)) {
		d.num(fmt.Sprintf("%s[%d]", what, i), a[i], b[i])
	}
}

// opt compares two optional numbers (nil: none).
func (d *differ) opt(what string, a, b *float64) {
	switch {
	case a == nil && b == nil:
	case a == nil || b == nil:
		d.add("%s: recorded %s, recomputed %s", what, optText(a), optText(b))
	default:
		d.num(what, *a, *b)
	}
}

func optText(v *float64) string {
	if v == nil {
		return "none"
	}
	return fmt.Sprintf("%.9g", *v)
}

// presence reports when one of a and b is there and the other is not; ok is
// true when both are there, to be compared further.
func (d *differ) presence(what string, a, b bool) (ok bool) {
	if a != b {
		d.add("%s: recorded %s, recomputed %s", what, present(a), present(b))
	}
	return a && b
}

func present(ok bool) string {
	if ok {
		return "present"
	}
	return "none"
}

// unc compares two uncertainties in every number they state.
func (d *differ) unc(what string, a, b Uncertainty) {
	d.num(what+" u", a.Std, b.Std)
	d.num(what+" νeff", a.DOF, b.DOF)
	d.num(what+" k", a.K, b.K)
	d.num(what+" U", a.Expanded, b.Expanded)
	d.text(what+" uncertainty method", a.Method, b.Method)
	d.maxUnc(what, a.Max, b.Max)
	if !d.presence(what+" Monte Carlo interval", a.MC != nil, b.MC != nil) {
		return
	}
	m, n := a.MC, b.MC
	what += " Monte Carlo"
	d.num(what+" low end", m.Low, n.Low)
	d.num(what+" high end", m.High, n.High)
	d.text(what+" interval", m.Interval, n.Interval)
	d.same(what+" trials", m.Trials, n.Trials)
	d.same(what+" adaptive", m.Adaptive, n.Adaptive)
	d.same(what+" capped", m.Capped, n.Capped)
	d.num(what+" δ", m.Delta, n.Delta)
	d.num(what+" GUM u", m.GUMStd, n.GUMStd)
	d.num(what+" GUM U", m.GUMExpanded, n.GUMExpanded)
	d.num(what+" d_low", m.DLow, n.DLow)
	d.num(what+" d_high", m.DHigh, n.DHigh)
	d.num(what+" GUM δ", m.GUMDelta, n.GUMDelta)
	d.same(what+" GUM validated", m.Validated, n.Validated)
}

// maxUnc compares how two maximum-type uncertainties were evaluated (Monte
// Carlo of the maximum); both zero for every other result.
func (d *differ) maxUnc(what string, a, b MaxUnc) {
	what += " maximum"
	d.same(what+" points", a.Points, b.Points)
	d.same(what+" trials", a.Trials, b.Trials)
	d.num(what+" mean", a.Mean, b.Mean)
	d.num(what+" bias", a.Bias, b.Bias)
	d.num(what+" low end", a.Low, b.Low)
	d.num(what+" high end", a.High, b.High)
}

// trimEffectDifferences compares, in order, how each trim-effect result's
// uncertainty was evaluated: which instrument errors its two fits shared.
func trimEffectDifferences(d *differ, recorded, replayed []TrimEffect) {
	d.count("trim effects", len(recorded), len(replayed))
	for i := range min(len(recorded), len(replayed)) {
		a, b := recorded[i], replayed[i]
		what := "trim effect " + limits.ChannelKey(a.Result, a.Channel)
		d.text(fmt.Sprintf("trim effect %d", i+1), limits.ChannelKey(a.Result, a.Channel), limits.ChannelKey(b.Result, b.Channel))
		d.text(what+" step", a.Step, b.Step)
		d.text(what+" baseline", a.Baseline, b.Baseline)
		d.text(what+" quantity", a.Quantity, b.Quantity)
		d.text(what+" shared errors", strings.Join(a.Shared, ", "), strings.Join(b.Shared, ", "))
		d.text(what+" independent errors", strings.Join(a.Separate, ", "), strings.Join(b.Separate, ", "))
		d.num(what+" u if independent", a.UIndependent, b.UIndependent)
	}
}

// cov compares two covariance matrices of (intercept, slope) by the
// standard uncertainties and the correlation coefficients they hold: compared
// as they are, variances in V² (1e-12 and below) would fall under same's 1e-15
// absolute floor.
func (d *differ) cov(what string, a, b [2][2]float64) {
	d.num(what+" u(intercept)", math.Sqrt(a[0][0]), math.Sqrt(b[0][0]))
	d.num(what+" u(slope)", math.Sqrt(a[1][1]), math.Sqrt(b[1][1]))
	for _, ij := range [][2]int{{0, 1}, {1, 0}} {
		d.num(fmt.Sprintf("%s correlation[%d][%d]", what, ij[0], ij[1]), correlation(a, ij[0], ij[1]), correlation(b, ij[0], ij[1]))
	}
}

// correlation is c[i][j]/√(c[i][i]·c[j][j]), or c[i][j] itself where a
// variance is 0.
func correlation(c [2][2]float64, i, j int) float64 {
	if v := c[i][i] * c[j][j]; v != 0 {
		return c[i][j] / math.Sqrt(v)
	}
	return c[i][j]
}

// budgetDifferences compares two uncertainty budgets row by row.
func budgetDifferences(d *differ, what string, a, b []BudgetRow) {
	d.count(what+" budget rows", len(a), len(b))
	for i := range min(len(a), len(b)) {
		r, s := a[i], b[i]
		row := fmt.Sprintf("%s budget row %d (%s)", what, i+1, r.Name)
		d.text(row+" input", r.Name, s.Name)
		d.text(row+" type", r.Kind, s.Kind)
		d.num(row+" input u", r.InputU, s.InputU)
		d.text(row+" input unit", r.InputUnit, s.InputUnit)
		d.num(row+" sensitivity", r.Sensitivity, s.Sensitivity)
		d.same(row+" points", r.Points, s.Points)
		d.num(row+" contribution", r.U, s.U)
		d.num(row+" dof", r.DOF, s.DOF)
		d.num(row+" share", r.Share, s.Share)
	}
}

// sweepDifferences compares the point statistics of each recorded sweep with
// the replayed sweep of the same name and channel (the readings and levels
// are the stored ones).
func sweepDifferences(d *differ, recorded, replayed []Sweep) {
	for _, a := range recorded {
		name := limits.ChannelKey(a.Name, a.Channel)
		i := slices.IndexFunc(replayed, func(b Sweep) bool { return b.Name == a.Name && b.Channel == a.Channel })
		if i < 0 {
			d.add("sweep %s: not taken by this release", name)
			continue
		}
		b := replayed[i]
		d.count("sweep "+name+" points", len(a.Points), len(b.Points))
		for j := range min(len(a.Points), len(b.Points)) {
			p, q := a.Points[j], b.Points[j]
			what := fmt.Sprintf("sweep %s point %d", name, j+1)
			d.num(what+" stimulus", p.Stimulus, q.Stimulus)
			d.num(what+" mean", p.Mean, q.Mean)
			d.num(what+" SD", p.SD, q.SD)
			d.same(what+" valid readings", p.Valid, q.Valid)
			d.num(what+" u random", p.URandom, q.URandom)
			d.num(what+" u systematic", p.USys, q.USys)
		}
		d.same("sweep "+name+" stage", a.StageOf(), b.StageOf())
	}
	for _, b := range replayed {
		if !slices.ContainsFunc(recorded, func(a Sweep) bool { return b.Name == a.Name && b.Channel == a.Channel }) {
			d.add("sweep %s: not in the record", limits.ChannelKey(b.Name, b.Channel))
		}
	}
}

// fitDifferences compares each recorded fit with the replayed fit of the same
// step, sweep and channel (a record of schema 1 names no step: the fit of the
// same sweep and channel). Lack of fit is compared when lof (a record of
// metrology revision 1 or later) or when the record kept it on some fit.
func fitDifferences(d *differ, recorded, replayed []FitSummary, lof bool) {
	lof = lof || slices.ContainsFunc(recorded, func(f FitSummary) bool { return f.LackOfFit != nil })
	for _, a := range recorded {
		i := slices.IndexFunc(replayed, func(b FitSummary) bool {
			return b.Sweep == a.Sweep && b.Channel == a.Channel && (b.Step == a.Step || a.Step == "")
		})
		what := fmt.Sprintf("fit %s of sweep %s", a.Step, limits.ChannelKey(a.Sweep, a.Channel))
		if a.Step == "" {
			what = "fit of sweep " + limits.ChannelKey(a.Sweep, a.Channel)
		}
		if i < 0 {
			d.add("%s: not computed by this release", what)
			continue
		}
		b := replayed[i]
		d.same(what+" order", max(a.Order, 1), max(b.Order, 1)) // 0 in records of schema 1: a line
		d.nums(what+" coefficient", a.Coef, b.Coef)
		d.num(what+" intercept", a.Intercept, b.Intercept)
		d.num(what+" slope", a.Slope, b.Slope)
		d.cov(what+" covariance", a.Cov, b.Cov)
		d.cov(what+" total covariance", a.CovTotal, b.CovTotal)
		d.num(what+" residual SD", a.ResidualSD, b.ResidualSD)
		d.same(what+" dof", a.DOF, b.DOF)
		d.num(what+" effective dof", a.DOFEff, b.DOFEff)
		d.nums(what+" residual", a.Residuals, b.Residuals)
		d.num(what+" nonlinearity", a.Nonlinearity, b.Nonlinearity)
		d.text(what+" random part", a.Random, b.Random)
		d.text(what+" source zero", a.SourceZero, b.SourceZero)
		// A record without any lack of fit was made before it was kept.
		if lof && d.presence(what+" lack of fit", a.LackOfFit != nil, b.LackOfFit != nil) {
			l, m := *a.LackOfFit, *b.LackOfFit
			d.text(what+" lack-of-fit method", l.Method, m.Method)
			d.num(what+" lack-of-fit statistic", l.Statistic, m.Statistic)
			d.num(what+" lack-of-fit dof1", l.DOF1, m.DOF1)
			d.num(what+" lack-of-fit dof2", l.DOF2, m.DOF2)
			d.num(what+" lack-of-fit p", l.P, m.P)
			d.num(what+" lack-of-fit α", l.Alpha, m.Alpha)
			d.same(what+" lack-of-fit adequate", l.Adequate, m.Adequate)
		}
	}
	for _, b := range replayed {
		if !slices.ContainsFunc(recorded, func(a FitSummary) bool {
			return b.Sweep == a.Sweep && b.Channel == a.Channel && (b.Step == a.Step || a.Step == "")
		}) {
			d.add("fit %s of sweep %s: not in the record", b.Step, limits.ChannelKey(b.Sweep, b.Channel))
		}
	}
}

// coefDifferences compares the coefficient writes in order.
func coefDifferences(d *differ, recorded, replayed []CoefficientWrite) {
	d.count("coefficient writes", len(recorded), len(replayed))
	for i := range min(len(recorded), len(replayed)) {
		a, b := recorded[i], replayed[i]
		what := fmt.Sprintf("coefficient %s (step %q)", limits.ChannelKey(a.Name, a.Channel), a.Step)
		d.text(fmt.Sprintf("coefficient write %d", i+1), fmt.Sprintf("%s %s", a.Step, limits.ChannelKey(a.Name, a.Channel)),
			fmt.Sprintf("%s %s", b.Step, limits.ChannelKey(b.Name, b.Channel)))
		d.text(what+" adjusts", a.Adjusts, b.Adjusts)
		d.text(what+" format", a.Format, b.Format)
		d.text(what+" unit", a.Unit, b.Unit)
		d.num(what+" ideal value", a.Ideal, b.Ideal)
		d.num(what+" ideal value u", a.IdealU, b.IdealU)
		d.num(what+" value", a.Value, b.Value)
		d.text(what+" word", a.Text, b.Text)
		d.num(what+" resolution", a.Resolution, b.Resolution)
		d.num(what+" read-back value", a.ReadbackValue, b.ReadbackValue)
		d.same(what+" read-back match", a.Match, b.Match)
		d.num(what+" value found", a.FoundValue, b.FoundValue)
		d.same(what+" stored", a.Stored, b.Stored)
	}
}

// zeroDifferences compares the zero checks in order.
func zeroDifferences(d *differ, recorded, replayed []ZeroCheck) {
	d.count("zero checks", len(recorded), len(replayed))
	for i := range min(len(recorded), len(replayed)) {
		a, b := recorded[i], replayed[i]
		what := "zero check " + limits.ChannelKey(a.Name, a.Channel)
		d.text(fmt.Sprintf("zero check %d", i+1), limits.ChannelKey(a.Name, a.Channel), limits.ChannelKey(b.Name, b.Channel))
		d.text(what+" source", a.Source, b.Source)
		d.num(what+" range", a.Range, b.Range)
		d.num(what+" gain", a.Gain, b.Gain)
		d.num(what+" source offset", a.Offset, b.Offset)
		d.unc(what+" source offset", a.Unc, b.Unc)
		d.same(what+" valid", a.Valid, b.Valid)
		d.num(what+" offset spec u", a.SpecU, b.SpecU)
		d.same(what+" applied", a.Applied, b.Applied)
	}
}

// outcomeDifferences compares one limit's outcome: its pass, the values it
// judged, and its decision or unjudged tolerance.
func outcomeDifferences(d *differ, what string, a, b limits.Outcome) {
	d.same(what+" pass", a.Pass, b.Pass)
	for _, name := range slices.Sorted(maps.Keys(a.Values)) {
		v, ok := b.Values[name]
		if !ok {
			d.add("%s value %s: recorded %.9g, recomputed none", what, name, a.Values[name])
			continue
		}
		d.num(what+" value "+name, a.Values[name], v)
	}
	if d.presence(what+" decision", a.Decision != nil, b.Decision != nil) {
		m, n := a.Decision, b.Decision
		d.text(what+" result judged", m.Result, n.Result)
		d.opt(what+" lower tolerance limit", m.Lower, n.Lower)
		d.opt(what+" upper tolerance limit", m.Upper, n.Upper)
		d.text(what+" decision rule", m.Rule, n.Rule)
		d.num(what+" guard factor", m.GuardFactor, n.GuardFactor)
		d.num(what+" guard band", m.Guard, n.Guard)
		d.opt(what+" lower acceptance limit", m.AcceptLower, n.AcceptLower)
		d.opt(what+" upper acceptance limit", m.AcceptUpper, n.AcceptUpper)
		d.num(what+" value", m.Value, n.Value)
		d.num(what+" u", m.Std, n.Std)
		d.num(what+" U", m.U, n.U)
		d.num(what+" k", m.K, n.K)
		d.num(what+" νeff", float64(m.DOF), float64(n.DOF))
		d.same(what+" binary", m.Binary, n.Binary)
		d.text(what+" zone", m.Zone, n.Zone)
		d.num(what+" probability outside", m.POutside, n.POutside)
		d.num(what+" TUR", m.TUR, n.TUR)
		d.same(what+" TUR below minimum", m.TURLow, n.TURLow)
	}
	if d.presence(what+" unjudged tolerance", a.Tolerance != nil, b.Tolerance != nil) {
		m, n := a.Tolerance, b.Tolerance
		d.opt(what+" lower tolerance limit", m.Lower, n.Lower)
		d.opt(what+" upper tolerance limit", m.Upper, n.Upper)
		d.text(what+" decision rule", m.Rule, n.Rule)
		d.num(what+" guard factor", m.GuardFactor, n.GuardFactor)
		d.same(what+" binary", m.Binary, n.Binary)
	}
}

// same is true when a and b agree to 1e-9 relative or 1e-15 absolute; an
// infinity agrees only with itself, NaN only with NaN.
func same(a, b float64) bool {
	switch {
	case math.IsNaN(a) || math.IsNaN(b):
		return math.IsNaN(a) && math.IsNaN(b)
	case math.IsInf(a, 0) || math.IsInf(b, 0):
		return a == b
	}
	return a == b || math.Abs(a-b) <= 1e-15 || math.Abs(a-b) <= 1e-9*math.Max(math.Abs(a), math.Abs(b))
}
