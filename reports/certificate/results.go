package certificate

import (
	"sort"

	"trimline/limits"
	"trimline/sequencer"
)

// verdictCell is a PASS/FAIL cell in its colour.
func verdictCell(pass bool) cell {
	if pass {
		return c1("PASS", stBold.with(colPass))
	}
	return c1("FAIL", stBold.with(colFail))
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
	if o.Pass || o.Decision == nil || d.rec.Verdict != sequencer.Review {
		return false
	}
	return conditional(o.Decision) || o.Decision.Zone == limits.ZonePass
}

// zoneCell is the decision cell of a toleranced limit: PASS and FAIL as for an
// expression limit, the conditional zones in words in their colours, and under it
// "held for review" where the record was sent to review.
func (d *doc) zoneCell(o limits.Outcome) cell {
	dd := o.Decision
	var c cell
	switch {
	case dd.Binary && dd.Zone != limits.ZonePass && dd.Zone != limits.ZoneFail:
		c = cell{{"FAIL", stBold.with(colFail)}, {dd.Zone + " zone, binary", stSmall}}
	case dd.Zone == limits.ZoneConditionalPass:
		c = c1("conditional pass", stBold.with(colCondPass))
	case dd.Zone == limits.ZoneConditionalFail:
		c = c1("conditional fail", stBold.with(colCondFail))
	case dd.Zone == limits.ZonePass && !o.Pass:
		c = c1("PASS", stBold.with(colCondPass)) // held back: see the reason
	default:
		c = verdictCell(o.Pass)
	}
	if d.held(o) {
		c = append(c, span{"held for review", stSmall})
	}
	return c
}

// accepted reports whether a decision accepts its result (pass, or conditional pass
// under a non-binary statement), so that a false accept is possible.
func accepted(d *limits.Decision) bool {
	return d.Zone == limits.ZonePass || d.Zone == limits.ZoneConditionalPass && !d.Binary
}

// stageTitle is the band title over the limits of a stage.
func stageTitle(s stage) string {
	switch s {
	case stageFound:
		return "As found: before adjustment (pre-trim sweep)"
	case stageLeft:
		return "As left: after adjustment (verify sweep)"
	}
	return "Adjustment and other checks"
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
// each group in file order.
func (d *doc) outcomesByStage() []limits.Outcome {
	out := append([]limits.Outcome(nil), d.rec.Outcomes...)
	sort.SliceStable(out, func(i, j int) bool { return outcomeStage(out[i]) < outcomeStage(out[j]) })
	return out
}

// measuredCell is the measured value of a limit with its expanded uncertainty and,
// below it, the coverage factor, degrees of freedom and method (or "U not
// evaluated"). A toleranced limit shows its decision's numbers; an expression limit
// shows each result it uses, its U converted to the limit's unit.
func (d *doc) measuredCell(o limits.Outcome) cell {
	if dd := o.Decision; dd != nil {
		v, ok := o.Values[dd.Result]
		switch {
		case !ok && len(o.Values) == 0:
			return c1("not measured", stBody)
		case ok && !finite(v), !finite(dd.Value):
			return c1("not valid", stBody)
		}
		// The decision's dof is 0 for "infinite or unknown"; the result's own
		// uncertainty tells them apart (math.Inf(1) for infinite).
		r, _ := d.result(dd.Result)
		dof := dd.DOF
		if hasU(r.Unc.Expanded) && (dof == 0 || !finite(dof)) {
			dof = r.Unc.DOF
		}
		sub := uncLine(dd.U, dd.K, dof, r.Unc.Method)
		return cell{{fmtWithU(dd.Value, dd.U, o.Unit), stBody}, {sub, stSmall}}
	}
	vals := outcomeValues(o) // the keys in order, for the "not measured" case
	keys := outcomeKeys(o)
	if len(keys) == 0 {
		return c1(vals[0], stBody)
	}
	scale := unitScale(o.Unit)
	var c cell
	anyU := false
	for _, k := range keys {
		v := o.Values[k]
		r, _ := d.result(k)
		U := 0.0
		if scale > 0 && hasU(r.Unc.Expanded) {
			U = r.Unc.Expanded / scale
		}
		text := fmtWithU(v, U, o.Unit)
		if len(keys) > 1 {
			text = k + " = " + text
		}
		c = append(c, span{text, stBody})
		if hasU(U) && finite(v) {
			anyU = true
			c = append(c, span{uncLine(U, r.Unc.K, r.Unc.DOF, r.Unc.Method), stSmall})
		}
	}
	if !anyU && !isCount(o.Unit) {
		c = append(c, span{"U not evaluated", stSmall})
	}
	return c
}

// results is the table of every limit's outcome, as found before adjustment and
// as left after it. Toleranced limits (with a decision) show the tolerance, the
// acceptance interval, the zone, the TUR and the false-accept probability; limits
// written as expressions show the expression.
func (d *doc) results() {
	outs := d.outcomesByStage()
	decided := false
	for _, o := range outs {
		decided = decided || o.Decision != nil
	}
	cols := []column{
		{title: "Limit", w: 50, align: "L"},
		{title: "Measured value ± U", w: 44, align: "R"},
		{title: "Limit expression", w: 66, align: "L", gap: 4},
		{title: "Verdict", w: 20, align: "C"},
	}
	if decided {
		cols = []column{
			{title: "Limit", w: 51, align: "L"},
			{title: "Measured value ± U", w: 36, align: "R"},
			{title: "Tolerance · acceptance", w: 40, align: "L", gap: 3},
			{title: "Decision", w: 22, align: "C"},
			{title: "TUR", w: 12, align: "R"},
			{title: "PFA", w: 19, align: "R"},
		}
	}
	var rows []row
	var bands []band
	last := stage(-1)
	turLow, exprs := false, false
	for _, o := range outs {
		if st := outcomeStage(o); st != last {
			bands = append(bands, band{len(rows), stageTitle(st)})
			last = st
		}
		name := cell{{o.Name, stBold}}
		if o.Description != "" {
			name = append(name, span{o.Description, stSmall})
		}
		meas := d.measuredCell(o)
		// An expression limit's reason says what was false; a toleranced limit's
		// is in the reasons above and in its decision statement, and its zone is
		// in the row, so it is not repeated here.
		reason := func(c cell) cell {
			if !o.Pass && o.Reason != "" {
				c = append(c, span{o.Reason, stSmall.with(colFail)})
			}
			return c
		}
		dd := o.Decision
		switch {
		case dd == nil:
			exprs = true
			mono := stMono
			if decided {
				mono = stMono.sized(6.5) // a narrower column
			}
			expr := reason(cell{{o.Expr, mono}})
			if decided {
				na := c1("—", stSmall)
				rows = append(rows, row{name, meas, expr, verdictCell(o.Pass), na, na})
			} else {
				rows = append(rows, row{name, meas, expr, verdictCell(o.Pass)})
			}
		default:
			tol := cell{{fmtTolerance(dd, o.Unit), stBody}}
			switch {
			case dd.Rule == "guarded" && (dd.AcceptLower != nil || dd.AcceptUpper != nil):
				tol = append(tol, span{"accept " + fmtAcceptance(dd, o.Unit), stSmall})
			case dd.Rule == "simple":
				tol = append(tol, span{"simple acceptance, w = 0", stSmall})
			case dd.Rule != "":
				tol = append(tol, span{"rule " + dd.Rule, stSmall})
			}
			tur := c1(fmtTUR(dd.TUR), stBody)
			if fmtTUR(dd.TUR) == "—" {
				tur = c1("—", stSmall)
			}
			if dd.TURLow {
				tur = c1(fmtTUR(dd.TUR)+" ¹", stBold.with(colCondPass))
				turLow = true
			}
			pfa := c1("—", stSmall)
			if accepted(dd) && hasU(dd.U) && finite(dd.POutside) {
				pfa = c1(fmtPercent(dd.POutside), stBody)
			}
			rows = append(rows, row{name, meas, tol, d.zoneCell(o), tur, pfa})
		}
	}
	d.heading("Results against limits", keep(d.bandTableHeight(cols, rows, bands)))
	d.bandTable(cols, rows, bands)
	if len(rows) == 0 {
		return
	}
	if decided {
		d.note("U: expanded uncertainty, k: coverage factor, νeff: effective degrees of freedom. TUR = tolerance width / 2U (“—” when one-sided or without U). " +
			"PFA: probability that the true value lies outside the tolerance although the result was accepted.")
	}
	if turLow {
		d.note("¹ Test uncertainty ratio below the minimum the limit file requires: the uncertainty is large against the tolerance.")
	}
	if exprs && !decided {
		d.note("Each limit expression is written in the unit of its measured value.")
	}
}
