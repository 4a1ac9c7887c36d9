package certificate

import (
	"fmt"
	"slices"
	"strings"
	"trimline/instruments/units"

	"trimline/reports/internal/pdfdoc"
	"trimline/sequencer"
)

// The effect of the trim (sequencer.Record.TrimEffects) and how the
// uncertainty of a maximum was evaluated (sequencer.Uncertainty.Max): both
// printed from the record as it says them.

// trimEffects is the table of the trim's effect: each offset_change and
// gain_change result with its uncertainty, the uncertainty it would have if the
// two sweeps were treated as independent, and which instrument errors the
// sweeps shared; under it, what that means for the verify sweep.
func (d *doc) trimEffects() {
	cols, rows, bands, shared, separate := d.trimEffectTable()
	if len(rows) == 0 {
		return
	}
	d.tableSection("Effect of the trim", cols, rows, bands)
	d.note(trimEffectNote(shared, separate))
}

// trimEffectTable is the trim's-effect table and whether any of its rows has
// instrument errors the two sweeps share, and any that they do not.
func (d *doc) trimEffectTable() (cols []pdfdoc.Column, rows []pdfdoc.Row, bands []pdfdoc.Band, shared, separate bool) {
	effects := d.rec.TrimEffects
	cols = []pdfdoc.Column{
		{Title: "Result", W: 46, Align: "L"},
		{Title: "Change ± U", W: 42, Align: "R"},
		{Title: "u", W: 24, Align: "R"},
		{Title: "u if independent", W: 26, Align: "R"},
		{Title: "Instrument errors", W: 42, Align: "L", Gap: 4},
	}
	var cb channelBands
	for _, te := range byChannel(d, effects, func(t sequencer.TrimEffect) string { return t.Channel }) {
		r, ok := d.resultIn(te.Result, te.Channel)
		if !ok {
			continue
		}
		cb.row(len(rows), te.Channel)
		name := pdfdoc.Cell{{Text: te.Result, St: pdfdoc.Bold}, {Text: "from " + te.Baseline + " to " + te.Step, St: pdfdoc.Small}}
		sh := d.shown(r) // as the results table writes it, in its unit
		unit, scale := sh.unit, sh.scale
		uText, indep := "—", "—"
		if r.Valid && hasU(r.Unc.Std) {
			uText = fmtStdU(r.Unc.Std/scale, unit)
		}
		if hasU(te.UIndependent) {
			indep = fmtStdU(te.UIndependent/scale, unit)
		}
		errs := "shared by both sweeps: cancel"
		switch {
		case len(te.Shared) > 0 && len(te.Separate) > 0:
			errs = "shared: " + strings.Join(te.Shared, ", ") + "; independent (other range or instrument): " + strings.Join(te.Separate, ", ")
		case len(te.Separate) > 0:
			errs = "independent (other range or instrument): " + strings.Join(te.Separate, ", ")
		case len(te.Shared) == 0:
			errs = "none"
		}
		shared = shared || len(te.Shared) > 0
		separate = separate || len(te.Separate) > 0
		rows = append(rows, pdfdoc.Row{name, c1(sh.withU, pdfdoc.Body), c1(uText, pdfdoc.Body), c1(indep, pdfdoc.Body), c1(errs, pdfdoc.Small)})
	}
	return cols, rows, cb.get(), shared, separate
}

// trimEffectNote is the small print under the trim-effect table.
func trimEffectNote(shared, separate bool) string {
	s := "Change: the result of the later fit less that of the earlier (the unit as left less the unit as found), " +
		"u and U by the law of propagation (JCGM 100 §5.2: errors common to both fits enter through the difference of their sensitivities). " +
		"u if independent: the two fits' uncertainties combined as if they shared nothing."
	if shared {
		s += " The verify sweep cannot detect errors of the station's own instruments: they are shared by both sweeps; their calibration covers them."
	}
	if separate {
		s += " Errors marked independent come from another range or instrument in the two sweeps and do not cancel."
	}
	return s
}

// fmtStdU writes a standard uncertainty v (already in unit) to two significant
// digits, rounded up as an expanded uncertainty is (units.RoundU).
func fmtStdU(v float64, unit string) string {
	r, dec := units.RoundU(v)
	if dec > 15 || dec < -15 {
		return strings.TrimSpace(fmtNum(v) + " " + dispUnit(unit))
	}
	return strings.TrimSpace(units.FormatAt(r, max(dec, 0)) + " " + dispUnit(unit))
}

// maximumNote says, under the results, how the uncertainty of each result that
// is a maximum (Uncertainty.Method sequencer.MethodMaxMC) was evaluated: the
// Monte Carlo of the maximum of N points (JCGM 101), what the value and U are,
// and each such result's coverage interval and estimated bias.
func (d *doc) maximumNote() {
	var per []string
	var counts [][2]int // points and trials of each result, in order
	for _, r := range byChannel(d, d.rec.Results, func(r sequencer.Result) string { return r.Channel }) {
		m := r.Unc.Max
		if r.Unc.Method != sequencer.MethodMaxMC || !r.Valid || m.Trials == 0 {
			continue
		}
		unit, scale := resultUnit(r)
		_, dec := units.RoundU(r.Unc.Expanded / scale)
		if dec > 15 || dec < -15 {
			dec = 3
		}
		name := r.Name
		if r.Channel != "" {
			name += " (" + chanWord(r.Channel) + ")"
		}
		u := dispUnit(unit)
		per = append(per, fmt.Sprintf("%s: interval %s to %s %s, shift %s %s", name,
			units.FormatAt(m.Low/scale, dec), units.FormatAt(m.High/scale, dec), u, signed(units.FormatAt(m.Bias/scale, dec)), u))
		counts = append(counts, [2]int{m.Points, m.Trials})
	}
	if len(per) == 0 {
		return
	}
	// One count of points and trials when every maximum shares it, else each
	// result says its own.
	head := "of N points, JCGM 101 (N and the trials for each result below; "
	if !slices.ContainsFunc(counts, func(c [2]int) bool { return c != counts[0] }) {
		head = fmt.Sprintf("of %d points, JCGM 101 (%d trials; ", counts[0][0], counts[0][1])
	} else {
		for i, c := range counts {
			per[i] += fmt.Sprintf(" (%d points, %d trials)", c[0], c[1])
		}
	}
	d.note("MC-max — uncertainty of a maximum: Monte Carlo of the maximum " + head + "every point's random error, " +
		"the pooled Type A scale drawn once a trial, and for a largest error the instruments' shared errors). " +
		"The value is the observed maximum, uncorrected; the shift stated is the trials' mean less it: from the points' noise it " +
		"means the observed maximum reads high, from the instruments' shared errors that the true maximum may lie higher; " +
		"± U is the smallest interval about it that holds the " + fmtCoverage(d.rec.Coverage) +
		" probabilistically symmetric coverage interval of the trials (JCGM 101 §7.7). " + strings.Join(per, "; ") + ".")
}

// signed writes a number with its sign, "+0.02" or "−0.02".
func signed(s string) string {
	if strings.HasPrefix(s, "−") || strings.HasPrefix(s, "-") {
		return s
	}
	return "+" + s
}
