package units

import (
	"math"
	"strconv"
	"strings"
)

// FormatSig writes v with up to sig significant digits (trailing zeros dropped), no
// exponent for ordinary sizes (1e-4 ≤ |v| < 1e9), and a real minus sign (−):
// FormatSig(-12.30, 6) = "−12.3". It is how statements, reports and terminals
// show a number in a limit's unit.
func FormatSig(v float64, sig int) string {
	var s string
	if a := math.Abs(v); a == 0 || (a >= 1e-4 && a < 1e9) {
		dec := 0
		if a != 0 {
			dec = max(0, sig-1-int(math.Floor(math.Log10(a))))
		}
		s = strconv.FormatFloat(v, 'f', dec, 64)
		if strings.Contains(s, ".") {
			s = strings.TrimRight(strings.TrimRight(s, "0"), ".")
		}
	} else {
		s = strconv.FormatFloat(v, 'g', sig, 64)
	}
	if s == "-0" {
		s = "0"
	}
	return strings.Replace(s, "-", "−", 1)
}

// FormatNumber writes a plain number (a Number: no unit, no scaling) with sig
// significant digits, keeping trailing zeros because they are significant, no
// exponent for ordinary sizes (1e-4 ≤ |v| < 1e9) and an ASCII minus:
// FormatNumber(1.30023, 3) = "1.30", FormatNumber(0.01234, 3) = "0.0123".
func FormatNumber(v float64, sig int) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return strconv.FormatFloat(v, 'g', -1, 64)
	}
	sig = max(sig, 1)
	a := math.Abs(v)
	if a != 0 && (a < 1e-4 || a >= 1e9) {
		return strconv.FormatFloat(v, 'g', sig, 64)
	}
	dec := sig - 1
	if a != 0 {
		// Round first: 9.996 to three digits is 10.0, not 10.00.
		e := int(math.Floor(math.Log10(a)))
		if r, _ := strconv.ParseFloat(strconv.FormatFloat(v, 'e', sig-1, 64), 64); math.Abs(r) >= math.Pow(10, float64(e+1)) {
			e++
		}
		dec = max(0, sig-1-e)
	}
	s := strconv.FormatFloat(v, 'f', dec, 64)
	if s == "-0" || strings.Trim(s, "-0.") == "" {
		s = strings.TrimPrefix(s, "-")
	}
	return s
}

// FormatPercent writes a fraction p (a probability, a yield) as a percentage with
// three significant digits: FormatPercent(0.92) = "92 %"; below 0.0001 % it is
// "< 0.0001 %".
func FormatPercent(p float64) string {
	v := p * 100
	switch {
	case v == 0:
		return "0 %"
	case v < 1e-4:
		return "< 0.0001 %"
	}
	dec := max(0, 2-int(math.Floor(math.Log10(v))))
	s := strconv.FormatFloat(v, 'f', dec, 64)
	if strings.Contains(s, ".") {
		s = strings.TrimRight(strings.TrimRight(s, "0"), ".")
	}
	return s + " %"
}

// Display writes a unit as a person reads it, the micro prefix as µ: "uV" → "µV".
func Display(u string) string {
	if len(u) > 1 && u[0] == 'u' {
		return "µ" + u[1:]
	}
	return u
}
