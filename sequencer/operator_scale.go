package sequencer

import (
	"math"
	"strings"

	"trimline/instruments/units"
)

// operatorQuantity re-expresses a measured value and its tolerance for the
// operator at arm's length. The limit's own unit is kept unless the larger of
// the value and the tolerance limits would need four or more digits before the
// decimal point in it; then a voltage or current moves to the SI prefix that
// suits that larger number ("−12384 µV, limit ±800 µV" reads "−12.4 mV, limit
// ±0.8 mV"). The value is rounded to three significant digits, never finer
// than the certificate states it (the decimal place of its stated expanded
// uncertainty U, JCGM 100:2008 §7.2.6), and finer again only where that
// rounding would put it on a tolerance limit or across one, as the
// certificate's own value does (units.FormatValue). ok is false for a unit
// that takes no prefix (%, ppm, codes) or that units.Parse does not know: the
// caller then writes the certificate's value as it is.
func operatorQuantity(value, U float64, unit string, lower, upper *float64) (v, tol, u string, ok bool) {
	unit = strings.TrimSpace(unit)
	q, err := units.Parse("1 " + unit)
	if err != nil || (q.Dim != units.Volt && q.Dim != units.Ampere) || math.IsNaN(value) || math.IsInf(value, 0) {
		return "", "", "", false
	}
	base := "V"
	if q.Dim == units.Ampere {
		base = "A"
	}
	big := math.Abs(value)
	for _, b := range []*float64{lower, upper} {
		if b != nil {
			big = math.Max(big, math.Abs(*b))
		}
	}
	// scale: SI per limit unit; f: SI per shown unit.
	scale, f, prefix := q.Value, q.Value, strings.TrimSuffix(units.Display(unit), base)
	if big >= 999.5 {
		prefix, f = units.SIPrefix(big * scale)
	}
	// dec: decimals in the limit's unit; three significant digits, or the
	// stated U's place where that is coarser.
	dec := 0
	if value != 0 {
		dec = 2 - int(math.Floor(math.Log10(math.Abs(value))))
	}
	if U > 0 && !math.IsInf(U, 0) {
		_, du := units.RoundU(U)
		dec = min(dec, du)
	}
	var bounds []float64
	for _, b := range []*float64{lower, upper} {
		if b != nil {
			bounds = append(bounds, *b)
		}
	}
	r := roundAt(value, dec)
	for extra := 0; extra < 6 && !units.SameSides(value, r, bounds); extra++ {
		dec++
		r = roundAt(value, dec)
	}
	// The same decimal place in the shown unit.
	shift := int(math.Round(math.Log10(f / scale)))
	v = units.FormatAt(r*scale/f, max(dec+shift, 0))
	if strings.Contains(v, ".") { // an operator reads 3.2 mA, not 3.20 mA
		v = strings.TrimSuffix(strings.TrimRight(v, "0"), ".")
	}
	var lo, hi *float64
	if lower != nil {
		x := *lower * scale / f
		lo = &x
	}
	if upper != nil {
		x := *upper * scale / f
		hi = &x
	}
	return v, toleranceText(lo, hi), prefix + base, true
}

// roundAt rounds v to dec decimals (negative: to tens, hundreds, …).
func roundAt(v float64, dec int) float64 {
	p := math.Pow(10, float64(dec))
	return math.Round(v*p) / p
}
