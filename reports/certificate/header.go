package certificate

import (
	"fmt"
	"math"
	"slices"
	"strconv"
	"strings"
	"time"

	"trimline/limits"
	"trimline/reports/internal/pdfdoc"
	"trimline/sequencer"
)

// subtitle says what the run did, from the record: the trim DACs it wrote (not
// those it computed but did not write, a saturated trim's, say) and the
// sweeps that verified the trim: "End-of-line trim of gain and offset, verified by
// a second sweep". DACs named for what they adjust (gain, offset) read as that;
// others by name: "End-of-line trim by the coarse DAC, verified by 2 further sweeps".
func (d *doc) subtitle() string {
	var names []string
	quantities := true
	for _, t := range d.rec.Trims {
		if !t.Written || slices.Contains(names, t.DAC) { // saturated, or the run stopped first: not trimmed; or another channel's
			continue
		}
		names = append(names, t.DAC)
		quantities = quantities && (t.DAC == sequencer.AdjustGain || t.DAC == sequencer.AdjustOffset)
	}
	coefs := slices.ContainsFunc(d.rec.Coefficients, func(c sequencer.CoefficientWrite) bool { return c.Written })
	sub := "End-of-line test"
	switch {
	case len(names) > 0 && quantities:
		sub = "End-of-line trim of " + andList(names)
	case len(names) > 0:
		sub = "End-of-line trim by the " + andList(names) + " " + map[bool]string{true: "DAC", false: "DACs"}[len(names) == 1]
	case coefs:
		sub = "End-of-line correction by firmware coefficients"
	}
	if coefs && len(names) > 0 {
		sub += " and firmware coefficients"
	}
	if n := len(d.channels()); n > 1 && sub != "End-of-line test" {
		sub += fmt.Sprintf(" on %d channels", n)
	}
	// Sweeps are counted by name: the same sweep on several channels is one.
	found, left := 0, 0
	var seen []string
	for _, sw := range d.rec.Sweeps {
		if !curve(sw) || slices.Contains(seen, sw.Name) { // a single measurement verifies no transfer
			continue
		}
		seen = append(seen, sw.Name)
		switch certStage(sw.StageOf()) {
		case stageFound:
			found++
		case stageLeft:
			left++
		}
	}
	switch {
	case left == 1 && found > 0:
		sub += ", verified by a second sweep"
	case left == 1:
		sub += ", verified by a sweep"
	case left > 1 && found > 0:
		sub += fmt.Sprintf(", verified by %d further sweeps", left)
	case left > 1:
		sub += fmt.Sprintf(", verified by %d sweeps", left)
	}
	return sub
}

// andList joins words as a sentence lists them: "a", "a and b", "a, b and c".
func andList(words []string) string {
	if len(words) < 2 {
		return strings.Join(words, "")
	}
	return strings.Join(words[:len(words)-1], ", ") + " and " + words[len(words)-1]
}

// header is the title block of page 1.
func (d *doc) header() {
	top := d.Y
	if d.opt.Maker != "" {
		d.Cell(marginL, d.Y, 120, 4.5, d.opt.Maker, pdfdoc.Bold.Sized(9).With(pdfdoc.Muted), "L")
		d.Y += 5
	}
	title := "Trim and calibration certificate"
	d.Cell(marginL, d.Y, 125, 8, title, pdfdoc.Bold.Sized(17), "L")
	d.Y += 8.5
	sub, subSt := d.subtitle(), stLabel
	if !d.certified() {
		sub = fmt.Sprintf("Not a certificate: the run did not complete (%s). Issued as a record only.", dash(string(d.rec.Verdict)))
		subSt = pdfdoc.Bold.With(pdfdoc.Fail)
	}
	d.Cell(marginL, d.Y, 125, 4.5, sub, subSt, "L")
	d.Y += 6

	// Certificate number, top right.
	right := marginL + contentW
	d.Cell(right-60, top, 60, 4, "Certificate no.", stLabel, "R")
	d.Cell(right-60, top+4.2, 60, 7, dash(d.opt.Number), pdfdoc.Bold.Sized(14), "R")
	when := "Issued "
	if !d.certified() {
		when = "Run ended "
	}
	d.Cell(right-60, top+11.5, 60, 4, when+fmtTime(d.rec.Finished), pdfdoc.Small, "R")
	if d.benchTime() && d.decided() == nil { // a review decision is issued when it is made
		d.Cell(right-60, top+14.8, 60, 4, "simulated-bench time, not the time of day", pdfdoc.Bold.Sized(6.8).With(colSimulated), "R")
	}

	d.Rule(d.Y, pdfdoc.Ink, 0.6)
	d.Y += 4
	if d.rec.Engineering {
		// An engineering run used files nobody released: it must never pass for a
		// shipping certificate.
		d.Stripe(d.Y, 11, pdfdoc.Fail)
		d.Cell(marginL, d.Y, contentW, 11, engineeringBanner, pdfdoc.Bold.Sized(18).With(pdfdoc.White), "C")
		d.Y += 14
	}
	d.simulatedBanner()
}

// engineeringBanner marks every page of a certificate from an engineering run.
const engineeringBanner = "ENGINEERING RUN — NOT FOR SHIPMENT"

// identification is the unit/run block with the verdict box beside it.
func (d *doc) identification() {
	r := d.rec
	top := d.Y
	const labelW, valueW = 27.0, 94.0
	type field struct {
		label string
		value string
		st    pdfdoc.Style
	}
	resp := d.resp()
	transfer := gain(r.IdealGain, resp, d.stim()) + " × input "
	if r.IdealOffset < 0 {
		transfer += "− " + resp.magnitude(-r.IdealOffset)
	} else {
		transfer += "+ " + resp.magnitude(r.IdealOffset)
	}
	if r.FullScale != 0 && !math.IsNaN(r.FullScale) {
		transfer += ";  full scale " + resp.magnitude(r.FullScale)
	}
	product := dash(r.Product)
	if r.Revision != "" {
		product += ",  revision " + r.Revision
	}
	tested := fmtTime(d.testedAt())
	if d.benchTime() {
		tested += ", simulated-bench time"
	}
	if d.decided() == nil && !r.Started.IsZero() && !r.Finished.IsZero() && r.Finished.After(r.Started) {
		run := r.Finished.Sub(r.Started)
		if soak := soakTime(r.Soaks); len(r.Soaks) > 0 && soak <= run {
			// A soak waits for a chamber: the time the unit was tested is apart.
			tested += "   (run time " + fmtDur(run) + ": soak time " + fmtDur(soak) + ", test time " + fmtDur(run-soak) + ")"
		} else {
			tested += "   (run time " + run.Round(time.Second).String() + ")"
		}
	}
	big := pdfdoc.Bold.Sized(11)
	val := pdfdoc.Body.Sized(8.5)
	// Each line holds one field across the block, or two side by side.
	lines := [][]field{
		{{"Serial number", dash(r.Serial), big}},
		{{"Product", product, val}},
		{{d.adjustedWord(), "output = " + transfer, val}},
		{{"Tested", tested, val}},
		{{"Conditions", ambient(r.Conditions), val}},
		{{"Station", dash(r.Station), val}, {"Operator", dash(r.Operator), val}},
		{{"Software", dash(r.Software), val}, {"Run id", dash(r.RunID), stMono.Sized(6.8)}},
	}
	const col2, label2W = 62.0, 16.0 // second field: offset and label width
	for _, ln := range lines {
		lh := math.Max(ln[0].st.LineH(), 4.4)
		rows := 1
		for k, f := range ln {
			x, lw, vw := marginL, labelW, valueW
			if len(ln) == 2 {
				vw = col2 - labelW - 2
			}
			if k == 1 {
				x, lw, vw = marginL+col2, label2W, valueW+labelW-col2-label2W
			}
			d.Cell(x, d.Y, lw, lh, f.label, stLabel, "L")
			wrapped := d.Wrap(f.value, vw, f.st)
			for i, l := range wrapped {
				d.Cell(x+lw, d.Y+float64(i)*lh, vw, lh, l, f.st, "L")
			}
			rows = max(rows, len(wrapped))
		}
		d.Y += float64(rows)*lh + 0.5
	}

	// The verdict box.
	const boxW, boxH = 54.0, 34.0
	bx := marginL + contentW - boxW
	c, note := d.verdictLook()
	if d.simulated() && d.decided() == nil { // a decision was made on the record, not on the bench
		note += " on a simulated bench"
	}
	d.FillRect(bx, top, boxW, boxH, c)
	word := string(r.Verdict)
	if word == "" {
		word = "NONE"
	}
	size := 36.0
	for size > 12 && d.TextWidth(word, pdfdoc.Bold.Sized(size).With(pdfdoc.White)) > boxW-6 {
		size -= 2
	}
	d.Cell(bx, top+2, boxW, 19, word, pdfdoc.Bold.Sized(size).With(pdfdoc.White), "C")
	ny := top + 21.5
	for _, l := range d.Wrap(note, boxW-6, pdfdoc.Body.Sized(8).With(pdfdoc.White)) {
		d.Cell(bx+3, ny, boxW-6, 4, l, pdfdoc.Body.Sized(8).With(pdfdoc.White), "C")
		ny += 4
	}
	d.Y = math.Max(d.Y, top+boxH) + 2
}

// verdictLook is the colour of the verdict box and the line under the word.
func (d *doc) verdictLook() (pdfdoc.Color, string) {
	r := d.rec
	if dp := d.decided(); dp != nil {
		return reviewLook(dp)
	}
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
			return pdfdoc.Pass, "no limits judged"
		}
		return pdfdoc.Pass, fmt.Sprintf("%d of %s passed", n-failed, plural(n, "limit", "limits"))
	case sequencer.Fail:
		if failed == 0 {
			return pdfdoc.Fail, "see the reasons below"
		}
		if cond > 0 || turHeld > 0 {
			return pdfdoc.Fail, fmt.Sprintf("%d of %s not passed", failed, plural(n, "limit", "limits"))
		}
		return pdfdoc.Fail, fmt.Sprintf("%d of %s failed", failed, plural(n, "limit", "limits"))
	case sequencer.Review:
		switch {
		case cond > 0:
			return pdfdoc.Review, "held for review: a result lies in a conditional zone"
		case turHeld > 0:
			return pdfdoc.Review, "held for review: a test uncertainty ratio is below the minimum"
		}
		return pdfdoc.Review, "held for review"
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
	if r.Verdict == sequencer.Pass && d.decided() == nil {
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
		bg = pdfdoc.Color{R: 248, G: 243, B: 232}
	}
	type line struct {
		text   string
		st     pdfdoc.Style
		bullet bool
	}
	title := "Why the verdict is " + dash(string(r.Verdict))
	if d.decided() != nil {
		// The reasons are the REVIEW run's; the verdict is the reviewer's.
		title, c, bg = "Why the unit was held for REVIEW", pdfdoc.Review, colReviewBg
	}
	lines := []line{{title, pdfdoc.Bold.Sized(8.5).With(c), false}}
	for _, it := range items {
		for i, l := range d.Wrap(it, contentW-12, pdfdoc.Body) {
			lines = append(lines, line{l, pdfdoc.Body, i == 0})
		}
	}
	d.Y += 1
	for i, l := range lines {
		lh := l.st.LineH() + 0.4
		extra := 0.0
		if i == 0 || i == len(lines)-1 {
			extra = 1.2 // padding above the first and below the last line
		}
		if d.need(lh + extra) {
			d.Y += 1
		}
		d.Stripe(d.Y, lh+extra, bg)
		d.FillRect(marginL, d.Y, 1.2, lh+extra, c)
		ty := d.Y
		if i == 0 {
			ty += extra
		}
		if l.bullet {
			d.Cell(marginL+4, ty, 3, lh, "•", l.st, "L")
		}
		d.Cell(marginL+7, ty, contentW-10, lh, l.text, l.st, "L")
		d.Y += lh + extra
	}
	d.Y += 1
}

// ambient is the conditions line: the ambient temperature and where it came from.
func ambient(c sequencer.Conditions) string {
	if c.AmbientSource == "" && c.AmbientC == 0 || !finite(c.AmbientC) {
		return "Ambient temperature not recorded"
	}
	t := "Ambient " + pdfdoc.Minus(strconv.FormatFloat(c.AmbientC, 'f', 1, 64)) + " °C"
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
