package certificate

import (
	"math"
	"strconv"
	"strings"

	"trimline/instruments/units"

	"trimline/reports/internal/pdfdoc"
	"trimline/sequencer"
)

// coefficients is the table of the firmware correction coefficients written to
// the unit (sequencer.Record.Coefficients), shown when there are any, in bands
// by channel and by the step that wrote them: the clear step's rows say what
// the unit held as found and that no correction was written in its place; the
// correction step's say what the fit asked for, the word written in the
// coefficient's number format and the value it stands for, the format's
// resolution, and what the unit read back.
func (d *doc) coefficients() {
	cols, rows, bands := d.coefficientTable()
	if len(rows) == 0 {
		return
	}
	d.tableSection("Correction coefficients written", cols, rows, bands)
	d.note(coefficientNote)
}

// coefficientNote is the small print under the coefficients table.
const coefficientNote = "Found: the unit's coefficient as found, before the clear step wrote no correction " +
	"(gain 1, offset 0) for the as-found sweep. " +
	"Asked for: the exact value the fit gave, with its standard uncertainty u from the fit. " +
	"The word written is that value rounded to the nearest step of the coefficient's format (the resolution); " +
	"this rounding (rectangular, resolution/√12) is counted in the uncertainty of the results the coefficients give. " +
	"Read back: the unit's reply, which matches when it is the written word at the format's resolution."

// clearing reports whether c was written by a step that clears the
// correction (a clear_trim step in the record's steps, or, in a record
// without them, an entry that says what it found).
func (d *doc) clearing(c sequencer.CoefficientWrite) bool {
	for _, s := range d.rec.Steps {
		if s.Name == c.Step && (s.Channel == "" || s.Channel == c.Channel) {
			return s.Kind == "clear_trim"
		}
	}
	return c.Found != ""
}

// coefficientBand is the title of the band over the coefficients one step
// wrote on one channel: "Channel 2 · step “clear correction”: as found, then
// no correction written"; the channel alone for an entry that names no step,
// "" (no band) when it names neither.
func (d *doc) coefficientBand(c sequencer.CoefficientWrite) string {
	t := ""
	if c.Step != "" {
		t = "Step “" + c.Step + "”"
		if d.clearing(c) {
			t += ": as found, then no correction written"
		} else {
			t += ": correction from the fit"
		}
	}
	switch {
	case c.Channel != "" && t != "":
		t = "Channel " + c.Channel + " · " + lowerFirst(t)
	case c.Channel != "":
		t = "Channel " + c.Channel
	}
	return t
}

func lowerFirst(s string) string {
	if s == "" {
		return s
	}
	return strings.ToLower(s[:1]) + s[1:]
}

// coefficientTable is the columns and rows of the coefficients table, with a
// band over each run of rows of one channel and one step.
func (d *doc) coefficientTable() ([]pdfdoc.Column, []pdfdoc.Row, []pdfdoc.Band) {
	cols := []pdfdoc.Column{
		{Title: "Coefficient", W: 27, Align: "L"},
		{Title: "Format", W: 20, Align: "L"},
		{Title: "Found · asked for ± u", W: 33, Align: "R"},
		{Title: "Word written", W: 21, Align: "L", Gap: 3},
		{Title: "Stands for", W: 23, Align: "R"},
		{Title: "Resolution", W: 18, Align: "R"},
		{Title: "Read back", W: 21, Align: "L", Gap: 3},
		{Title: "Match", W: 17, Align: "C"},
	}
	var rows []pdfdoc.Row
	var bands []pdfdoc.Band
	last := ""
	for _, c := range byChannel(d, d.rec.Coefficients, func(c sequencer.CoefficientWrite) string { return c.Channel }) {
		if b := d.coefficientBand(c); b != last {
			if b != "" {
				bands = append(bands, pdfdoc.Band{At: len(rows), Title: b})
			}
			last = b
		}
		about := "adjusts " + dash(c.Adjusts)
		if u := dispUnit(c.Unit); u != "" {
			about += ", in " + u
		}
		name := pdfdoc.Cell{{Text: dash(c.Name), St: pdfdoc.Bold}, {Text: about, St: pdfdoc.Small}}

		asked := c1(fmtAsked(c), pdfdoc.Body)
		if d.clearing(c) {
			asked = pdfdoc.Cell{{Text: "found " + fmtFound(c), St: pdfdoc.Body}, {Text: "then no correction", St: pdfdoc.Small}}
		}
		word := c1(dash(c.Text), stMono)
		stands := c1(fmtCoef(c.Value, c.Resolution), pdfdoc.Body)
		rb := c1(dash(c.Readback), stMono)
		match := c1("yes", pdfdoc.Bold.With(pdfdoc.Pass))
		switch {
		case !c.Written:
			word = pdfdoc.Cell{{Text: "—", St: pdfdoc.Body}, {Text: "not written", St: pdfdoc.Small.With(pdfdoc.Muted)}}
			stands = c1("—", pdfdoc.Body)
			rb, match = c1("—", pdfdoc.Body), c1("—", pdfdoc.Body)
		case !c.Match:
			rb = append(rb, pdfdoc.Span{Text: "= " + fmtCoef(c.ReadbackValue, c.Resolution), St: pdfdoc.Small.With(pdfdoc.Fail)})
			match = pdfdoc.Cell{{Text: "NO", St: pdfdoc.Bold.With(pdfdoc.Fail)}, {Text: "differs from written", St: pdfdoc.Small.With(pdfdoc.Fail)}}
		}
		res := fmtResolution(c)
		rows = append(rows, pdfdoc.Row{
			name,
			c1(dash(c.Format), pdfdoc.Body),
			asked,
			word,
			stands,
			c1(res, pdfdoc.Body),
			rb,
			match,
		})
	}
	return cols, rows, bands
}

// fmtFound writes what a clear step found in a coefficient: its value, with
// the word when the word is not that value written out ("1.000000 (4000)"),
// or the word alone when it did not decode; "not read" when there was no reply.
func fmtFound(c sequencer.CoefficientWrite) string {
	w := strings.TrimSpace(c.Found)
	if w == "" {
		return "not read"
	}
	v := fmtCoef(c.FoundValue, c.Resolution)
	if c.FoundValue == 0 && !looksZero(w) {
		return w // a word that does not decode to a number (FoundValue 0)
	}
	if f, err := strconv.ParseFloat(w, 64); err == nil && f == c.FoundValue {
		return v
	}
	return v + " (" + w + ")"
}

// looksZero reports whether a word reads as zero: "0", "0000", "0x0000", "0.0".
func looksZero(w string) bool {
	w = strings.TrimPrefix(strings.TrimPrefix(strings.ToLower(w), "0x"), "+")
	w = strings.TrimPrefix(w, "-")
	return w != "" && strings.Trim(w, "0.") == ""
}

// fmtAsked writes what the fit asked of a coefficient: "1.002346 ± 0.000012"
// (u, the standard uncertainty, to two digits), or the value alone to the
// format's resolution when u was not evaluated.
func fmtAsked(c sequencer.CoefficientWrite) string {
	if !finite(c.Ideal) {
		return "not valid"
	}
	if hasU(c.IdealU) {
		return fmtWithU(c.Ideal, c.IdealU, "")
	}
	return fmtCoef(c.Ideal, c.Resolution)
}

// fmtCoef writes a coefficient's value to one decimal finer than the format's
// resolution, so that the rounding to the format shows: 1.0023499 with a
// resolution of 6.1e-5 is "1.002350"; with no resolution, seven significant
// digits.
func fmtCoef(v, res float64) string {
	if !finite(v) {
		return "not valid"
	}
	var s string
	switch {
	case v == 0:
		// Zero is exact in every format; a float format's spacing there (1.4e-45
		// for float32) would ask for more decimals than a page holds.
		s = "0"
	case res > 0 && finite(res):
		dec := int(math.Ceil(-math.Log10(res))) + 1
		s = units.FormatAt(v, max(0, min(dec, 15)))
	default:
		s = pdfdoc.Minus(strconv.FormatFloat(v, 'g', 7, 64))
	}
	return s
}

// fmtResolution writes a coefficient's resolution, the format's spacing at
// its value, with four significant digits; "exact" for a zero in a floating
// format, whose spacing there (1.4e-45 for float32) says nothing a reader
// needs; "—" when not recorded.
func fmtResolution(c sequencer.CoefficientWrite) string {
	switch {
	case !(c.Resolution > 0) || !finite(c.Resolution):
		return "—"
	case c.Value == 0 && c.Resolution < 1e-30:
		return "exact"
	}
	return units.FormatSig(c.Resolution, 4)
}
