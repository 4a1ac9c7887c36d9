package certificate

import (
	"sort"
	"strings"

	"trimline/limits"
	"trimline/reports/internal/pdfdoc"
	"trimline/sequencer"
)

// verdictCell is a PASS/FAIL cell in its colour.
func verdictCell(pass bool) pdfdoc.Cell {
	if pass {
		return c1("PASS", pdfdoc.Bold.With(pdfdoc.Pass))
	}
	return c1("FAIL", pdfdoc.Bold.With(pdfdoc.Fail))
}

// conditional reports whether a decision puts its result in a conditional zone
// under a non-binary statement. (A binary statement may record a conditional zone,
// but its verdict is plainly fail.)
func conditional(d *limits.Decision) bool {
	return d != nil && !d.Binary && (d.Zone == limits.ZoneConditionalPass || d.Zone == limits.ZoneConditionalFail)
}

// held reports whether a limit did not pass without having failed outright: a
// conditional zone, or a pass held back by a low TUR, in a record the station sent
// to review. (Outcome.Pass is false for both; the policy that made them review is
// the limit file's, and the record's REVIEW verdict says it applied.)
func (d *doc) held(o limits.Outcome) bool {
	if o.Pass || o.Decision == nil || d.rec.Verdict != sequencer.Review && d.decided() == nil {
		return false
	}
	return conditional(o.Decision) || o.Decision.Zone == limits.ZonePass
}

// zoneCell is the decision cell of a toleranced limit: PASS and FAIL as for an
// expression limit, the conditional zones in words in their colours, and under it
// "held for review" where the record was sent to review.
func (d *doc) zoneCell(o limits.Outcome) pdfdoc.Cell {
	dd := o.Decision
	var c pdfdoc.Cell
	switch {
	case dd.Binary && dd.Zone != limits.ZonePass && dd.Zone != limits.ZoneFail:
		c = pdfdoc.Cell{{Text: "FAIL", St: pdfdoc.Bold.With(pdfdoc.Fail)}, {Text: dd.Zone + " zone, binary", St: pdfdoc.Small}}
	case dd.Zone == limits.ZoneConditionalPass:
		c = c1("conditional pass", pdfdoc.Bold.With(colCondPass))
	case dd.Zone == limits.ZoneConditionalFail:
		c = c1("conditional fail", pdfdoc.Bold.With(colCondFail))
	case dd.Zone == limits.ZonePass && !o.Pass:
		c = c1("PASS", pdfdoc.Bold.With(colCondPass)) // held back: see the reason
	default:
		c = verdictCell(o.Pass)
	}
	if d.held(o) {
		c = append(c, pdfdoc.Span{Text: "held for review", St: pdfdoc.Small})
	}
	return c
}

// accepted reports whether a decision accepts its result (pass, or conditional pass
// under a non-binary statement), so that a false accept is possible.
func accepted(d *limits.Decision) bool {
	return d.Zone == limits.ZonePass || d.Zone == limits.ZoneConditionalPass && !d.Binary
}

// stageTitle is the band title over the limits of a stage, naming the sweeps
// the record holds of that stage: "As found: before adjustment (pre-trim sweep)".
func (d *doc) stageTitle(s stage) string {
	t := "Adjustment and other checks"
	switch s {
	case stageFound:
		t = "As found: before adjustment"
	case stageLeft:
		t = "As left: after adjustment"
	default:
		return t
	}
	if names := d.sweepNames(s); names != "" {
		t += " (" + names + ")"
	}
	return t
}

// result returns the record's result of that name.
func (d *doc) result(name string) (sequencer.Result, bool) {
	for _, r := range d.rec.Results {
		if r.Name == name {
			return r, true
		}
	}
	return sequencer.Result{}, false
}

// outcomesByStage returns the outcomes as found, then as left, then the others,
// each group by channel in the record's order of channels, then in file order.
func (d *doc) outcomesByStage() []limits.Outcome {
	out := append([]limits.Outcome(nil), d.rec.Outcomes...)
	chans := d.channels()
	sort.SliceStable(out, func(i, j int) bool {
		si, sj := outcomeStage(d.rec, out[i]), outcomeStage(d.rec, out[j])
		if si != sj {
			return si < sj
		}
		return chanIndex(chans, outcomeChannel(out[i])) < chanIndex(chans, outcomeChannel(out[j]))
	})
	return out
}

// measuredCell is the measured value of a limit with its expanded uncertainty and,
// below it, the coverage factor, degrees of freedom and method (or "U not
// evaluated"), in a column w mm wide. A toleranced limit shows its decision's numbers; an expression limit
// shows each result it uses, its U converted to the limit's unit.
func (d *doc) measuredCell(o limits.Outcome, w float64) pdfdoc.Cell {
	if dd := o.Decision; dd != nil {
		v, ok := o.Values[dd.Result]
		switch {
		case !ok && len(o.Values) == 0:
			return c1("not measured", pdfdoc.Body)
		case ok && !finite(v), !finite(dd.Value):
			return c1("not valid", pdfdoc.Body)
		}
		// The decision's dof is +Inf for "infinite or unknown"; the result's own
		// uncertainty tells them apart (math.Inf(1) for infinite).
		r, _ := d.resultIn(dd.Result, outcomeChannel(o))
		dof := float64(dd.DOF)
		if hasU(r.Unc.Expanded) && (dof == 0 || !finite(dof)) {
			dof = r.Unc.DOF
		}
		sub := uncNote(dd.U, dd.K, dof, r.Unc)
		return append(d.valueSpans(fmtDecisionWithU(dd, o.Unit), w), pdfdoc.Span{Text: sub, St: pdfdoc.Small})
	}
	vals := outcomeValues(o) // the keys in order, for the "not measured" case
	keys := outcomeKeys(o)
	if len(keys) == 0 {
		return c1(vals[0], pdfdoc.Body)
	}
	scale := unitScale(baseUnit(o.Unit))
	var c pdfdoc.Cell
	anyU := false
	for _, k := range keys {
		v := o.Values[k]
		r, _ := d.resultIn(k, outcomeChannel(o))
		U := 0.0
		if scale > 0 && hasU(r.Unc.Expanded) {
			U = r.Unc.Expanded / scale
		}
		text := fmtWithU(v, U, o.Unit)
		if len(keys) > 1 {
			text = k + " = " + text
		}
		c = append(c, d.valueSpans(text, w)...)
		if hasU(U) && finite(v) {
			anyU = true
			c = append(c, pdfdoc.Span{Text: uncNote(U, r.Unc.K, r.Unc.DOF, r.Unc), St: pdfdoc.Small})
		}
	}
	if !anyU && !isCount(o.Unit) {
		c = append(c, pdfdoc.Span{Text: "U not evaluated", St: pdfdoc.Small})
	}
	return c
}

// valueSpans is a value with its uncertainty, "v ± U", as one line of a cell w
// mm wide, or when it does not fit, as two: the value, then "± U", so that
// the page never breaks a number from its unit. (Without a page to measure
// on, one line.)
func (d *doc) valueSpans(text string, w float64) pdfdoc.Cell {
	v, u, ok := strings.Cut(text, " ± ")
	if !ok || d.PDF == nil || d.TextWidth(text, pdfdoc.Body) <= w-2*pdfdoc.PadX {
		return c1(text, pdfdoc.Body)
	}
	return pdfdoc.Cell{{Text: v, St: pdfdoc.Body}, {Text: "± " + u, St: pdfdoc.Body}}
}

// acceptSpans is the acceptance interval under a tolerance, "accept −9.5 …
// 9.5 µA", on one line of a cell w mm wide, or when it does not fit, the
// word on one line and the interval whole on the next, so that the unit is
// never left alone on a line. (Without a page to measure on, one line.)
func (d *doc) acceptSpans(interval string, w float64) pdfdoc.Cell {
	text := "accept " + interval
	if d.PDF == nil || d.TextWidth(text, pdfdoc.Small) <= w-2*pdfdoc.PadX {
		return c1(text, pdfdoc.Small)
	}
	return pdfdoc.Cell{{Text: "accept", St: pdfdoc.Small}, {Text: interval, St: pdfdoc.Small}}
}

// results is the table of every limit's outcome, as found before adjustment and
// as left after it, by stage and channel. Toleranced limits (with a decision)
// show the tolerance, the acceptance interval, the zone, the TUR and the
// false-accept probability; limits written as expressions show the expression.
func (d *doc) results() {
	t := d.resultsTable()
	d.tableSection("Results against limits", t.cols, t.rows, t.bands)
	if len(t.rows) == 0 {
		return
	}
	d.note("Under each limit, in grey: the measurand its result is, and the fit or sweep it comes from (best-fit-line offset: the fitted line at 0 " + d.stim().zeroName() +
		" in; terminal offset: the output measured at 0 " + d.stim().zeroName() + " in).")
	if bad := d.inadequateFits(); len(bad) > 0 {
		fits := "fit " + bad[0]
		if len(bad) > 1 {
			fits = "fits " + andList(bad)
		}
		d.note("Lack of fit: the straight-line model is not adequate for " + fits + " (JCGM 100:2008 §4.1.2): the unit's transfer is not a straight line, " +
			"so the best-fit-line results describe the line that fits best, not the output at one input. See “Straight-line fits”.")
	}
	if t.decided {
		d.note(resultsNote)
	}
	if t.turLow {
		d.note("¹ Test uncertainty ratio below the minimum the limit file requires: the uncertainty is large against the tolerance.")
	}
	if t.exprs && !t.decided {
		d.note("Each limit expression is written in the unit of its measured value.")
	}
}

// resultsNote explains the columns of the results table, each number as it is
// computed: U as the record states it (JCGM 100:2008 §7.2.6), the acceptance
// limits from that U (ILAC-G8:09/2019 §4.1), the TUR of ANSI/NCSL Z540.3-2006
// §5.3 with U95 obtained from the stated U, and the PFA.
const resultsNote = "U: expanded uncertainty, two significant digits rounded up (JCGM 100:2008 §7.2.6), the value to its decimal place; " +
	"k: coverage factor; νeff: effective degrees of freedom, truncated (JCGM 100:2008 G.4.1). " +
	"Acceptance limits: the tolerance limits moved inward by w = r·U, from the stated U (ILAC-G8:09/2019 §4.1). " +
	"TUR = (upper − lower tolerance limit) / (2·U95), U95 = U·k95/k with k95 the Student-t factor for 95 % at νeff " +
	"(ANSI/NCSL Z540.3-2006 §5.3), three significant digits; “—” when one-sided or without U. " +
	"PFA: the specific false-accept probability of this unit, the probability that its true value lies outside the tolerance given the value measured and accepted " +
	"(the specific risk of JCGM 106:2012 §9.5, u = U/k), not the global PFA of ANSI/NCSL Z540.3-2006 over a population."

// resultsTable is the results table and what its notes must explain: whether a
// limit is toleranced (decided), a TUR is low, a limit is an expression.
type resultsTable struct {
	cols                   []pdfdoc.Column
	rows                   []pdfdoc.Row
	bands                  []pdfdoc.Band
	decided, turLow, exprs bool
}

// resultsTable lays out the rows of the results table: a band per stage, and
// per channel within it when outcomes name their channel.
func (d *doc) resultsTable() resultsTable {
	outs := d.outcomesByStage()
	decided := false
	for _, o := range outs {
		decided = decided || o.Decision != nil || o.Tolerance != nil
	}
	cols := []pdfdoc.Column{
		{Title: "Limit", W: 50, Align: "L"},
		{Title: "Measured value ± U", W: 44, Align: "R"},
		{Title: "Limit expression", W: 66, Align: "L", Gap: 4},
		{Title: "Verdict", W: 20, Align: "C"},
	}
	if decided {
		cols = []pdfdoc.Column{
			{Title: "Limit", W: 48, Align: "L"},
			{Title: "Measured value ± U", W: 36, Align: "R"},
			{Title: "Tolerance · acceptance", W: 40, Align: "L", Gap: 3},
			{Title: "Decision", W: 22, Align: "C"},
			{Title: "TUR", W: 15, Align: "R"}, // "3.71:1 ¹" on one line
			{Title: "PFA", W: 19, Align: "R"},
		}
	}
	var rows []pdfdoc.Row
	var bands []pdfdoc.Band
	type group struct {
		st stage
		ch string
	}
	last := group{st: -1}
	turLow, exprs := false, false
	for _, o := range outs {
		o = d.shownOutcome(o)
		if g := (group{outcomeStage(d.rec, o), outcomeChannel(o)}); g != last {
			title := d.stageTitle(g.st)
			if g.ch != "" {
				title += " — " + chanWord(g.ch)
			}
			bands = append(bands, pdfdoc.Band{At: len(rows), Title: title})
			last = g
		}
		name := pdfdoc.Cell{{Text: o.Name, St: pdfdoc.Bold}}
		if o.Description != "" {
			name = append(name, pdfdoc.Span{Text: o.Description, St: pdfdoc.Small})
		}
		for _, m := range d.measurandLines(o) {
			name = append(name, pdfdoc.Span{Text: m, St: pdfdoc.Small.With(pdfdoc.Muted)})
		}
		meas := d.measuredCell(o, cols[1].W)
		// An expression limit's reason says what was false; a toleranced limit's
		// is in the reasons above and in its decision statement, and its zone is
		// in the row, so it is not repeated here.
		reason := func(c pdfdoc.Cell) pdfdoc.Cell {
			if !o.Pass && o.Reason != "" {
				c = append(c, pdfdoc.Span{Text: o.Reason, St: pdfdoc.Small.With(pdfdoc.Fail)})
			}
			return c
		}
		dd := o.Decision
		switch {
		case dd == nil && o.Tolerance != nil:
			// A toleranced limit whose result could not be judged: its tolerance as
			// the file wrote it, and why there is no decision.
			// Not measured: the reasons above say why; otherwise (an uncertainty
			// that is no number) the reason says it here.
			t := o.Tolerance
			tol := pdfdoc.Cell{{Text: fmtInterval(t.Lower, t.Upper, o.Unit, func(v float64, _ bool) string { return fmtLimitNum(v) }), St: pdfdoc.Body}}
			if len(o.Values) == 0 {
				tol = append(tol, pdfdoc.Span{Text: "not measured: no decision", St: pdfdoc.Small})
			} else {
				tol = reason(append(tol, pdfdoc.Span{Text: "no decision", St: pdfdoc.Small}))
			}
			na := c1("—", pdfdoc.Small)
			rows = append(rows, pdfdoc.Row{name, meas, tol, verdictCell(o.Pass), na, na})
		case dd == nil:
			exprs = true
			mono := stMono
			if decided {
				mono = stMono.Sized(6.5) // a narrower column
			}
			expr := reason(pdfdoc.Cell{{Text: o.Expr, St: mono}})
			if decided {
				na := c1("—", pdfdoc.Small)
				rows = append(rows, pdfdoc.Row{name, meas, expr, verdictCell(o.Pass), na, na})
			} else {
				rows = append(rows, pdfdoc.Row{name, meas, expr, verdictCell(o.Pass)})
			}
		default:
			tol := pdfdoc.Cell{{Text: fmtTolerance(dd, o.Unit), St: pdfdoc.Body}}
			switch {
			case dd.Rule == "guarded" && (dd.AcceptLower != nil || dd.AcceptUpper != nil):
				tol = append(tol, d.acceptSpans(fmtAcceptance(dd, o.Unit), cols[2].W-cols[2].Gap)...)
			case dd.Rule == "simple":
				tol = append(tol, pdfdoc.Span{Text: "simple acceptance, w = 0", St: pdfdoc.Small})
			case dd.Rule != "":
				tol = append(tol, pdfdoc.Span{Text: "rule " + dd.Rule, St: pdfdoc.Small})
			}
			// TUR and PFA as the decision statement writes them.
			tur := c1(dd.TURText(), pdfdoc.Body)
			switch {
			case dd.TURText() == "—":
				tur = c1("—", pdfdoc.Small)
			case dd.TUR >= 1e3:
				tur = c1(dd.TURText(), pdfdoc.Small) // four or more digits: the small size fits the column
			}
			if dd.TURLow {
				tur = c1(dd.TURText()+" ¹", pdfdoc.Bold.With(colCondPass))
				turLow = true
			}
			pfa := c1("—", pdfdoc.Small)
			if accepted(dd) && hasU(dd.U) && finite(dd.POutside) {
				pfa = c1(dd.PFAText(), pdfdoc.Body)
			}
			rows = append(rows, pdfdoc.Row{name, meas, tol, d.zoneCell(o), tur, pfa})
		}
	}
	return resultsTable{cols, rows, bands, decided, turLow, exprs}
}
