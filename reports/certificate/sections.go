package certificate

import (
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"
	"time"

	"trimline/instruments/units"
	"trimline/limits"
	"trimline/sequencer"
)

// build lays out every section in order. Page 1 holds what a reader of the
// certificate needs (identification, conditions, verdict, results as found and as
// left with their uncertainty, the decision rule, traceability, codes, files); the
// measurement detail follows on the same page when it fits, else on the next.
func (d *doc) build() {
	d.newPage()
	d.sealH = d.sealHeight()
	d.header()
	d.identification()
	d.reasons()
	d.results()
	d.decisionRule()
	d.instrumentsUsed()
	d.trims()
	d.filesInForce()
	d.detail()
	d.seal()
	d.footers() // ends on the last page, which gofpdf needs: it writes pages up to the current one
}

// certified reports whether the run was measured completely, so that the document
// is a certificate: PASS, FAIL and REVIEW. FAULT and ABORTED runs are records only.
func (d *doc) certified() bool {
	switch d.rec.Verdict {
	case sequencer.Pass, sequencer.Fail, sequencer.Review:
		return true
	}
	return false
}

// header is the title block of page 1.
func (d *doc) header() {
	top := d.y
	if d.opt.Maker != "" {
		d.text(marginL, d.y, 120, 4.5, d.opt.Maker, stBold.sized(9).with(colMuted), "L")
		d.y += 5
	}
	title := "Trim and calibration certificate"
	d.text(marginL, d.y, 125, 8, title, style{sans, "B", 17, colInk}, "L")
	d.y += 8.5
	sub, subSt := "End-of-line trim of gain and offset, verified by a second sweep", stLabel
	if !d.certified() {
		sub = fmt.Sprintf("Not a certificate: the run did not complete (%s). Issued as a record only.", dash(string(d.rec.Verdict)))
		subSt = stBold.with(colFail)
	}
	d.text(marginL, d.y, 125, 4.5, sub, subSt, "L")
	d.y += 6

	// Certificate number, top right.
	right := marginL + contentW
	d.text(right-60, top, 60, 4, "Certificate no.", stLabel, "R")
	d.text(right-60, top+4.2, 60, 7, dash(d.opt.Number), style{sans, "B", 14, colInk}, "R")
	when := "Issued "
	if !d.certified() {
		when = "Run ended "
	}
	d.text(right-60, top+11.5, 60, 4, when+fmtTime(d.rec.Finished), stSmall, "R")

	d.rule(d.y, colInk, 0.6)
	d.y += 4
	if d.rec.Engineering {
		// An engineering run used files nobody released: it must never pass for a
		// shipping certificate.
		d.pdf.SetFillColor(colFail.r, colFail.g, colFail.b)
		d.pdf.Rect(marginL, d.y, contentW, 11, "F")
		d.text(marginL, d.y, contentW, 11, engineeringBanner, style{sans, "B", 18, rgb{255, 255, 255}}, "C")
		d.y += 14
	}
}

// engineeringBanner marks every page of a certificate from an engineering run.
const engineeringBanner = "ENGINEERING RUN — NOT FOR SHIPMENT"

// identification is the unit/run block with the verdict box beside it.
func (d *doc) identification() {
	r := d.rec
	top := d.y
	const labelW, valueW = 27.0, 94.0
	type field struct {
		label string
		value string
		st    style
	}
	transfer := strconv.FormatFloat(r.IdealGain, 'g', 7, 64) + " V/V × input "
	if r.IdealOffset < 0 {
		transfer += "− " + units.Format(-r.IdealOffset, "V", 6)
	} else {
		transfer += "+ " + units.Format(r.IdealOffset, "V", 6)
	}
	if r.FullScale != 0 && !math.IsNaN(r.FullScale) {
		transfer += ";  full scale " + units.Format(r.FullScale, "V", 6)
	}
	product := dash(r.Product)
	if r.Revision != "" {
		product += ",  revision " + r.Revision
	}
	tested := fmtTime(r.Finished)
	if !r.Started.IsZero() && !r.Finished.IsZero() && r.Finished.After(r.Started) {
		tested += "   (run time " + r.Finished.Sub(r.Started).Round(time.Second).String() + ")"
	}
	big := style{sans, "B", 11, colInk}
	val := stBody.sized(8.5)
	// Each line holds one field across the block, or two side by side.
	lines := [][]field{
		{{"Serial number", dash(r.Serial), big}},
		{{"Product", product, val}},
		{{"Trimmed to", "output = " + transfer, val}},
		{{"Tested", tested, val}},
		{{"Conditions", ambient(r.Conditions), val}},
		{{"Station", dash(r.Station), val}, {"Operator", dash(r.Operator), val}},
		{{"Software", dash(r.Software), val}, {"Run id", dash(r.RunID), stMono.sized(6.8)}},
	}
	const col2, label2W = 62.0, 16.0 // second field: offset and label width
	for _, ln := range lines {
		lh := math.Max(ln[0].st.lineH(), 4.4)
		rows := 1
		for k, f := range ln {
			x, lw, vw := marginL, labelW, valueW
			if len(ln) == 2 {
				vw = col2 - labelW - 2
			}
			if k == 1 {
				x, lw, vw = marginL+col2, label2W, valueW+labelW-col2-label2W
			}
			d.text(x, d.y, lw, lh, f.label, stLabel, "L")
			wrapped := d.wrap(f.value, vw, f.st)
			for i, l := range wrapped {
				d.text(x+lw, d.y+float64(i)*lh, vw, lh, l, f.st, "L")
			}
			rows = max(rows, len(wrapped))
		}
		d.y += float64(rows)*lh + 0.5
	}

	// The verdict box.
	const boxW, boxH = 54.0, 34.0
	bx := marginL + contentW - boxW
	c, note := d.verdictLook()
	d.fill(c)
	d.pdf.Rect(bx, top, boxW, boxH, "F")
	word := string(r.Verdict)
	if word == "" {
		word = "NONE"
	}
	size := 36.0
	for size > 12 && d.width(word, style{sans, "B", size, colWhite}) > boxW-6 {
		size -= 2
	}
	d.text(bx, top+2, boxW, 19, word, style{sans, "B", size, colWhite}, "C")
	ny := top + 21.5
	for _, l := range d.wrap(note, boxW-6, stBody.sized(8).with(colWhite)) {
		d.text(bx+3, ny, boxW-6, 4, l, stBody.sized(8).with(colWhite), "C")
		ny += 4
	}
	d.y = math.Max(d.y, top+boxH) + 2
}

// verdictLook is the colour of the verdict box and the line under the word.
func (d *doc) verdictLook() (rgb, string) {
	r := d.rec
	n := len(r.Outcomes)
	// failed counts the limits that did not pass; cond and turHeld those of them
	// that did not fail outright (a conditional zone, a pass held for its TUR).
	failed, cond, turHeld := 0, 0, 0
	for _, o := range r.Outcomes {
		if o.Pass {
			continue
		}
		failed++
		switch {
		case conditional(o.Decision):
			cond++
		case o.Decision != nil && o.Decision.Zone == limits.ZonePass:
			turHeld++
		}
	}
	switch r.Verdict {
	case sequencer.Pass:
		if n == 0 {
			return colPass, "no limits judged"
		}
		return colPass, fmt.Sprintf("%d of %s passed", n-failed, plural(n, "limit", "limits"))
	case sequencer.Fail:
		if failed == 0 {
			return colFail, "see the reasons below"
		}
		if cond > 0 || turHeld > 0 {
			return colFail, fmt.Sprintf("%d of %s not passed", failed, plural(n, "limit", "limits"))
		}
		return colFail, fmt.Sprintf("%d of %s failed", failed, plural(n, "limit", "limits"))
	case sequencer.Review:
		switch {
		case cond > 0:
			return colReview, "held for review: a result lies in a conditional zone"
		case turHeld > 0:
			return colReview, "held for review: a test uncertainty ratio is below the minimum"
		}
		return colReview, "held for review"
	case sequencer.Fault:
		return colFault, "not certified: station fault"
	case sequencer.Aborted:
		return colAborted, "not certified: run aborted"
	}
	return colAborted, "not certified"
}

// reasons lists why the verdict is not PASS, in a tinted block.
func (d *doc) reasons() {
	r := d.rec
	if r.Verdict == sequencer.Pass {
		return
	}
	items := append([]string(nil), r.Reasons...)
	if r.Fault != "" {
		dup := false
		for _, s := range items {
			if strings.Contains(s, r.Fault) {
				dup = true
			}
		}
		if !dup {
			items = append(items, "Station fault: "+r.Fault)
		}
	}
	if len(items) == 0 {
		return
	}
	c, _ := d.verdictLook()
	bg := colReasonBg
	switch r.Verdict {
	case sequencer.Fail:
	case sequencer.Review:
		bg = colReviewBg
	default:
		bg = rgb{248, 243, 232}
	}
	type line struct {
		text   string
		st     style
		bullet bool
	}
	lines := []line{{"Why the verdict is " + dash(string(r.Verdict)), stBold.sized(8.5).with(c), false}}
	for _, it := range items {
		for i, l := range d.wrap(it, contentW-12, stBody) {
			lines = append(lines, line{l, stBody, i == 0})
		}
	}
	d.y += 1
	for i, l := range lines {
		lh := l.st.lineH() + 0.4
		extra := 0.0
		if i == 0 || i == len(lines)-1 {
			extra = 1.2 // padding above the first and below the last line
		}
		if d.need(lh + extra) {
			d.y += 1
		}
		d.fill(bg)
		d.pdf.Rect(marginL, d.y, contentW, lh+extra, "F")
		d.fill(c)
		d.pdf.Rect(marginL, d.y, 1.2, lh+extra, "F")
		ty := d.y
		if i == 0 {
			ty += extra
		}
		if l.bullet {
			d.text(marginL+4, ty, 3, lh, "•", l.st, "L")
		}
		d.text(marginL+7, ty, contentW-10, lh, l.text, l.st, "L")
		d.y += lh + extra
	}
	d.y += 1
}

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
		// The decision's dof is +Inf for "infinite or unknown"; the result's own
		// uncertainty tells them apart (math.Inf(1) for infinite).
		r, _ := d.result(dd.Result)
		dof := float64(dd.DOF)
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

// para is one labelled paragraph of a definition block.
type para struct {
	label, text string
}

// fields writes labelled paragraphs: the label in a narrow column at the left, the
// text wrapped beside it. A paragraph may break across a page between its lines.
func (d *doc) fields(fs []para) {
	const labelW = 27.0
	st := stBody.sized(7.6)
	lh := st.lineH() + 0.3
	for _, f := range fs {
		lines := d.wrap(f.text, contentW-labelW, st)
		d.need(lh * float64(min(len(lines), 2)))
		d.text(marginL, d.y+0.4, labelW, lh, f.label, stLabel, "L")
		for i, l := range lines {
			if i > 0 && d.need(lh) {
				d.text(marginL, d.y+0.4, labelW, lh, f.label+" (continued)", stLabel, "L")
			}
			d.text(marginL+labelW, d.y+0.4, contentW-labelW, lh, l, st, "L")
			d.y += lh
		}
		d.y += 1
	}
}

// ruleKey groups toleranced limits by the rule they are judged by.
type ruleKey struct {
	rule   string
	r      float64
	binary bool
}

// decisionRule states the decision rules in force and the coverage probability of
// the uncertainties (ISO/IEC 17025:2017 §7.8.6.1).
func (d *doc) decisionRule() {
	r := d.rec
	if len(r.Outcomes) == 0 {
		return
	}
	var keys []ruleKey
	names := map[ruleKey][]string{}
	var exprs []string
	anyCond, statements, anyU := false, false, false
	methods := map[string]bool{}
	for _, o := range d.outcomesByStage() {
		dd := o.Decision
		if dd == nil {
			exprs = append(exprs, o.Name)
			continue
		}
		k := ruleKey{dd.Rule, dd.GuardFactor, dd.Binary}
		if dd.Rule != "guarded" {
			k.r = 0
		}
		if _, ok := names[k]; !ok {
			keys = append(keys, k)
		}
		names[k] = append(names[k], o.Name)
		anyCond = anyCond || conditional(dd)
		statements = statements || dd.Statement != ""
	}
	for _, res := range r.Results {
		if hasU(res.Unc.Expanded) {
			anyU = true
			if res.Unc.Method != "" {
				methods[res.Unc.Method] = true
			}
		}
	}
	list := func(ns []string) string {
		switch {
		case len(ns) > 4:
			return fmt.Sprintf("%d limits", len(ns))
		case len(ns) == 1:
			return "limit " + ns[0]
		}
		return "limits " + joinAnd(ns)
	}
	var fs []para
	for _, k := range keys {
		var text string
		switch {
		case k.rule == "guarded" && k.binary:
			text = fmt.Sprintf("Guarded acceptance, binary statement (ILAC-G8:09/2019 §4.2.2), guard band w = r·U, r = %s: "+
				"pass inside the acceptance interval (the tolerance narrowed by w), fail outside it.", fmtLimitNum(k.r))
		case k.rule == "guarded":
			text = fmt.Sprintf("Guarded acceptance, non-binary statement (ILAC-G8:09/2019 §4.2.3), guard band w = r·U, r = %s: "+
				"pass inside the acceptance interval (the tolerance narrowed by w); conditional pass between it and the tolerance; "+
				"conditional fail outside the tolerance by less than w; fail beyond.", fmtLimitNum(k.r))
		case k.rule == "simple":
			text = "Simple acceptance (ILAC-G8:09/2019 §4.2.1), w = 0: pass inside the tolerance, fail outside it; " +
				"close to a limit the false-accept probability may reach 50 %."
		default:
			text = fmt.Sprintf("Rule “%s” as the limit file states it (r = %s).", k.rule, fmtLimitNum(k.r))
		}
		fs = append(fs, para{"Rule in force", text + " Applies to " + list(names[k]) + "."})
	}
	if len(exprs) > 0 {
		text := capital(list(exprs)) + ": written as expressions, judged on the measured value alone"
		if len(exprs) == 1 {
			text = capital(list(exprs)) + ": written as an expression, judged on the measured value alone"
		}
		if len(keys) == 0 {
			text += ", without regard to its uncertainty."
		} else {
			text += " (w = 0)."
		}
		fs = append(fs, para{"Expressions", text})
	}
	switch {
	case !anyU:
		fs = append(fs, para{"Uncertainty", "U not evaluated: the record holds no measurement uncertainty."})
	default:
		text := "U = k·u "
		if r.Coverage > 0 && r.Coverage < 1 {
			text += "for a coverage probability of " + fmtCoverage(r.Coverage) + ", "
		} else {
			text += "for a coverage probability the record does not state, "
		}
		text += "k from the effective degrees of freedom νeff (Welch–Satterthwaite)."
		switch {
		case methods["GUM"] && methods["MC"]:
			text += " Evaluated by the law of propagation (JCGM 100:2008, GUM) or by Monte Carlo (JCGM 101:2008, MC)."
		case methods["MC"]:
			text += " Evaluated by Monte Carlo (JCGM 101:2008)."
		case methods["GUM"]:
			text += " Evaluated by the law of propagation of uncertainty (JCGM 100:2008)."
		}
		fs = append(fs, para{"Coverage", text})
	}
	if anyCond {
		fs = append(fs, para{"Conditional zones", "In a conditional zone conformity cannot be stated at this coverage probability; " +
			"the limit file's policy decides whether such a result ships, fails or goes to review."})
	}
	if r.Verdict == sequencer.Review {
		fs = append(fs, para{"Review", "This unit is held for review by a person before it ships; the reasons are listed above."})
	}
	if statements {
		fs = append(fs, para{"Statements", "The statement of each toleranced limit is listed under “Decision statements” in the measurement detail."})
	}
	d.heading("Decision rule", 3*stBody.lineH())
	d.fields(fs)
}

// note is a line of small print under a table.
func (d *doc) note(s string) {
	for _, l := range d.wrap(s, contentW, stSmall) {
		d.need(stSmall.lineH() + 1)
		d.text(marginL, d.y+0.8, contentW, stSmall.lineH(), l, stSmall, "L")
		d.y += stSmall.lineH() + 0.8
	}
}

// trims is the table of trim codes written to the unit.
func (d *doc) trims() {
	cols := []column{
		{title: "Trim DAC", w: 30, align: "L"},
		{title: "Code before", w: 24, align: "R"},
		{title: "Ideal (unrounded)", w: 30, align: "R"},
		{title: "Written", w: 22, align: "R"},
		{title: "Read back", w: 24, align: "R"},
		{title: "Stored", w: 24, align: "C"},
		{title: "Saturated", w: 26, align: "C"},
	}
	var rows []row
	for _, t := range d.rec.Trims {
		ideal := "—"
		if !math.IsNaN(t.Ideal) && !math.IsInf(t.Ideal, 0) {
			ideal = strconv.FormatFloat(t.Ideal, 'f', 3, 64)
		}
		written := c1(strconv.Itoa(t.Code), stBold)
		rb := c1(strconv.Itoa(t.Readback), stBody)
		switch {
		case !t.Written && !t.Stored && t.Readback == 0:
			// The run stopped before the code was written (a saturated trim, no fit):
			// the unit still holds its code from before.
			written = cell{{"—", stBody}, {"not written", stSmall.with(colMuted)}}
			rb = c1("—", stBody)
		case t.Readback != t.Code:
			rb = cell{{strconv.Itoa(t.Readback), stBold.with(colFail)}, {"differs from written", stSmall.with(colFail)}}
		}
		sat := c1("no", stBody)
		if t.Saturated {
			sat = c1("yes", stBold.with(colFail))
		}
		rows = append(rows, row{
			c1(dash(t.DAC), stBold),
			c1(strconv.Itoa(t.Before), stBody),
			c1(ideal, stBody),
			written,
			rb,
			c1(yesNo(t.Stored), stBody),
			sat,
		})
	}
	d.heading("Trim codes written", keep(d.tableHeight(cols, rows)))
	d.table(cols, rows)
}

// instrumentsUsed is the traceability table of the instruments.
func (d *doc) instrumentsUsed() {
	cols := []column{
		{title: "Role", w: 15, align: "L"},
		{title: "Asset", w: 19, align: "L"},
		{title: "Identity", w: 44, align: "L"},
		{title: "Address", w: 42, align: "L"},
		{title: "Cal. due", w: 19, align: "L"},
		{title: "Accuracy", w: 41, align: "L"},
	}
	var rows []row
	for _, in := range d.rec.Instruments {
		id := in.Identity
		id.Maker, id.Model, id.Serial, id.Firmware = said(id.Maker), said(id.Model), said(id.Serial), said(id.Firmware)
		name := strings.TrimSpace(id.Maker + " " + id.Model)
		if name == "" {
			name = "did not identify itself"
		}
		ident := cell{{name, stBody}}
		var sub []string
		if id.Serial != "" {
			sub = append(sub, "s/n "+id.Serial)
		}
		if id.Firmware != "" {
			sub = append(sub, "firmware "+id.Firmware)
		}
		if len(sub) > 0 {
			ident = append(ident, span{strings.Join(sub, " · "), stSmall})
		}
		due := c1(dash(in.CalDue), stBody)
		if d.overdue(in) {
			due = cell{{in.CalDue, stBold.with(colFail)}, {"overdue at test", stSmall.with(colFail)}}
		}
		rows = append(rows, row{
			c1(dash(in.Role), stBold),
			c1(dash(in.Asset), stBody),
			ident,
			c1(dash(in.Address), stMono.sized(6.5)),
			due,
			c1(dash(in.Accuracy), stBody),
		})
	}
	d.heading("Instruments used and traceability", keep(d.tableHeight(cols, rows)))
	d.table(cols, rows)
	d.y += 1.2
	d.fields([]para{{"Traceability", d.traceability()}})
}

// said is an *IDN? field, or "" for "0", which is what *IDN? gives for "not told".
func said(s string) string {
	if s = strings.TrimSpace(s); s == "0" {
		return ""
	}
	return s
}

// overdue reports whether an instrument's calibration was due before the test.
func (d *doc) overdue(in sequencer.InstrumentRef) bool {
	t, err := time.Parse("2006-01-02", in.CalDue)
	return err == nil && !d.rec.Finished.IsZero() && d.rec.Finished.UTC().After(t.Add(24*time.Hour))
}

// traceability is the statement of metrological traceability through the reference
// instruments (the source and the meter).
func (d *doc) traceability() string {
	var refs, gaps []string
	for _, in := range d.rec.Instruments {
		if in.Role != "source" && in.Role != "meter" {
			continue
		}
		desc := in.Role
		if id := strings.TrimSpace(said(in.Identity.Maker) + " " + said(in.Identity.Model)); id != "" {
			desc += ", " + id
		}
		if sn := said(in.Identity.Serial); sn != "" {
			desc += " s/n " + sn
		}
		name := in.Asset
		if name == "" {
			name = "an instrument without asset number"
		}
		switch {
		case in.CalDue == "":
			desc += ", no calibration due date on record"
			gaps = append(gaps, name+" has no calibration due date on record")
		case d.overdue(in):
			desc += ", calibration was due " + in.CalDue
			gaps = append(gaps, name+" was past its calibration due date ("+in.CalDue+") when the unit was tested")
		default:
			desc += ", cal. due " + in.CalDue
		}
		refs = append(refs, name+" ("+desc+")")
	}
	if len(refs) == 0 {
		return "No reference instrument (source or meter) is recorded for this run, so traceability of the results is not established."
	}
	s := "The results are traceable to the SI through the reference instruments " + joinAnd(refs) +
		"; each is calibrated against standards that are themselves traceable to national measurement standards."
	if len(gaps) > 0 {
		s += " Traceability is not assured for this run: " + joinAnd(gaps) + "."
	}
	return s
}

// capital returns s with its first letter in upper case.
func capital(s string) string {
	if s == "" {
		return s
	}
	return strings.ToUpper(s[:1]) + s[1:]
}

// joinAnd joins items as "a", "a and b", "a, b and c".
func joinAnd(items []string) string {
	switch len(items) {
	case 0:
		return ""
	case 1:
		return items[0]
	}
	return strings.Join(items[:len(items)-1], ", ") + " and " + items[len(items)-1]
}

// ambient is the conditions line: the ambient temperature and where it came from.
func ambient(c sequencer.Conditions) string {
	if c.AmbientSource == "" && c.AmbientC == 0 || !finite(c.AmbientC) {
		return "Ambient temperature not recorded"
	}
	t := "Ambient " + minus(strconv.FormatFloat(c.AmbientC, 'f', 1, 64)) + " °C"
	switch c.AmbientSource {
	case "entered":
		return t + " (entered by the operator)"
	case "sensor":
		return t + " (read from the station's sensor)"
	case "":
		return t + " (source not stated)"
	}
	return t + " (" + c.AmbientSource + ")"
}

// filesInForce lists the station, sequence and limit files with their hashes.
func (d *doc) filesInForce() {
	cols := []column{
		{title: "Kind", w: 17, align: "L"},
		{title: "Name", w: 31, align: "L"},
		{title: "Title", w: 44, align: "L"},
		{title: "SHA-256", w: 88, align: "L"},
	}
	var rows []row
	for _, f := range d.rec.Files {
		rows = append(rows, row{
			c1(dash(f.Kind), stBold),
			c1(dash(f.Name), stBody),
			c1(dash(f.Title), stBody),
			c1(dash(f.SHA256), stMonoSmall),
		})
	}
	d.heading("Files in force", keep(d.tableHeight(cols, rows)))
	d.table(cols, rows)
}

// footers writes the caution and the page number on every page, once the page
// count is known.
func (d *doc) footers() {
	n := d.pdf.PageCount()
	caution := "The results on this certificate relate only to the unit identified by its serial number, " +
		"measured with the instruments and files listed, under the conditions at the time of the test. " +
		"This certificate shall not be reproduced except in full."
	for p := 1; p <= n; p++ {
		d.pdf.SetPage(p)
		y := pageH - 21
		d.rule(y, colRule, 0.3)
		ly := y + 1.8
		for _, l := range d.wrap(caution, contentW-32, stSmall) {
			d.text(marginL, ly, contentW-32, stSmall.lineH(), l, stSmall, "L")
			ly += stSmall.lineH()
		}
		left := "Certificate " + dash(d.opt.Number) + " · serial " + dash(d.rec.Serial)
		if d.opt.VerificationCode != "" {
			left += " · verification code " + d.opt.VerificationCode
		} else if !d.sealed() {
			left += " · unsigned"
		}
		d.text(marginL, ly+0.6, contentW-32, stSmall.lineH(), left, stSmall.with(colInk), "L")
		d.text(marginL+contentW-30, y+1.8, 30, 4, fmt.Sprintf("Page %d of %d", p, n), stBold.sized(8), "R")
	}
}
