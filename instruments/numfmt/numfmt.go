// Package numfmt spells correction coefficients the way a unit's firmware reads them
// over its text port: IEEE 754 binary32, signed fixed point Qm.n, or a signed integer
// count times the value of one count, each written in decimal or in hex.
//
// The simulator decodes what the station writes with it; the sequencer encodes a
// coefficient, reads it back and compares the two at the format's resolution. A
// Format is a plain value: its methods are safe for concurrent use.
package numfmt

import (
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"
)

// Kind of number format.
type Kind int

const (
	Float32 Kind = iota + 1 // IEEE 754 binary32
	Fixed                   // signed fixed point Qm.n, two's complement, m integer bits INCLUDING the sign bit, n fraction bits; word = m+n bits
	Scaled                  // signed integer of Bits bits times Scale: value = integer·Scale
)

func (k Kind) String() string {
	switch k {
	case Float32:
		return "float32"
	case Fixed:
		return "fixed point"
	case Scaled:
		return "scaled integer"
	}
	return fmt.Sprintf("numfmt.Kind(%d)", int(k))
}

// Text is how the number is spelled on the port.
type Text int

const (
	Decimal Text = iota // Float32: shortest text that round-trips float32 (strconv.FormatFloat(v,'g',-1,32)); Fixed and Scaled: the signed integer word in decimal ("-1234")
	Hex                 // the word's bit pattern (two's complement for Fixed/Scaled, IEEE bits for Float32) in upper-case hex, zero-padded to ceil(bits/4) digits, no 0x. On decode accept optional 0x/0X prefix and either case.
)

func (t Text) String() string {
	switch t {
	case Decimal:
		return "decimal"
	case Hex:
		return "hex"
	}
	return fmt.Sprintf("numfmt.Text(%d)", int(t))
}

// Format is one number format and its spelling. Parse and ParseScaled fill every
// field; a Format built by hand needs Kind, Text and, for Fixed, Int and Frac (Bits and
// Scale may then be left zero), or, for Scaled, Bits and Scale.
type Format struct {
	Kind  Kind
	Int   int     // Fixed: integer bits m incl. sign (1..32)
	Frac  int     // Fixed: fraction bits n (0..31); Int+Frac between 2 and 32
	Bits  int     // Scaled: word width 2..32 (Float32: 32, Fixed: Int+Frac — set by Parse)
	Scale float64 // Scaled: value of one count, finite > 0 (given by the caller, e.g. 1e-6); Fixed: 2^-Frac; Float32: 0
	Text  Text
}

const (
	fixedWant  = "expected Q<m>.<n> with m ≥ 1 (integer bits including the sign) and m+n between 2 and 32"
	scaledWant = "expected int<bits> with bits between 2 and 32 (e.g. int16)"
)

// Parse reads a format name: "float32", "Q<m>.<n>" (e.g. "Q2.14", "Q1.31") or
// "int<bits>" (e.g. "int16"), with text "decimal" or "hex". An "int<bits>" format
// comes back with Scale 0, which Encode and Decode refuse: set Scale afterwards or use
// ParseScaled. The error says what was expected.
func Parse(name, text string) (Format, error) {
	t, err := parseText(text)
	if err != nil {
		return Format{}, err
	}
	n := strings.TrimSpace(name)
	switch {
	case n == "float32":
		return Format{Kind: Float32, Bits: 32, Text: t}, nil
	case strings.HasPrefix(n, "Q"):
		ms, ns, ok := strings.Cut(n[1:], ".")
		m, okM := smallInt(ms)
		fr, okN := smallInt(ns)
		if !ok || !okM || !okN || m < 1 || m+fr < 2 || m+fr > 32 {
			return Format{}, fmt.Errorf("format %q: %s", name, fixedWant)
		}
		return Format{Kind: Fixed, Int: m, Frac: fr, Bits: m + fr, Scale: math.Ldexp(1, -fr), Text: t}, nil
	case strings.HasPrefix(n, "int"):
		b, ok := smallInt(n[len("int"):])
		if !ok || b < 2 || b > 32 {
			return Format{}, fmt.Errorf("format %q: %s", name, scaledWant)
		}
		return Format{Kind: Scaled, Bits: b, Text: t}, nil
	}
	return Format{}, fmt.Errorf("format %q: expected float32, Q<m>.<n> (fixed point, e.g. Q2.14) or int<bits> (scaled integer, e.g. int16)", name)
}

// ParseScaled is Parse for "int<bits>" with the scale of one count (finite, > 0), in
// the unit of the coefficient (1e-6 makes the count a millionth).
func ParseScaled(name, text string, scale float64) (Format, error) {
	f, err := Parse(name, text)
	if err != nil {
		return Format{}, err
	}
	if f.Kind != Scaled {
		return Format{}, fmt.Errorf("format %q: a scale of one count applies only to int<bits> formats, expected e.g. int16", name)
	}
	f.Scale = scale
	if err := f.check(); err != nil {
		return Format{}, err
	}
	return f, nil
}

func parseText(text string) (Text, error) {
	switch strings.TrimSpace(text) {
	case "decimal":
		return Decimal, nil
	case "hex":
		return Hex, nil
	}
	return 0, fmt.Errorf("text %q: expected decimal or hex", text)
}

// smallInt reads one to three ASCII digits.
func smallInt(s string) (int, bool) {
	if s == "" || len(s) > 3 {
		return 0, false
	}
	n := 0
	for _, c := range []byte(s) {
		if c < '0' || c > '9' {
			return 0, false
		}
		n = n*10 + int(c-'0')
	}
	return n, true
}

// String names the format as Parse reads it, with the scale of a Scaled format:
// "float32 hex", "Q2.14 decimal", "int16 × 1e-06 hex".
func (f Format) String() string {
	var name string
	switch f.Kind {
	case Float32:
		name = "float32"
	case Fixed:
		name = fmt.Sprintf("Q%d.%d", f.Int, f.Frac)
	case Scaled:
		name = fmt.Sprintf("int%d × %g", f.Bits, f.Scale)
	default:
		name = f.Kind.String()
	}
	return name + " " + f.Text.String()
}

// check says what is wrong with a Format that Parse would not have made.
func (f Format) check() error {
	switch f.Kind {
	case Float32:
		if f.Bits != 0 && f.Bits != 32 {
			return fmt.Errorf("%s: Bits is %d, expected 32 (or 0)", f, f.Bits)
		}
	case Fixed:
		if f.Int < 1 || f.Frac < 0 || f.Int+f.Frac < 2 || f.Int+f.Frac > 32 {
			return fmt.Errorf("format Q%d.%d: %s", f.Int, f.Frac, fixedWant)
		}
		if f.Bits != 0 && f.Bits != f.Int+f.Frac {
			return fmt.Errorf("%s: Bits is %d, expected Int+Frac = %d (or 0)", f, f.Bits, f.Int+f.Frac)
		}
		if s := math.Ldexp(1, -f.Frac); f.Scale != 0 && f.Scale != s {
			return fmt.Errorf("%s: Scale is %g, expected 2^-%d = %g (or 0)", f, f.Scale, f.Frac, s)
		}
	case Scaled:
		if f.Bits < 2 || f.Bits > 32 {
			return fmt.Errorf("format int%d: %s", f.Bits, scaledWant)
		}
		switch s := f.Scale; {
		case s == 0:
			return fmt.Errorf("%s: no scale of one count, expected a finite value > 0 such as 1e-6 (set Scale or use ParseScaled)", f)
		case !(s > 0) || math.IsInf(s, 0):
			return fmt.Errorf("%s: scale of one count is %g, expected a finite value > 0 such as 1e-6", f, s)
		case s < 0x1p-1022 || math.IsInf(math.Ldexp(s, f.Bits-1), 0):
			// A subnormal scale loses the low bits of word·Scale; a huge one overflows.
			return fmt.Errorf("%s: scale of one count is %g, expected at least %g and small enough that 2^%d counts stay finite",
				f, s, 0x1p-1022, f.Bits-1)
		}
	default:
		return fmt.Errorf("%s: expected kind Float32, Fixed or Scaled", f)
	}
	if f.Text != Decimal && f.Text != Hex {
		return fmt.Errorf("%s: expected text Decimal or Hex", f)
	}
	return nil
}

// width is the number of bits in the word.
func (f Format) width() int {
	switch f.Kind {
	case Float32:
		return 32
	case Fixed:
		return f.Int + f.Frac
	}
	return f.Bits
}

// step is the value of one count of a Fixed or Scaled word.
func (f Format) step() float64 {
	if f.Kind == Fixed {
		return math.Ldexp(1, -f.Frac)
	}
	return f.Scale
}

// words is the range of the signed word of a Fixed or Scaled format.
func (f Format) words() (lo, hi int64) {
	b := f.width()
	return -(int64(1) << (b - 1)), int64(1)<<(b-1) - 1
}

// Range returns the smallest and largest representable values: ±MaxFloat32 for
// Float32, [-2^(m-1), 2^(m-1) - 2^-n] for Qm.n, [-2^(bits-1), 2^(bits-1)-1]·Scale for
// Scaled.
func (f Format) Range() (lo, hi float64) {
	if f.Kind == Float32 {
		return -math.MaxFloat32, math.MaxFloat32
	}
	wlo, whi := f.words()
	return float64(wlo) * f.step(), float64(whi) * f.step()
}

// Resolution is the spacing of representable values at v: Scale for Fixed and Scaled;
// for Float32 one ulp, the gap between v rounded to float32 and the next float32 away
// from zero (at ±MaxFloat32 and beyond, the gap below MaxFloat32, 2^104). It is NaN for
// a NaN v.
func (f Format) Resolution(v float64) float64 {
	switch f.Kind {
	case Fixed, Scaled:
		return f.step()
	case Float32:
		if math.IsNaN(v) {
			return math.NaN()
		}
		x := float32(math.Abs(v))
		if x >= math.MaxFloat32 { // includes +Inf: v beyond the largest float32
			return float64(math.MaxFloat32) - float64(math.Nextafter32(math.MaxFloat32, 0))
		}
		return float64(math.Nextafter32(x, float32(math.Inf(1)))) - float64(x)
	}
	return math.NaN()
}

// Equal reports whether a and b are the same word in this format, i.e.
// |a-b| <= Resolution(max(|a|,|b|))/2: the read-back comparison at the format's
// resolution. NaN equals nothing.
func (f Format) Equal(a, b float64) bool {
	return math.Abs(a-b) <= f.Resolution(math.Max(math.Abs(a), math.Abs(b)))/2
}

// Encode rounds v to the nearest representable value and returns the text to send
// and the value that text stands for. Fixed and Scaled round half away from zero;
// Float32 rounds as IEEE 754 does (to nearest, ties to even).
//
// For Scaled, v/Scale is computed in float64, where a value written as an exact half
// count in decimal (0.0215 at 1e-3 a count comes out as 21.499999999999996) may miss
// the half by a few ulps; a quotient within 4 ulps of a half is taken as the half and
// rounds away from zero. Fixed needs no such allowance: its scale is a power of two.
//
// A v that is NaN, infinite or outside Range gives an error naming the range; v is
// never clamped, not even when it lies within half a resolution of an end. A Format
// that Parse would not make (e.g. Scaled with no Scale) is an error too.
func (f Format) Encode(v float64) (text string, stored float64, err error) {
	if err := f.check(); err != nil {
		return "", 0, err
	}
	lo, hi := f.Range()
	if math.IsNaN(v) || v < lo || v > hi { // ±Inf falls outside too
		return "", 0, fmt.Errorf("%s: cannot store %s, expected a value from %s to %s",
			f, num(v), num(lo), num(hi))
	}
	if f.Kind == Float32 {
		x := float32(v)
		if f.Text == Hex {
			return fmt.Sprintf("%08X", math.Float32bits(x)), float64(x), nil
		}
		return strconv.FormatFloat(float64(x), 'g', -1, 32), float64(x), nil
	}
	q := v / f.step()
	w := math.Round(q)
	if f.Kind == Scaled && nearHalf(q) {
		w = math.Trunc(q) + math.Copysign(1, q)
	}
	word := int64(w)
	if wlo, whi := f.words(); word < wlo || word > whi {
		// Unreachable for v within Range; kept so that a rounding surprise is an error, not a wrapped word.
		return "", 0, fmt.Errorf("%s: %s rounds to word %d, expected a word from %d to %d", f, num(v), word, wlo, whi)
	}
	return f.spell(word), float64(word) * f.step(), nil
}

// nearHalf reports whether q lies within 4 ulps of a half-integer.
func nearHalf(q float64) bool {
	frac := math.Abs(q - math.Trunc(q))
	return math.Abs(frac-0.5) <= math.Abs(q)*0x1p-50
}

// spell writes a Fixed or Scaled word.
func (f Format) spell(word int64) string {
	if f.Text == Decimal {
		return strconv.FormatInt(word, 10)
	}
	b := f.width()
	return fmt.Sprintf("%0*X", (b+3)/4, uint64(word)&(uint64(1)<<b-1))
}

func num(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

// Decode parses a port reply in this format (surrounding spaces allowed) and returns
// the value. Hex has at most ceil(bits/4) digits, an optional 0x or 0X and either
// case, and the pattern must fit the word; a NaN or infinite float32 pattern is an
// error. Decimal Fixed and Scaled is an integer in the word's range; decimal Float32 is
// any finite float that strconv.ParseFloat reads at 32 bits. The error says what was
// expected.
func (f Format) Decode(text string) (float64, error) {
	if err := f.check(); err != nil {
		return 0, err
	}
	s := strings.TrimSpace(text)
	if s == "" {
		return 0, fmt.Errorf("%s: expected %s, found nothing", f, f.want())
	}
	if f.Text == Hex {
		u, err := f.hexPattern(s)
		if err != nil {
			return 0, err
		}
		if f.Kind == Float32 {
			x := float64(math.Float32frombits(uint32(u)))
			if math.IsNaN(x) || math.IsInf(x, 0) {
				return 0, fmt.Errorf("%s: %q is the pattern of %v, expected a finite float32", f, s, x)
			}
			return x, nil
		}
		b := f.width()
		word := int64(u)
		if u&(uint64(1)<<(b-1)) != 0 {
			word -= int64(1) << b
		}
		return float64(word) * f.step(), nil
	}
	if f.Kind == Float32 {
		x, err := strconv.ParseFloat(s, 32)
		if err != nil && !errors.Is(err, strconv.ErrRange) {
			return 0, fmt.Errorf("%s: %q is not a number, expected %s", f, s, f.want())
		}
		if err != nil || math.IsNaN(x) || math.IsInf(x, 0) {
			return 0, fmt.Errorf("%s: %q is not a finite float32, expected a magnitude up to %g", f, s, float32(math.MaxFloat32))
		}
		return x, nil
	}
	wlo, whi := f.words()
	word, err := strconv.ParseInt(s, 10, 64)
	if err != nil && !errors.Is(err, strconv.ErrRange) {
		return 0, fmt.Errorf("%s: %q is not an integer, expected %s", f, s, f.want())
	}
	if err != nil || word < wlo || word > whi {
		return 0, fmt.Errorf("%s: %q is outside the %d-bit word, expected an integer from %d to %d", f, s, f.width(), wlo, whi)
	}
	return float64(word) * f.step(), nil
}

// hexPattern reads the bit pattern of a hex reply.
func (f Format) hexPattern(s string) (uint64, error) {
	b := f.width()
	digits := (b + 3) / 4
	h := s
	if strings.HasPrefix(h, "0x") || strings.HasPrefix(h, "0X") {
		h = h[2:]
	}
	if h == "" {
		return 0, fmt.Errorf("%s: %q has no hex digits, expected %s", f, s, f.want())
	}
	for _, c := range []byte(h) {
		if !('0' <= c && c <= '9' || 'a' <= c && c <= 'f' || 'A' <= c && c <= 'F') {
			return 0, fmt.Errorf("%s: %q is not hex, expected %s", f, s, f.want())
		}
	}
	if len(h) > digits {
		return 0, fmt.Errorf("%s: %q has %d hex digits, expected at most %d", f, s, len(h), digits)
	}
	u, err := strconv.ParseUint(h, 16, 64)
	if err != nil { // cannot happen after the checks above
		return 0, fmt.Errorf("%s: %q: %w", f, s, err)
	}
	if u>>b != 0 {
		return 0, fmt.Errorf("%s: %q does not fit the %d-bit word, expected at most %0*X", f, s, b, digits, uint64(1)<<b-1)
	}
	return u, nil
}

// want describes a well-formed reply, for error messages.
func (f Format) want() string {
	if f.Text == Hex {
		digits := (f.width() + 3) / 4
		return fmt.Sprintf("up to %d hex digits (0-9, A-F, optional 0x) such as %s", digits, strings.Repeat("0", digits-1)+"1")
	}
	if f.Kind == Float32 {
		return "a decimal number such as 0.1 or -1.5e-3"
	}
	return "the word as a signed decimal integer such as -1234"
}

// Codes is the range of a bits-bit DAC register's codes and its mid-scale
// code, the usual no-correction code: 0 … 2^bits − 1 about 2^(bits−1) in
// binary-offset coding, −2^(bits−1) … 2^(bits−1) − 1 about 0 in two's
// complement. The one rule for the sequence's DACs and the budget's.
func Codes(bits int, twosComplement bool) (lo, hi, mid int) {
	if twosComplement {
		return -(1 << (bits - 1)), 1<<(bits-1) - 1, 0
	}
	return 0, 1<<bits - 1, 1 << (bits - 1)
}
