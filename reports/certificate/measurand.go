package certificate

// What each limit judges, in words (the results table's measurand line), and
// what the fits say about their own model (the lack of fit and, where the
// record judged it, whether the straight line describes the sweep).

import (
	"fmt"
	"slices"
	"strings"

	"trimline/instruments/units"
	"trimline/limits"
	"trimline/reports/internal/pdfdoc"
	"trimline/sequencer"
)

// fmtSig writes v with up to sig significant digits (units.FormatSig).
func fmtSig(v float64, sig int) string { return units.FormatSig(v, sig) }

// measurandWords are the words for a fit's or a measurement's result quantity,
// and whether they come from a fit (the line) rather than from the points.
var measurandWords = map[string]struct {
	words string
	ofFit bool
}{
	"offset":          {"best-fit-line offset", true},
	"terminal_offset": {"terminal offset at 0 %s in", false},
	"gain_error":      {"best-fit-line gain error", true},
	"nonlinearity":    {"best-fit-line nonlinearity", true},
	"max_error":       {"largest error from the ideal", false},
	"noise":           {"pooled SD of the readings", false},
	"lack_of_fit":     {"lack of fit of the line", true},
	"lack_of_fit_p":   {"lack-of-fit probability", true},
}

// measurand says what result r measures and where from: "best-fit-line
// offset (fit “verify fit”)", "terminal offset at 0 V in (sweep “verify”)";
// "" when the record does not say, and for a code or a coefficient written
// (what the adjustment wrote, not a measurand).
func (d *doc) measurand(r sequencer.Result) string {
	q := r.QuantityOf()
	w, ok := measurandWords[q]
	if !ok {
		if q == "" || r.Step == "" || q == "code" || strings.HasSuffix(q, "_coefficient") {
			return ""
		}
		return strings.ReplaceAll(q, "_", " ") + " (step “" + r.Step + "”)"
	}
	text := w.words
	if strings.Contains(text, "%s") {
		text = fmt.Sprintf(text, d.stim().zeroName())
	}
	f, found := d.fitOf(r)
	if found && f.Order == 2 {
		text = strings.Replace(text, "best-fit line", "best-fit quadratic", 1)
		text = strings.Replace(text, "best-fit-line", "best-fit-quadratic", 1)
	}
	switch {
	case !found && r.Step != "":
		text += " (step “" + r.Step + "”)"
	case !found:
	case w.ofFit && f.Step != "":
		text += " (fit “" + f.Step + "”)"
	default:
		text += " (sweep “" + f.Sweep + "”)"
	}
	return text
}

// inadequateFits are the names of the fits whose straight-line model the
// record judged not adequate and a limit's result comes from, in the order of
// the outcomes.
func (d *doc) inadequateFits() []string {
	var out []string
	for _, o := range d.rec.Outcomes {
		names := o.Uses
		if dd := o.Decision; dd != nil && dd.Result != "" {
			names = []string{dd.Result}
		}
		for _, n := range names {
			r, ok := d.resultIn(n, outcomeChannel(o))
			if !ok || !measurandWords[r.QuantityOf()].ofFit {
				continue
			}
			f, ok := d.fitOf(r)
			if adequate, judged := f.LackOfFit.Judged(); !ok || !judged || adequate {
				continue
			}
			name := "“" + dash(f.Sweep) + "”"
			if f.Step != "" {
				name = "“" + f.Step + "”"
			}
			if !slices.Contains(out, name) {
				out = append(out, name)
			}
		}
	}
	return out
}

// fitOf is the fit whose step computed r: by step and channel, or in a record
// without steps (schema 1) the fit of the first layout's sweep of r's stage.
func (d *doc) fitOf(r sequencer.Result) (sequencer.FitSummary, bool) {
	for _, f := range d.rec.Fits {
		if r.Step != "" && f.Step == r.Step && f.Channel == r.Channel {
			return f, true
		}
	}
	if r.Step == "" {
		want := map[sequencer.Stage]string{sequencer.AsFound: sequencer.SweepPreTrim, sequencer.AsLeft: sequencer.SweepVerify}[r.StageOf()]
		for _, f := range d.rec.Fits {
			if want != "" && f.Sweep == want && f.Channel == r.Channel {
				return f, true
			}
		}
	}
	return sequencer.FitSummary{}, false
}

// measurandLines are the measurand lines of a limit: one per result it
// judges (a toleranced limit, its decision's result; an expression, each it
// uses), "name: words" where it uses more than one.
func (d *doc) measurandLines(o limits.Outcome) []string {
	names := o.Uses
	if dd := o.Decision; dd != nil && dd.Result != "" {
		names = []string{dd.Result}
	}
	var out []string
	for _, n := range names {
		r, ok := d.resultIn(n, outcomeChannel(o))
		if !ok {
			continue
		}
		m := d.measurand(r)
		if m == "" {
			continue
		}
		if len(names) > 1 {
			m = n + ": " + m
		}
		out = append(out, m)
	}
	return out
}

// lackOfFitCell is a fit's lack of fit: the statistic (χ²/ν, or F where levels
// repeat), its degrees of freedom and p, and where the record judged the
// model, "not adequate" in the colour of a failure.
func lackOfFitCell(l *sequencer.LackOfFit) pdfdoc.Cell {
	if l == nil || !finite(l.Statistic) {
		return c1("—", pdfdoc.Small)
	}
	stat, dof := "χ²/ν "+fmtSig(l.Statistic, 3), "ν "+fmtSig(l.DOF1, 3)
	if l.Method == "F" {
		stat, dof = "F "+fmtSig(l.Statistic, 3), "ν "+fmtSig(l.DOF1, 3)+", "+fmtSig(l.DOF2, 3)
	}
	c := pdfdoc.Cell{{Text: stat, St: pdfdoc.Body}, {Text: dof + " · " + fmtP(l.P), St: pdfdoc.Small}}
	if adequate, judged := l.Judged(); judged && !adequate {
		c = append(c, pdfdoc.Span{Text: "not adequate", St: pdfdoc.Small.With(pdfdoc.Fail)})
	}
	return c
}

// fmtP writes a probability: "p < 0.0001" below it, else two significant
// digits ("p = 0.032").
func fmtP(p float64) string {
	switch {
	case !finite(p):
		return "p —"
	case p < 1e-4:
		return "p < 0.0001"
	}
	return "p = " + fmtSig(p, 2)
}

// fitsNotes explain the fits table: which offset it shows, the lack of fit and
// its criterion, and in plain words each fit whose straight-line model the
// record judged not adequate (JCGM 100:2008 §4.1.2).
func (d *doc) fitsNotes() {
	for _, n := range d.fitsNoteTexts() {
		d.note(n)
	}
}

// fitsNotesH is the height the notes take, for the page-break decision.
func (d *doc) fitsNotesH() float64 {
	h := 0.0
	for _, n := range d.fitsNoteTexts() {
		h += float64(len(d.Wrap(n, contentW, pdfdoc.Small))) * (pdfdoc.Small.LineH() + 0.8)
	}
	return h
}

func (d *doc) fitsNoteTexts() []string {
	z := "0 " + d.stim().zeroName()
	out := []string{"Best-fit-line offset: the fitted line's value at " + z + " in less the ideal offset. The output measured at " + z +
		" in less the ideal offset (the terminal offset) is the error at " + z + " in the sweep points (†); the two differ where the transfer is not a straight line. " +
		"Lack of fit: χ²/ν compares the scatter of the points about the line with their own uncertainties (F, where levels repeat, with the scatter of the repeats); " +
		"p is the probability of a value this large from a unit whose transfer is the fitted model."}
	var judged bool
	var bad, residual []string
	for _, f := range d.fitsByStage() {
		adequate, ok := f.LackOfFit.Judged()
		judged = judged || ok
		name := "“" + dash(f.Sweep) + "”"
		if f.Step != "" {
			name = "“" + f.Step + "”"
		}
		if ok && !adequate {
			bad = append(bad, name)
		}
		if f.Random == sequencer.RandomResiduals {
			residual = append(residual, name)
		}
	}
	if judged {
		out = append(out, fmt.Sprintf("Criterion: the model is taken as adequate unless p < %s (a 1 %% significance level, common practice); JCGM 100:2008 §4.1.2 asks that the model describe the measurement.",
			fmtSig(sequencer.LackOfFitAlpha, 2)))
	}
	if len(bad) > 0 {
		fits, verb := "fit "+bad[0], "is"
		if len(bad) > 1 {
			fits, verb = "fits "+andList(bad), "are"
		}
		text := "The straight-line model is not adequate for " + fits + ": the points scatter about the line far more than their own noise and the instruments explain, " +
			"so the unit's transfer is not a straight line at this resolution. The best-fit-line offset and gain describe the line that fits best, " +
			"not the output at any one input; the output at " + z + " in is the terminal offset (†), and the largest departure from the line is reported as the nonlinearity. "
		if len(residual) == 0 {
			text += "The uncertainties of the line's offset and gain " + verb + " evaluated from the readings' noise and the instruments' specifications: they do not include the misfit."
		} else {
			text += "Fits taking their random uncertainty from the residual scatter (JCGM 100:2008 H.3), which includes the misfit: " + strings.Join(residual, ", ") + "."
		}
		out = append(out, text)
	}
	return out
}

// hasFits reports whether the record holds a fit, whose notes explain the † at
// the error at zero input.
func (d *doc) hasFits() bool { return len(d.rec.Fits) > 0 }

// hasZeroPoint reports whether a sweep of the record has a valid point at
// zero input, which the sweep points mark with †.
func (d *doc) hasZeroPoint() bool {
	for _, sw := range d.rec.Sweeps {
		for _, p := range sw.Points {
			if p.Stimulus == 0 && p.Valid > 0 {
				return true
			}
		}
	}
	return false
}
