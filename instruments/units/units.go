// Package units parses engineering quantities such as "10mV", "-2.5 V", "250us",
// "12.2 uV", "10 ppm", "0.1 %" and "5 kHz" into SI values, once, at the file boundary.
// Everything past the boundary is a float64 in SI base units (volts, amperes, seconds,
// hertz, ohms; ratios as plain fractions, so 10 ppm is 1e-5).
package units

import (
	"fmt"
	"math"
	"strconv"
	"strings"
	"time"

	"github.com/goccy/go-yaml/ast"
)

// Dim is the physical dimension of a quantity.
type Dim int

const (
	Ratio   Dim = iota // dimensionless: ppm, %, or a plain number
	Volt               // V
	Ampere             // A
	Second             // s
	Hertz              // Hz
	Ohm                // Ω (also written ohm)
	Celsius            // °C (also written degC)
	Count              // a count of codes or LSBs ("code", "LSB")
	Number             // a plain number with no unit and no scaling: a statistic such as χ²/ν
)

var dimNames = map[Dim]string{Ratio: "ratio (ppm or %)", Volt: "voltage (V)", Ampere: "current (A)",
	Second: "time (s)", Hertz: "frequency (Hz)", Ohm: "resistance (Ω)", Celsius: "temperature (°C)", Count: "count (code)",
	Number: "plain number (no unit)"}

func (d Dim) String() string {
	if s, ok := dimNames[d]; ok {
		return s
	}
	return fmt.Sprintf("dim(%d)", int(d))
}

// Quantity is a parsed value in SI base units.
type Quantity struct {
	Value float64
	Dim   Dim
}

var prefixes = map[string]float64{"p": 1e-12, "n": 1e-9, "u": 1e-6, "µ": 1e-6, "μ": 1e-6, "m": 1e-3, "k": 1e3, "M": 1e6, "G": 1e9}

type unitDef struct {
	dim      Dim
	scale    float64
	prefixed bool
}

var unitTable = map[string]unitDef{
	"V": {Volt, 1, true}, "A": {Ampere, 1, true}, "s": {Second, 1, true},
	"Hz": {Hertz, 1, true}, "Ω": {Ohm, 1, true}, "ohm": {Ohm, 1, true}, "Ohm": {Ohm, 1, true},
	"ppm": {Ratio, 1e-6, false}, "%": {Ratio, 1e-2, false}, "ppb": {Ratio, 1e-9, false},
	"°C": {Celsius, 1, false}, "degC": {Celsius, 1, false},
	"code": {Count, 1, false}, "codes": {Count, 1, false}, "LSB": {Count, 1, false},
	"count": {Count, 1, false}, "counts": {Count, 1, false},
	"min": {Second, 60, false}, "h": {Second, 3600, false},
}

// Parse reads a number followed by an optional unit with an optional SI prefix.
// Spaces between number and unit are allowed. A bare number is a Ratio. The error
// says what was expected.
func Parse(s string) (Quantity, error) {
	t := strings.TrimSpace(s)
	if t == "" {
		return Quantity{}, fmt.Errorf("expected a quantity such as 10mV, found nothing")
	}
	// Split the longest numeric prefix.
	end := numberEnd(t)
	if end == 0 {
		return Quantity{}, fmt.Errorf("expected a number before the unit in %q", s)
	}
	num, err := strconv.ParseFloat(t[:end], 64)
	if err != nil || math.IsNaN(num) || math.IsInf(num, 0) {
		return Quantity{}, fmt.Errorf("expected a finite number in %q", s)
	}
	unit := strings.TrimSpace(t[end:])
	if unit == "" {
		return Quantity{Value: num, Dim: Ratio}, nil
	}
	if f, d, ok := lookupUnit(unit); ok {
		return scaled(s, num*f, d)
	}
	return Quantity{}, fmt.Errorf("unknown unit %q in %q (expected V, A, s, Hz, Ω with an optional prefix p n u µ m k M G, or ppm, %%, °C, count)", unit, s)
}

// lookupUnit returns the SI scale and dimension of a unit written with an
// optional prefix ("mA" is 1e-3 A).
func lookupUnit(unit string) (scale float64, d Dim, ok bool) {
	if u, ok := unitTable[unit]; ok {
		return u.scale, u.dim, true
	}
	for p, f := range prefixes {
		if rest, ok := strings.CutPrefix(unit, p); ok {
			if u, ok := unitTable[rest]; ok && u.prefixed {
				return f * u.scale, u.dim, true
			}
		}
	}
	return 0, 0, false
}

// Per is a ratio of two quantities written with a compound unit such as
// "800 mA/V" or "3200 count/V": Value in SI units of Num per SI unit of Den
// (0.8 for "800 mA/V"). A bare number has Num and Den both Ratio.
type Per struct {
	Value    float64
	Num, Den Dim
}

// ParseRatioUnit reads a number followed by a compound unit NUM/DEN, each an
// optional SI prefix and a unit (V, A, count, …): "200 V/V" is 200, "800 mA/V"
// and "0.8 mA/mV" are both 0.8 A/V, "3200 count/V" is 3200 count/V. A bare
// number ("200") is a plain ratio with Num and Den Ratio; a unit that is no ratio
// ("200 mV") is refused.
func ParseRatioUnit(s string) (Per, error) {
	t := strings.TrimSpace(s)
	end := numberEnd(t)
	if end == 0 {
		return Per{}, fmt.Errorf("expected a number before the unit in %q, e.g. 200 V/V or 800 mA/V", s)
	}
	num, err := strconv.ParseFloat(t[:end], 64)
	if err != nil || math.IsNaN(num) || math.IsInf(num, 0) {
		return Per{}, fmt.Errorf("expected a finite number in %q", s)
	}
	unit := strings.TrimSpace(t[end:])
	if unit == "" {
		return Per{Value: num, Num: Ratio, Den: Ratio}, nil
	}
	top, bottom, ok := strings.Cut(unit, "/")
	if !ok {
		return Per{}, fmt.Errorf("%q has no ratio unit: expected a unit such as V/V, mA/V or count/V", s)
	}
	top, bottom = strings.TrimSpace(top), strings.TrimSpace(bottom)
	fn, dn, okn := lookupUnit(top)
	fd, dd, okd := lookupUnit(bottom)
	switch {
	case !okn:
		return Per{}, fmt.Errorf("unknown unit %q in %q (expected V, A or count with an optional prefix, over V or A)", top, s)
	case !okd:
		return Per{}, fmt.Errorf("unknown unit %q in %q (expected V, A or count with an optional prefix, over V or A)", bottom, s)
	}
	v := num * (fn / fd)
	if math.IsInf(v, 0) || math.IsNaN(v) || v == 0 && num != 0 {
		return Per{}, fmt.Errorf("%q is out of range", s)
	}
	return Per{Value: v, Num: dn, Den: dd}, nil
}

// UnmarshalYAML parses a compound ratio (ParseRatioUnit); the error is positioned
// at the value.
func (p *Per) UnmarshalYAML(n ast.Node) error {
	var out Per
	_, err := decodeWith(n, func(s string) (float64, error) {
		var err error
		out, err = ParseRatioUnit(s)
		return out.Value, err
	})
	*p = out
	return err
}

// UnmarshalYAML parses a quantity of any dimension (Parse), so that the caller
// can check the dimension against one known only later; the error is positioned
// at the value.
func (q *Quantity) UnmarshalYAML(n ast.Node) error {
	var out Quantity
	_, err := decodeWith(n, func(s string) (float64, error) {
		var err error
		out, err = Parse(s)
		return out.Value, err
	})
	*q = out
	return err
}

// scaled returns the quantity v of dimension d, refusing a value that the unit's
// scale pushed beyond the largest float64 ("1e308 GV" is +Inf volts, not a number).
func scaled(s string, v float64, d Dim) (Quantity, error) {
	if math.IsInf(v, 0) || math.IsNaN(v) {
		return Quantity{}, fmt.Errorf("%q is too large to be a %s", s, d)
	}
	return Quantity{Value: v, Dim: d}, nil
}

// numberEnd returns the length of the leading decimal number in s (sign, digits,
// point, exponent), taking care that the "m" of "mV" is not read as part of it.
func numberEnd(s string) int {
	i := 0
	if i < len(s) && (s[i] == '+' || s[i] == '-') {
		i++
	}
	digits := 0
	for i < len(s) && (s[i] >= '0' && s[i] <= '9' || s[i] == '.') {
		if s[i] != '.' {
			digits++
		}
		i++
	}
	if digits == 0 {
		return 0
	}
	if i < len(s) && (s[i] == 'e' || s[i] == 'E') {
		j := i + 1
		if j < len(s) && (s[j] == '+' || s[j] == '-') {
			j++
		}
		k := j
		for k < len(s) && s[k] >= '0' && s[k] <= '9' {
			k++
		}
		if k > j {
			i = k
		}
	}
	return i
}

// ParseRatio parses a ratio written with its unit: ppm, ppb or % ("30 ppm",
// "0.003 %"). A bare number is refused, because nobody can tell whether "30" meant
// 30 ppm, 30 % or 30 times; only 0, which is the same in every unit, may stand
// alone.
func ParseRatio(s string) (float64, error) {
	q, err := Parse(s)
	if err != nil {
		return 0, err
	}
	if q.Dim != Ratio {
		return 0, fmt.Errorf("%q is a %s: expected a ratio such as 30 ppm or 0.003 %%", s, q.Dim)
	}
	t := strings.TrimSpace(s)
	if strings.TrimSpace(t[numberEnd(t):]) == "" && q.Value != 0 {
		return 0, fmt.Errorf("%q has no unit: write the ratio with ppm or %% (e.g. %s ppm or %s %%), a bare number could mean either", s, t, t)
	}
	return q.Value, nil
}

// ParseAs parses s and checks that it has dimension want. A Number is written
// bare ("1.3"): any unit, ppm and % included, is refused, because a statistic
// such as χ²/ν is no fraction of anything.
func ParseAs(s string, want Dim) (float64, error) {
	q, err := Parse(s)
	if err != nil {
		return 0, err
	}
	if want == Number {
		if t := strings.TrimSpace(s); strings.TrimSpace(t[numberEnd(t):]) != "" {
			return 0, fmt.Errorf("%q has a unit: expected a plain number with no unit, e.g. %s", s, example(Number))
		}
		return q.Value, nil
	}
	if q.Dim != want {
		if q.Dim == Ratio && want != Ratio && !strings.ContainsAny(s, "%pm") {
			return 0, fmt.Errorf("%q has no unit: expected a %s, e.g. %s", s, want, example(want))
		}
		return 0, fmt.Errorf("%q is a %s: expected a %s, e.g. %s", s, q.Dim, want, example(want))
	}
	return q.Value, nil
}

func example(d Dim) string {
	switch d {
	case Volt:
		return "10mV"
	case Ampere:
		return "10mA"
	case Second:
		return "250us"
	case Hertz:
		return "50Hz"
	case Ohm:
		return "350Ω"
	case Celsius:
		return "23°C"
	case Number:
		return "1.3"
	case Count:
		return "12 count"
	}
	return "10ppm"
}

// Format writes v (SI) with an SI prefix and unit, using digits significant digits:
// Format(12.2e-6, "V", 3) = "12.2 µV".
func Format(v float64, unit string, digits int) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return fmt.Sprint(v)
	}
	if unit == "ppm" || unit == "%" || unit == "" || unit == "code" || unit == "count" || unit == "°C" {
		return strings.TrimSpace(fixedOrSci(v, digits) + " " + unit)
	}
	prefix, f := SIPrefix(math.Abs(v))
	return fixed(v/f, digits) + " " + prefix + unit
}

// SIPrefix is the SI prefix (G … p) and its factor that write a magnitude
// (≥ 0, in SI units) between 1 and 1000: SIPrefix(0.0124) = "m", 1e-3. Zero
// takes none; below 1 p, p; from 1 G up, G.
func SIPrefix(mag float64) (string, float64) {
	steps := []struct {
		s string
		f float64
	}{{"G", 1e9}, {"M", 1e6}, {"k", 1e3}, {"", 1}, {"m", 1e-3}, {"µ", 1e-6}, {"n", 1e-9}, {"p", 1e-12}}
	if mag == 0 {
		return "", 1
	}
	for _, p := range steps {
		if mag >= p.f*0.9999999 {
			return p.s, p.f
		}
	}
	return "p", 1e-12
}

func fixedOrSci(v float64, digits int) string {
	if a := math.Abs(v); a != 0 && (a >= 1e6 || a < 1e-4) {
		return strconv.FormatFloat(v, 'g', digits, 64)
	}
	return fixed(v, digits)
}

// fixed formats m (|m| < 1000) with digits significant digits in plain notation.
func fixed(m float64, digits int) string {
	if m == 0 {
		return "0"
	}
	dec := digits - 1 - int(math.Floor(math.Log10(math.Abs(m))))
	if dec < 0 {
		dec = 0
	}
	s := strconv.FormatFloat(m, 'f', dec, 64)
	if strings.Contains(s, ".") {
		s = strings.TrimRight(strings.TrimRight(s, "0"), ".")
	}
	return s
}

// NodeError is a problem with one YAML value, positioned at its token.
type NodeError struct {
	Line, Col int
	Msg       string
}

func (e *NodeError) Error() string { return fmt.Sprintf("[%d:%d] %s", e.Line, e.Col, e.Msg) }

func decodeNode(n ast.Node, want Dim) (float64, error) {
	return decodeWith(n, func(s string) (float64, error) { return ParseAs(s, want) })
}

// decodeWith parses the text of n with parse; an error is positioned at n.
func decodeWith(n ast.Node, parse func(string) (float64, error)) (float64, error) {
	tk := n.GetToken()
	var s string
	switch v := n.(type) {
	case *ast.StringNode:
		s = v.Value
	case *ast.IntegerNode, *ast.FloatNode:
		s = tk.Value
	default:
		if tk != nil {
			s = tk.Value
		}
	}
	v, err := parse(s)
	if err != nil {
		line, col := 0, 0
		if tk != nil && tk.Position != nil {
			line, col = tk.Position.Line, tk.Position.Column
		}
		return 0, &NodeError{Line: line, Col: col, Msg: err.Error()}
	}
	return v, nil
}

// Voltage is a voltage in volts, written with a unit in files ("10mV").
type Voltage float64

// UnmarshalYAML parses a voltage; the error is positioned at the value.
func (v *Voltage) UnmarshalYAML(n ast.Node) error {
	f, err := decodeNode(n, Volt)
	*v = Voltage(f)
	return err
}

// Current is a current in amperes, written with a unit in files ("100mA").
type Current float64

// UnmarshalYAML parses a current.
func (v *Current) UnmarshalYAML(n ast.Node) error {
	f, err := decodeNode(n, Ampere)
	*v = Current(f)
	return err
}

// Fraction is a dimensionless ratio written with ppm, ppb or % ("10 ppm" is 1e-5);
// a bare number other than 0 is refused (ParseRatio).
type Fraction float64

// UnmarshalYAML parses a ratio; the error is positioned at the value.
func (v *Fraction) UnmarshalYAML(n ast.Node) error {
	f, err := decodeWith(n, ParseRatio)
	*v = Fraction(f)
	return err
}

// Frequency is a frequency in hertz ("50Hz").
type Frequency float64

// UnmarshalYAML parses a frequency.
func (v *Frequency) UnmarshalYAML(n ast.Node) error {
	f, err := decodeNode(n, Hertz)
	*v = Frequency(f)
	return err
}

// Duration is a time written with a unit ("250us", "20ms", "2 s").
type Duration time.Duration

// UnmarshalYAML parses a duration. One that a time.Duration cannot hold (beyond
// about ±292 years, or NaN) is an error rather than a wrapped-around value.
func (v *Duration) UnmarshalYAML(n ast.Node) error {
	f, err := decodeNode(n, Second)
	if err != nil {
		return err
	}
	if !(math.Abs(f) < float64(math.MaxInt64)/1e9) {
		line, col := 0, 0
		if tk := n.GetToken(); tk != nil && tk.Position != nil {
			line, col = tk.Position.Line, tk.Position.Column
		}
		return &NodeError{Line: line, Col: col, Msg: fmt.Sprintf("expected a duration of at most %.0f s (292 years), found %q", float64(math.MaxInt64)/1e9, n.GetToken().Value)}
	}
	*v = Duration(time.Duration(math.Round(f * 1e9)))
	return nil
}

// D returns the value as a time.Duration.
func (v Duration) D() time.Duration { return time.Duration(v) }
