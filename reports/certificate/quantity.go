package certificate

import (
	"math"
	"strconv"
	"strings"

	"trimline/instruments/units"
	"trimline/reports/internal/pdfdoc"
)

// quantity is one of the record's units (sequencer.Record.StimulusUnit and
// ResponseUnit): "V", "A" or "count" (a number the unit reports), or another
// name printed as it is. Volts print as the certificate always printed them,
// so a record made before other quantities reads byte for byte as before.
type quantity string

// The quantities a record names.
const (
	qVolt  quantity = "V"
	qAmp   quantity = "A"
	qCount quantity = "count"
)

// quantityOf is the quantity a record's unit names: "" (a record made before
// other quantities) is volts.
func quantityOf(u string) quantity {
	if u == "" {
		return qVolt
	}
	return quantity(u)
}

// zeroName is the unit a stimulus of zero is written in: "0 V in", "0 A in".
func (q quantity) zeroName() string {
	if q == qAmp {
		return "A"
	}
	return "V"
}

// resp is the unit of the record's responses (means, errors, offsets, noise,
// residuals); stim that of its stimuli.
func (d *doc) resp() quantity { return quantityOf(d.rec.ResponseUnit) }
func (d *doc) stim() quantity { return quantityOf(d.rec.StimulusUnit) }

// format writes v with digits significant digits: volts and amperes with an SI
// prefix ("−3.21 µV", "4.000 mA"), counts bare with "counts" ("1234.5 counts"),
// or "—" when v is not a number.
func (q quantity) format(v float64, digits int) string {
	if !finite(v) {
		return "—"
	}
	switch q {
	case qVolt:
		return fmtVolts(v, digits)
	case qCount:
		return countText(units.FormatSig(v, digits))
	}
	return pdfdoc.Minus(units.Format(v, string(q), digits)) // amperes, or a unit the record names
}

// cell is format for a narrow table cell: counts bare (the table says they are
// counts), the others as format writes them.
func (q quantity) cell(v float64, digits int) string {
	if q == qCount && finite(v) {
		return units.FormatSig(v, digits)
	}
	return q.format(v, digits)
}

// countText is a number of counts with its word: "1 count", "−0.37 counts".
func countText(n string) string {
	if n == "1" || n == "−1" {
		return n + " count"
	}
	return n + " counts"
}

// magnitude is the magnitude of a positive v (an offset, a full scale) as the
// ideal transfer states it, with six significant digits.
func (q quantity) magnitude(v float64) string {
	if q == qCount {
		return countText(units.FormatSig(v, 6))
	}
	return units.Format(v, string(q), 6)
}

// prefixes are the SI prefixes the plots and gains choose from, largest first.
var prefixes = []struct {
	f float64
	s string
}{{1, ""}, {1e-3, "m"}, {1e-6, "µ"}, {1e-9, "n"}}

// scale picks how to write values up to maxAbs of q on an axis: the factor to
// divide by and the unit's name ("mV", "µA", "counts").
func (q quantity) scale(maxAbs float64) (float64, string) {
	switch q {
	case qVolt:
		return siScale(maxAbs)
	case qCount:
		return 1, "counts"
	}
	for _, p := range prefixes {
		if maxAbs >= p.f || (maxAbs == 0 && p.f == 1e-6) {
			return p.f, p.s + string(q)
		}
	}
	return 1e-9, "n" + string(q)
}

// gainUnit is the unit of a gain from stimulus s to response q: "V/V", "A/V",
// "count/V".
func gainUnit(q, s quantity) string { return string(q) + "/" + string(s) }

// gain writes a gain (response per stimulus) with seven significant digits and
// its unit pair: "200 V/V" as before, "800 mA/V", "3200 count/V". A gain in
// amperes per unit of stimulus takes the SI prefix that suits it.
func gain(g float64, q, s quantity) string {
	if q != qAmp || g == 0 || !finite(g) {
		return strings.ReplaceAll(pdfdoc.Minus(strconv.FormatFloat(g, 'g', 7, 64)), "e-", "e−") + " " + gainUnit(q, s)
	}
	f, p := 1e-9, "n"
	for _, c := range prefixes {
		if math.Abs(g) >= c.f*0.9999999 {
			f, p = c.f, c.s
			break
		}
	}
	return pdfdoc.Minus(strconv.FormatFloat(g/f, 'g', 7, 64)) + " " + p + gainUnit(q, s)
}
