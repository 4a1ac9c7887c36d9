package certificate

import (
	"fmt"
	"math"
	"strconv"
	"strings"
	"time"

	"trimline/sequencer"
	"trimline/sequencer/units"
)

// build lays out every section in order. Page 1 holds what a reader of the
// certificate needs (identification, verdict, results, codes, traceability); the
// measurement detail follows on the same page when it fits, else on the next.
func (d *doc) build() {
	d.newPage()
	d.header()
	d.identification()
	d.reasons()
	d.results()
	d.trims()
	d.instrumentsUsed()
	d.filesInForce()
	d.detail()
	d.footers()
}

func (d *doc) certified() bool {
	return d.rec.Verdict == sequencer.Pass || d.rec.Verdict == sequencer.Fail
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
}

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
		{{"Station", dash(r.Station), val}, {"Operator", dash(r.Operator), val}},
		{{"Software", dash(r.Software), val}, {"Run id", dash(r.RunID), stMono.sized(7.5)}},
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
	failed := 0
	for _, o := range r.Outcomes {
		if !o.Pass {
			failed++
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
		return colFail, fmt.Sprintf("%d of %s failed", failed, plural(n, "limit", "limits"))
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
	if r.Verdict != sequencer.Fail {
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

// results is the table of every limit's outcome.
func (d *doc) results() {
	cols := []column{
		{title: "Limit", w: 56, align: "L"},
		{title: "Measured", w: 34, align: "R"},
		{title: "Limit expression", w: 70, align: "L", gap: 4},
		{title: "Verdict", w: 20, align: "C"},
	}
	var rows []row
	for _, o := range d.rec.Outcomes {
		name := cell{{o.Name, stBold}}
		if o.Description != "" {
			name = append(name, span{o.Description, stSmall})
		}
		var meas cell
		for _, v := range outcomeValues(o) {
			meas = append(meas, span{v, stBody})
		}
		expr := cell{{o.Expr, stMono}}
		if !o.Pass && o.Reason != "" {
			expr = append(expr, span{o.Reason, stSmall.with(colFail)})
		}
		rows = append(rows, row{name, meas, expr, verdictCell(o.Pass)})
	}
	d.heading("Results against limits", keep(d.tableHeight(cols, rows)))
	d.table(cols, rows)
	if len(rows) > 0 {
		d.note("Each limit expression is written in the unit of its measured value.")
	}
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
		rb := c1(strconv.Itoa(t.Readback), stBody)
		if t.Readback != t.Code {
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
			c1(strconv.Itoa(t.Code), stBold),
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
		said := func(s string) string { // "0" is what *IDN? gives for "not told"
			if s = strings.TrimSpace(s); s == "0" {
				return ""
			}
			return s
		}
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
		if t, err := time.Parse("2006-01-02", in.CalDue); err == nil && !d.rec.Finished.IsZero() {
			if d.rec.Finished.UTC().After(t.Add(24 * time.Hour)) {
				due = cell{{in.CalDue, stBold.with(colFail)}, {"overdue at test", stSmall.with(colFail)}}
			}
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
	d.heading("Instruments used", keep(d.tableHeight(cols, rows)))
	d.table(cols, rows)
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
		d.text(marginL, ly+0.6, contentW-32, stSmall.lineH(), left, stSmall.with(colInk), "L")
		d.text(marginL+contentW-30, y+1.8, 30, 4, fmt.Sprintf("Page %d of %d", p, n), stBold.sized(8), "R")
	}
}
