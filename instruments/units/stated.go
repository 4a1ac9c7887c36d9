package units

import (
	"math"
	"strconv"
	"strings"
)

// Stated numbers: one rounding rule for a measured value and its uncertainty.
//
// JCGM 100:2008 §7.2.6: the expanded uncertainty U is stated with at most two
// significant digits, and the value is rounded to the same decimal place. The
// clause allows rounding U up rather than to the nearest digit; trimline always
// rounds up, the conservative choice: the stated U is never smaller than the
// evaluated one, so a guard band w = r·U and the acceptance limits computed from
// it are never narrower than the evaluation supports. The record stores the
// stated U (metrology revision 1 on), the limits judge with it, and every
// document prints it with these functions, so one quantity has one number.

// RoundU returns U rounded up to two significant digits (JCGM 100:2008 §7.2.6,
// rounding up) and the decimal place of its second digit: dec is the number of
// decimals to write it with, negative when U is rounded to tens, hundreds, …
// RoundU(211.3) = 220, −1; RoundU(0.01423) = 0.015, 3; RoundU(9.96) = 10, 0.
// A U that already has two significant digits (within 1e-9 relative, the noise
// of a unit conversion) comes back as the nearest float64 of its decimal, so
// rounding a stated U again changes nothing. U ≤ 0, NaN or ±Inf is returned as
// it is, with dec 0.
func RoundU(U float64) (float64, int) {
	if !(U > 0) || math.IsInf(U, 0) {
		return U, 0
	}
	dec := 1 - int(math.Floor(math.Log10(U)))
	for {
		x := U * math.Pow(10, float64(dec))
		r := math.Ceil(x - 1e-9*x)
		if r >= 100 { // 99.96 → 100: three digits, one decimal fewer
			dec--
			continue
		}
		// The decimal r·10^−dec, parsed: the nearest float64 to it (220e-6,
		// not 219.99999999999997e-6).
		v, err := strconv.ParseFloat(strconv.FormatFloat(r, 'f', 0, 64)+"e"+strconv.Itoa(-dec), 64)
		if err != nil {
			return r / math.Pow(10, float64(dec)), dec
		}
		return v, dec
	}
}

// IsStated reports whether U is already a stated uncertainty: two significant
// digits (within 1e-9 relative), so that RoundU leaves it as it is.
func IsStated(U float64) bool {
	r, _ := RoundU(U)
	return U > 0 && math.Abs(r-U) <= 1e-9*U
}

// FormatAt writes v rounded to dec decimals (a negative dec rounds to tens,
// hundreds, …), with a real minus sign (−) and no "−0": FormatAt(48.5, −1) =
// "50", FormatAt(−0.2796, 3) = "−0.280".
func FormatAt(v float64, dec int) string {
	var s string
	switch {
	case math.IsNaN(v) || math.IsInf(v, 0):
		s = strconv.FormatFloat(v, 'g', -1, 64)
	case dec < 0:
		p := math.Pow(10, float64(-dec))
		s = strconv.FormatFloat(math.Round(v/p)*p, 'f', 0, 64)
	default:
		s = strconv.FormatFloat(v, 'f', min(dec, 17), 64)
	}
	if strings.Trim(s, "-0.") == "" {
		s = strings.TrimPrefix(s, "-")
	}
	return strings.Replace(s, "-", "−", 1)
}

// FormatU writes an expanded uncertainty as it is stated: rounded up to two
// significant digits (RoundU), trailing zeros kept where they are significant:
// FormatU(211.3) = "220", FormatU(0.996) = "1.0".
func FormatU(U float64) string {
	r, dec := RoundU(U)
	return FormatAt(r, max(dec, 0))
}

// FormatValue writes a value measured with expanded uncertainty U to the decimal
// place of U's second significant digit (JCGM 100:2008 §7.2.6): FormatValue(48.5,
// 211.3) = "50". Where that rounding would move the value onto, or across, one of
// the limits it is judged against (bounds: tolerance and acceptance limits), it
// is written with as many more decimals as it takes to show on which side it
// lies, at most six more: FormatValue(584, 220, 580) = "584", not "580". Without
// an evaluated U (0, NaN) it is FormatSig(v, 6).
func FormatValue(v, U float64, bounds ...float64) string {
	if !(U > 0) || math.IsInf(U, 0) || math.IsNaN(v) || math.IsInf(v, 0) {
		return FormatSig(v, 6)
	}
	_, dec := RoundU(U)
	for extra := 0; ; extra++ {
		d := dec + extra
		s := FormatAt(v, d)
		if extra == 6 || SameSides(v, parseMinus(s), bounds) {
			return s
		}
	}
}

// SameSides reports whether a and b lie on the same side of (or both on) every
// bound: whether a rounded b tells the same as the value a against the limits.
func SameSides(a, b float64, bounds []float64) bool {
	for _, x := range bounds {
		if cmp(a, x) != cmp(b, x) {
			return false
		}
	}
	return true
}

func cmp(a, b float64) int {
	switch {
	case a < b:
		return -1
	case a > b:
		return 1
	}
	return 0
}

// parseMinus reads a number FormatAt wrote.
func parseMinus(s string) float64 {
	v, err := strconv.ParseFloat(strings.Replace(s, "−", "-", 1), 64)
	if err != nil {
		return math.NaN()
	}
	return v
}

// FormatLimit writes an acceptance limit AL = TL ∓ w computed from an expanded
// uncertainty U (upper: the limit is an upper one). From a stated U (IsStated)
// AL is a short decimal and is written in full, to the finest decimal place of
// U, the tolerance limit tl and the guard band w (up to nine significant
// digits): 800 − 220 = "580". From a U that was not stated (records made before
// U was rounded) it is written one decimal finer than U's second significant
// digit, rounded inward (the lower limit up, the upper down), so that the
// printed interval never claims more than the evaluated one.
func FormatLimit(al, tl, w, U float64, upper bool) string {
	if math.IsNaN(al) || math.IsInf(al, 0) {
		return FormatSig(al, 6)
	}
	_, dec := RoundU(U)
	if IsStated(U) {
		dec = max(dec, decimals(tl), decimals(w), 0)
	} else {
		dec = max(dec, 0) + 1
	}
	p := math.Pow(10, float64(dec))
	x := al * p
	if upper {
		x = math.Floor(x + 1e-9*math.Abs(x))
	} else {
		x = math.Ceil(x - 1e-9*math.Abs(x))
	}
	return FormatAt(x/p, dec)
}

// decimals is the number of decimals of v written with up to nine significant
// digits (FormatSig): decimals(0.0075) = 4, decimals(800) = 0.
func decimals(v float64) int {
	s := FormatSig(v, 9)
	if i := strings.IndexByte(s, '.'); i >= 0 && !strings.ContainsAny(s, "eE") {
		return len(s) - i - 1
	}
	return 0
}

// FormatTUR writes a test uncertainty ratio "3.88:1" with three significant
// digits, rounded to the nearest; a ratio below the minimum the limit file
// requires (low) is rounded down instead, so that it never prints as the
// minimum itself ("3.99:1, below the minimum 4:1", not "4.00:1"). From 10⁵ up
// the digits say nothing more: "≥ 1e5:1". Not defined (≤ 0, NaN): "—".
func FormatTUR(t float64, low bool) string {
	switch {
	case !(t > 0) || math.IsInf(t, 0):
		return "—"
	case t >= 1e5:
		return "≥ 1e5:1"
	}
	dec := 2 - int(math.Floor(math.Log10(t)))
	if low {
		p := math.Pow(10, float64(dec))
		t = math.Floor(t*p+1e-9) / p
	}
	r, _ := strconv.ParseFloat(strings.Replace(FormatAt(t, dec), "−", "-", 1), 64)
	if r >= math.Pow(10, float64(3-dec)) {
		dec-- // 9.996 → "10.0": still three digits
	}
	return FormatAt(t, dec) + ":1"
}

// FormatProbability writes a probability (a false-accept probability, the
// probability of lying outside a tolerance) in percent with two significant
// digits: "2.9 %", "72 %". Below 0.0001 % it is "< 0.0001 %", zero included:
// a tail probability that underflowed is small, not impossible. Near 100 % it
// keeps two significant digits of what is missing to 100 % ("99.70 %"), and
// above 99.9999 % it is "> 99.9999 %", exactly 1 included: a tail that
// rounded to 1 is near certain, not certain, as the zero end is small, not
// impossible. (A value judged without an uncertainty has no probability; a
// caller that wants to say "100 %" for it says so itself.) Not a probability:
// "—".
func FormatProbability(p float64) string {
	if math.IsNaN(p) || p < 0 || p > 1 {
		return "—"
	}
	pct := p * 100
	switch {
	case pct < 1e-4:
		return "< 0.0001 %"
	case 100-pct < 1e-4:
		return "> 99.9999 %"
	case pct >= 99:
		q := 100 - pct
		dec := 1 - int(math.Floor(math.Log10(q)))
		return strconv.FormatFloat(pct, 'f', dec, 64) + " %"
	}
	dec := max(0, 1-int(math.Floor(math.Log10(pct))))
	s := strconv.FormatFloat(pct, 'f', dec, 64)
	if r, _ := strconv.ParseFloat(s, 64); r >= math.Pow(10, math.Floor(math.Log10(pct))+1) && dec > 0 {
		s = strconv.FormatFloat(pct, 'f', dec-1, 64) // 9.96 → "10", two digits
	}
	return s + " %"
}

// FormatDOF writes effective degrees of freedom as "νeff = 336": a fractional
// Welch–Satterthwaite νeff is truncated to the next lower integer (JCGM
// 100:2008 G.4.1, as for a table of t-factors); from 1000 on the coverage
// factor no longer depends on it and it is "νeff ≥ 1000"; infinite is "νeff =
// ∞"; unknown (≤ 0, NaN) is "".
func FormatDOF(dof float64) string {
	switch {
	case math.IsInf(dof, 1):
		return "νeff = ∞"
	case math.IsNaN(dof) || dof <= 0:
		return ""
	case dof >= 1000:
		return "νeff ≥ 1000"
	}
	return "νeff = " + strconv.FormatFloat(math.Floor(dof), 'f', 0, 64)
}
