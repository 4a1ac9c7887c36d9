package numfmt_test

import (
	"fmt"
	"math"
	"math/big"
	"math/rand/v2"
	"strings"
	"testing"

	"trimline/instruments/numfmt"
)

func mustParse(t testing.TB, name, text string) numfmt.Format {
	t.Helper()
	f, err := numfmt.Parse(name, text)
	if err != nil {
		t.Fatalf("Parse(%q, %q): %v", name, text, err)
	}
	return f
}

func mustScaled(t testing.TB, name, text string, scale float64) numfmt.Format {
	t.Helper()
	f, err := numfmt.ParseScaled(name, text, scale)
	if err != nil {
		t.Fatalf("ParseScaled(%q, %q, %g): %v", name, text, scale, err)
	}
	return f
}

func TestParse(t *testing.T) {
	tests := []struct {
		name, text string
		want       numfmt.Format
		str        string
	}{
		{"float32", "hex", numfmt.Format{Kind: numfmt.Float32, Bits: 32, Text: numfmt.Hex}, "float32 hex"},
		{"Q2.14", "decimal", numfmt.Format{Kind: numfmt.Fixed, Int: 2, Frac: 14, Bits: 16, Scale: 0x1p-14}, "Q2.14 decimal"},
		{"Q1.31", "hex", numfmt.Format{Kind: numfmt.Fixed, Int: 1, Frac: 31, Bits: 32, Scale: 0x1p-31, Text: numfmt.Hex}, "Q1.31 hex"},
		{"Q32.0", "decimal", numfmt.Format{Kind: numfmt.Fixed, Int: 32, Frac: 0, Bits: 32, Scale: 1}, "Q32.0 decimal"},
		{"Q2.0", "decimal", numfmt.Format{Kind: numfmt.Fixed, Int: 2, Frac: 0, Bits: 2, Scale: 1}, "Q2.0 decimal"},
		{"int16", "hex", numfmt.Format{Kind: numfmt.Scaled, Bits: 16, Text: numfmt.Hex}, "int16 × 0 hex"},
		{"int2", "decimal", numfmt.Format{Kind: numfmt.Scaled, Bits: 2}, "int2 × 0 decimal"},
		{"int32", "decimal", numfmt.Format{Kind: numfmt.Scaled, Bits: 32}, "int32 × 0 decimal"},
	}
	for _, tt := range tests {
		f, err := numfmt.Parse(tt.name, tt.text)
		if err != nil {
			t.Errorf("Parse(%q, %q): %v", tt.name, tt.text, err)
			continue
		}
		if f != tt.want {
			t.Errorf("Parse(%q, %q) = %+v, want %+v", tt.name, tt.text, f, tt.want)
		}
		if f.String() != tt.str {
			t.Errorf("Parse(%q, %q).String() = %q, want %q", tt.name, tt.text, f, tt.str)
		}
	}
	f := mustScaled(t, "int16", "hex", 1e-6)
	if want := "int16 × 1e-06 hex"; f.String() != want {
		t.Errorf("String() = %q, want %q", f, want)
	}
}

func TestParseErrors(t *testing.T) {
	tests := []struct {
		name, text string
		want       string // part of the error
	}{
		{"Q0.8", "hex", `format "Q0.8": expected Q<m>.<n> with m ≥ 1 (integer bits including the sign) and m+n between 2 and 32`},
		{"Q20.20", "hex", `format "Q20.20": expected Q<m>.<n>`},
		{"Q1.0", "hex", `format "Q1.0": expected Q<m>.<n>`},
		{"Q1", "hex", `format "Q1": expected Q<m>.<n>`},
		{"Q-1.8", "hex", `format "Q-1.8": expected Q<m>.<n>`},
		{"int1", "hex", `format "int1": expected int<bits> with bits between 2 and 32`},
		{"int33", "hex", `format "int33": expected int<bits> with bits between 2 and 32`},
		{"int", "hex", `format "int": expected int<bits>`},
		{"float64", "hex", `format "float64": expected float32, Q<m>.<n>`},
		{"", "hex", `format "": expected float32`},
		{"float32", "octal", `text "octal": expected decimal or hex`},
		{"float32", "", `text "": expected decimal or hex`},
	}
	for _, tt := range tests {
		_, err := numfmt.Parse(tt.name, tt.text)
		if err == nil || !strings.Contains(err.Error(), tt.want) {
			t.Errorf("Parse(%q, %q) error = %v, want one containing %q", tt.name, tt.text, err, tt.want)
		}
	}
}

func TestParseScaledErrors(t *testing.T) {
	tests := []struct {
		name  string
		scale float64
		want  string
	}{
		{"Q2.14", 1e-6, "applies only to int<bits>"},
		{"float32", 1e-6, "applies only to int<bits>"},
		{"int16", 0, "no scale of one count, expected a finite value > 0"},
		{"int16", -1e-6, "expected a finite value > 0"},
		{"int16", math.NaN(), "expected a finite value > 0"},
		{"int16", math.Inf(1), "expected a finite value > 0"},
		{"int16", 1e-320, "expected at least"},     // subnormal
		{"int32", 1e300, "stay finite"},            // 2^31 counts overflow
		{"int33", 1e-6, "expected int<bits> with"}, // the name is checked first
	}
	for _, tt := range tests {
		_, err := numfmt.ParseScaled(tt.name, "hex", tt.scale)
		if err == nil || !strings.Contains(err.Error(), tt.want) {
			t.Errorf("ParseScaled(%q, hex, %g) error = %v, want one containing %q", tt.name, tt.scale, err, tt.want)
		}
	}
	// A Scaled format without a scale cannot encode or decode.
	f := mustParse(t, "int16", "hex")
	if _, _, err := f.Encode(0); err == nil || !strings.Contains(err.Error(), "use ParseScaled") {
		t.Errorf("Encode with no scale: error = %v, want one saying how to set the scale", err)
	}
	if _, err := f.Decode("0000"); err == nil {
		t.Errorf("Decode with no scale: no error")
	}
}

// encodeCase is one value, the text each spelling should give, and the value stored.
type encodeCase struct {
	v      float64
	dec    string
	hex    string
	stored float64
	source string
}

func checkEncode(t *testing.T, name string, dec, hex numfmt.Format, tests []encodeCase) {
	t.Helper()
	for _, tt := range tests {
		for _, c := range []struct {
			f    numfmt.Format
			want string
		}{{dec, tt.dec}, {hex, tt.hex}} {
			text, stored, err := c.f.Encode(tt.v)
			if err != nil {
				t.Errorf("%s: %s.Encode(%v): %v (%s)", name, c.f, tt.v, err, tt.source)
				continue
			}
			if text != c.want || stored != tt.stored {
				t.Errorf("%s: %s.Encode(%v) = %q, %v; want %q, %v (%s)", name, c.f, tt.v, text, stored, c.want, tt.stored, tt.source)
			}
			got, err := c.f.Decode(text)
			if err != nil || got != stored {
				t.Errorf("%s: %s.Decode(%q) = %v, %v; want %v", name, c.f, text, got, err, stored)
			}
		}
	}
}

func TestFloat32(t *testing.T) {
	dec, hex := mustParse(t, "float32", "decimal"), mustParse(t, "float32", "hex")
	tests := []encodeCase{
		{1.0, "1", "3F800000", 1, "IEEE 754-2008 binary32: sign 0, biased exponent 127, fraction 0"},
		{-2.0, "-2", "C0000000", -2, "IEEE 754-2008 binary32: sign 1, biased exponent 128, fraction 0"},
		{0.1, "0.1", "3DCCCCCD", float64(float32(0.1)), "well known: 0.1 rounds up to 0x3DCCCCCD = 0.100000001490116"},
		{1.0000001, "1.0000001", "3F800001", 1 + 0x1p-23, "1.0000001 is nearer 1+2^-23 (one ulp above 1) than 1"},
		{0, "0", "00000000", 0, "IEEE 754: +0 is all zero bits"},
		{math.MaxFloat32, "3.4028235e+38", "7F7FFFFF", math.MaxFloat32, "IEEE 754 binary32 largest finite: (2-2^-23)·2^127"},
		{-math.MaxFloat32, "-3.4028235e+38", "FF7FFFFF", -math.MaxFloat32, "IEEE 754 binary32 largest finite, negated"},
		{0x1p-149, "1e-45", "00000001", 0x1p-149, "IEEE 754 binary32 smallest subnormal 2^-149"},
		{0x1p-126, "1.1754944e-38", "00800000", 0x1p-126, "IEEE 754 binary32 smallest normal 2^-126"},
		{1 + 0x1p-24, "1", "3F800000", 1, "IEEE 754 round half to even: 1+2^-24 is half an ulp, ties to the even 1"},
		{1 + 3*0x1p-24, "1.0000002", "3F800002", 1 + 0x1p-22, "IEEE 754 round half to even: 1+3·2^-24 ties to the even 1+2^-22"},
	}
	checkEncode(t, "float32", dec, hex, tests)

	// Cross-check the hex column against the standard library's view of the bits.
	for _, tt := range tests {
		if want := fmt.Sprintf("%08X", math.Float32bits(float32(tt.v))); want != tt.hex {
			t.Errorf("table: %v has bits %s by math.Float32bits, table says %s", tt.v, want, tt.hex)
		}
	}

	for _, v := range []float64{1e39, -1e39, math.NaN(), math.Inf(1), math.Inf(-1), math.Nextafter(math.MaxFloat32, math.Inf(1))} {
		for _, f := range []numfmt.Format{dec, hex} {
			if text, _, err := f.Encode(v); err == nil {
				t.Errorf("%s.Encode(%v) = %q, want an error (beyond ±MaxFloat32)", f, v, text)
			} else if !strings.Contains(err.Error(), "expected a value from -3.4028234663852886e+38 to 3.4028234663852886e+38") {
				t.Errorf("%s.Encode(%v) error %q does not name the range", f, v, err)
			}
		}
	}

	if lo, hi := dec.Range(); lo != -math.MaxFloat32 || hi != math.MaxFloat32 {
		t.Errorf("Range() = %v, %v; want ±MaxFloat32", lo, hi)
	}
	resolution := []struct {
		v, want float64
		source  string
	}{
		{1, 0x1p-23, "binary32 ulp of 1 is 2^-23 (FLT_EPSILON)"},
		{-1, 0x1p-23, "away from zero for negative values too"},
		{0.75, 0x1p-24, "ulp in [0.5, 1) is 2^-24"},
		{0, 0x1p-149, "next float32 after 0 is the smallest subnormal"},
		{math.MaxFloat32, 0x1p104, "ulp in the top binade is 2^(127-23)"},
		{1e39, 0x1p104, "beyond the largest float32: the top binade's ulp"},
	}
	for _, tt := range resolution {
		if got := dec.Resolution(tt.v); got != tt.want {
			t.Errorf("Resolution(%v) = %v, want %v (%s)", tt.v, got, tt.want, tt.source)
		}
	}
	if !dec.Equal(1, 1+0x1p-24) || dec.Equal(1, 1+0x1p-23) {
		t.Errorf("Equal: want 1 ≈ 1+2^-24 (half an ulp) and 1 ≠ 1+2^-23 (one ulp)")
	}
}

func TestFixed(t *testing.T) {
	q115d, q115h := mustParse(t, "Q1.15", "decimal"), mustParse(t, "Q1.15", "hex")
	const lsb = 0x1p-15
	checkEncode(t, "Q1.15", q115d, q115h, []encodeCase{
		{0.5, "16384", "4000", 0.5, "Q1.15: 0.5·2^15 = 16384 = 0x4000"},
		{-1, "-32768", "8000", -1, "Q1.15: -1 is the most negative word, 0x8000 in two's complement"},
		{1 - lsb, "32767", "7FFF", 1 - lsb, "Q1.15: largest value 1-2^-15 = 0x7FFF"},
		{-lsb, "-1", "FFFF", -lsb, "two's complement -1 is all ones"},
		{0, "0", "0000", 0, "zero"},
		{-1e-20, "0", "0000", 0, "a tiny negative value rounds to word 0, spelled without a sign"},
		{lsb / 2, "1", "0001", lsb, "half an LSB rounds away from zero"},
		{-lsb / 2, "-1", "FFFF", -lsb, "minus half an LSB rounds away from zero"},
		{1.5 * lsb, "2", "0002", 2 * lsb, "1.5 LSB rounds away from zero to 2 (not to even)"},
		{2.5 * lsb, "3", "0003", 3 * lsb, "2.5 LSB rounds away from zero to 3 (not to even 2)"},
		{-2.5 * lsb, "-3", "FFFD", -3 * lsb, "-2.5 LSB rounds away from zero to -3"},
		{lsb/2 - 0x1p-60, "0", "0000", 0, "just below half an LSB is no tie: rounds to 0"},
		{0.3, "9830", "2666", 9830 * lsb, "0.3·32768 = 9830.4 rounds to 9830"},
	})
	q214d, q214h := mustParse(t, "Q2.14", "decimal"), mustParse(t, "Q2.14", "hex")
	checkEncode(t, "Q2.14", q214d, q214h, []encodeCase{
		{1.00012, "16386", "4002", 16386.0 / 16384, "1.00012·16384 = 16385.966 rounds to 16386"},
		{-2, "-32768", "8000", -2, "Q2.14: most negative value -2^(2-1)"},
		{2 - 0x1p-14, "32767", "7FFF", 2 - 0x1p-14, "Q2.14: largest value 2-2^-14"},
		{-1.5, "-24576", "A000", -1.5, "-1.5·16384 = -24576, two's complement 0xA000"},
	})
	q131d, q131h := mustParse(t, "Q1.31", "decimal"), mustParse(t, "Q1.31", "hex")
	checkEncode(t, "Q1.31", q131d, q131h, []encodeCase{
		{0.5, "1073741824", "40000000", 0.5, "Q1.31: 2^30"},
		{-1, "-2147483648", "80000000", -1, "Q1.31: most negative word"},
		{-0x1p-31, "-1", "FFFFFFFF", -0x1p-31, "two's complement -1 in 32 bits"},
	})
	q33d, q33h := mustParse(t, "Q3.3", "decimal"), mustParse(t, "Q3.3", "hex")
	checkEncode(t, "Q3.3", q33d, q33h, []encodeCase{
		{-0.125, "-1", "3F", -0.125, "6-bit word: -1 is 0x3F in ceil(6/4) = 2 digits"},
		{3.875, "31", "1F", 3.875, "Q3.3: largest value 4-2^-3"},
	})

	for _, tt := range []struct {
		f    numfmt.Format
		v    float64
		want string
	}{
		{q115d, 1.0, "expected a value from -1 to 0.999969482421875"},
		{q115h, -1 - lsb, "expected a value from -1 to 0.999969482421875"},
		{q115h, 1 - lsb/4, "expected a value from -1 to 0.999969482421875"}, // no clamping, even within half an LSB of the end
		{q214d, 2, "expected a value from -2 to 1.99993896484375"},
		{q214d, math.NaN(), "cannot store NaN"},
		{q214d, math.Inf(-1), "cannot store -Inf"},
	} {
		if text, _, err := tt.f.Encode(tt.v); err == nil || !strings.Contains(err.Error(), tt.want) {
			t.Errorf("%s.Encode(%v) = %q, %v; want an error containing %q", tt.f, tt.v, text, err, tt.want)
		}
	}

	if got := q115d.Resolution(0.3); got != 0x1p-15 {
		t.Errorf("Q1.15 Resolution = %v, want 2^-15", got)
	}
	if lo, hi := q115d.Range(); lo != -1 || hi != 1-lsb {
		t.Errorf("Q1.15 Range() = %v, %v; want -1, 1-2^-15", lo, hi)
	}
	if !q115d.Equal(0.5, 0.5+lsb/2) || q115d.Equal(0.5, 0.5+lsb) {
		t.Errorf("Q1.15 Equal: want equal within half an LSB and unequal one LSB apart")
	}
}

func TestScaled(t *testing.T) {
	dec, hex := mustScaled(t, "int16", "decimal", 1e-6), mustScaled(t, "int16", "hex", 1e-6)
	checkEncode(t, "int16 × 1e-6", dec, hex, []encodeCase{
		{0.0012345, "1235", "04D3", 1235e-6, "1234.5 counts rounds half away from zero to 1235 = 0x4D3"},
		{-0.0012345, "-1235", "FB2D", -1235e-6, "-1234.5 counts rounds away from zero; 65536-1235 = 0xFB2D"},
		{-1e-6, "-1", "FFFF", -1e-6, "two's complement -1"},
		{2.5e-6, "3", "0003", 3e-6, "2.5 counts, which v/Scale gives as 2.5000000000000004, rounds to 3"},
		{0.032767, "32767", "7FFF", 0.032767, "largest word 2^15-1"},
		{-0.032768, "-32768", "8000", -0.032768, "smallest word -2^15"},
	})
	milli := mustScaled(t, "int8", "decimal", 1e-3)
	milliHex := mustScaled(t, "int8", "hex", 1e-3)
	checkEncode(t, "int8 × 1e-3", milli, milliHex, []encodeCase{
		{0.0215, "22", "16", 22e-3, "21.5 counts, which v/Scale gives as 21.499999999999996, rounds away to 22"},
		{-0.0215, "-22", "EA", -22e-3, "-21.5 counts rounds away to -22"},
		{0.0214, "21", "15", 21e-3, "21.4 counts rounds to 21"},
	})

	got, err := hex.Decode("0xffff")
	if err != nil || got != -1e-6 {
		t.Errorf(`Decode("0xffff") = %v, %v; want -1e-06`, got, err)
	}
	for _, v := range []float64{0.0327675, -0.0327685, 1} {
		if _, _, err := dec.Encode(v); err == nil || !strings.Contains(err.Error(), "expected a value from -0.032768 to 0.032767") {
			t.Errorf("Encode(%v) error = %v, want one naming the range -0.032768 to 0.032767", v, err)
		}
	}
	if got := dec.Resolution(0.01); got != 1e-6 {
		t.Errorf("Resolution = %v, want the scale 1e-6", got)
	}
}

func TestDecode(t *testing.T) {
	f32h := mustParse(t, "float32", "hex")
	f32d := mustParse(t, "float32", "decimal")
	q115h := mustParse(t, "Q1.15", "hex")
	q115d := mustParse(t, "Q1.15", "decimal")
	i16h := mustScaled(t, "int16", "hex", 1e-6)
	i16d := mustScaled(t, "int16", "decimal", 1e-6)
	i6h := mustScaled(t, "int6", "hex", 1)
	tests := []struct {
		f    numfmt.Format
		text string
		want float64
	}{
		{f32h, "3f800000", 1},
		{f32h, " 0X3F800000\r\n", 1},
		{f32h, "80000000", math.Copysign(0, -1)},
		{f32h, "1", 0x1p-149},
		{f32d, " 1.5e-3 ", float64(float32(1.5e-3))},
		{f32d, "0.1", float64(float32(0.1))},
		{f32d, "1e-50", 0}, // underflows to zero: finite
		{q115h, "8000", -1},
		{q115h, "4", 4 * 0x1p-15},
		{q115d, "-32768", -1},
		{q115d, "+16384", 0.5},
		{i16h, "0xffff", -1e-6},
		{i16h, "4d3", 1235e-6},
		{i16d, "-1", -1e-6},
		{i6h, "3F", -1},
		{i6h, "1f", 31},
	}
	for _, tt := range tests {
		got, err := tt.f.Decode(tt.text)
		if err != nil || math.Float64bits(got) != math.Float64bits(tt.want) {
			t.Errorf("%s.Decode(%q) = %v, %v; want %v", tt.f, tt.text, got, err, tt.want)
		}
	}
}

func TestDecodeErrors(t *testing.T) {
	f32h := mustParse(t, "float32", "hex")
	f32d := mustParse(t, "float32", "decimal")
	q115h := mustParse(t, "Q1.15", "hex")
	q115d := mustParse(t, "Q1.15", "decimal")
	i16h := mustScaled(t, "int16", "hex", 1e-6)
	i16d := mustScaled(t, "int16", "decimal", 1e-6)
	i6h := mustScaled(t, "int6", "hex", 1)
	tests := []struct {
		f    numfmt.Format
		text string
		want string
	}{
		{f32h, "7FC00000", "pattern of NaN, expected a finite float32"},
		{f32h, "7F800000", "pattern of +Inf, expected a finite float32"},
		{f32h, "FF800000", "pattern of -Inf, expected a finite float32"},
		{f32h, "3F8000000", "has 9 hex digits, expected at most 8"},
		{f32h, "3F80000G", "is not hex"},
		{f32h, "", "found nothing"},
		{f32d, "1e39", "not a finite float32"},
		{f32d, "NaN", "not a finite float32"},
		{f32d, "inf", "not a finite float32"},
		{f32d, "one", "not a number, expected a decimal number"},
		{f32d, "   ", "found nothing"},
		{q115h, "00001", "has 5 hex digits, expected at most 4"},
		{q115h, "0x", "has no hex digits"},
		{q115h, "-1", "is not hex"},
		{q115h, "12 34", "is not hex"},
		{q115d, "32768", "expected an integer from -32768 to 32767"},
		{q115d, "-32769", "expected an integer from -32768 to 32767"},
		{q115d, "99999999999999999999", "expected an integer from -32768 to 32767"},
		{q115d, "0.5", "is not an integer"},
		{q115d, "0x10", "is not an integer"},
		{i16d, "", "found nothing"},
		{i16h, "ffff0", "has 5 hex digits"},
		{i6h, "40", "does not fit the 6-bit word, expected at most 3F"},
	}
	for _, tt := range tests {
		got, err := tt.f.Decode(tt.text)
		if err == nil || !strings.Contains(err.Error(), tt.want) {
			t.Errorf("%s.Decode(%q) = %v, %v; want an error containing %q", tt.f, tt.text, got, err, tt.want)
		}
	}
}

// absDiff is |a-b| computed without rounding.
func absDiff(a, b float64) *big.Float {
	d := new(big.Float).SetPrec(4096).Sub(big.NewFloat(a), big.NewFloat(b))
	return d.Abs(d)
}

// roundTripFormats are the formats the property and fuzz tests exercise.
func roundTripFormats(t testing.TB) []numfmt.Format {
	var fs []numfmt.Format
	for _, text := range []string{"decimal", "hex"} {
		for _, name := range []string{"float32", "Q1.15", "Q2.14", "Q1.31", "Q16.16", "Q32.0", "Q2.0", "Q3.3"} {
			fs = append(fs, mustParse(t, name, text))
		}
		fs = append(fs,
			mustScaled(t, "int16", text, 1e-6),
			mustScaled(t, "int32", text, 1e-9),
			mustScaled(t, "int24", text, 2.5e-7),
			mustScaled(t, "int2", text, 0.1),
			mustScaled(t, "int8", text, 1e-3),
		)
	}
	return fs
}

func TestRoundTrip(t *testing.T) {
	rng := rand.New(rand.NewPCG(20240611, 1))
	for _, f := range roundTripFormats(t) {
		lo, hi := f.Range()
		for i := range 20000 {
			var v float64
			switch {
			case f.Kind == numfmt.Float32:
				// Log-uniform over the float32 range, subnormals included.
				v = math.Pow(10, -46+84*rng.Float64())
				if v > math.MaxFloat32 {
					v = math.MaxFloat32
				}
				if rng.IntN(2) == 0 {
					v = -v
				}
			case i < 2:
				v = []float64{lo, hi}[i]
			default:
				v = lo + (hi-lo)*rng.Float64()
			}
			text, stored, err := f.Encode(v)
			if err != nil {
				t.Fatalf("%s.Encode(%v): %v", f, v, err)
			}
			got, err := f.Decode(text)
			if err != nil || got != stored {
				t.Fatalf("%s.Decode(%q) = %v, %v; want the stored %v (from %v)", f, text, got, err, stored, v)
			}
			// |stored - v| <= Resolution/2, exactly half allowed. For Scaled, both v/Scale
			// and word·Scale are rounded in float64, so allow a few ulps of v beyond half.
			limit := big.NewFloat(f.Resolution(v) / 2)
			if f.Kind == numfmt.Scaled {
				limit.Add(limit, big.NewFloat(8*math.Abs(v)*0x1p-52))
			}
			if absDiff(stored, v).Cmp(limit) > 0 {
				t.Fatalf("%s: %v stored as %v (%q), more than half a resolution (%v) away", f, v, stored, text, f.Resolution(v))
			}
			if !f.Equal(stored, v) {
				t.Fatalf("%s.Equal(%v, %v) = false for a value and its stored word", f, stored, v)
			}
		}
	}
}

// FuzzDecode checks that Decode never panics, and that whatever it accepts encodes back
// to the same word: the stored value is what was decoded and its text decodes to it.
func FuzzDecode(f *testing.F) {
	for _, s := range []string{"", " ", "0", "-0", "3F800000", "0x7fc00000", "7F800000", "80000000", "FFFF",
		"0xffff", "04D3", "1235", "-32768", "32768", "0.1", "1e39", "1e-50", "NaN", "+Inf", "0x", "0x1p-3",
		"99999999999999999999", " 12 ", "ffff0", "-1", "1_0", "é"} {
		for i := range 4 {
			f.Add(s, uint8(i*5))
		}
	}
	formats := roundTripFormats(f)
	f.Fuzz(func(t *testing.T, text string, which uint8) {
		fm := formats[int(which)%len(formats)]
		v, err := fm.Decode(text)
		if err != nil {
			return
		}
		out, stored, err := fm.Encode(v)
		if err != nil {
			t.Fatalf("%s: Decode(%q) = %v, but Encode refuses it: %v", fm, text, v, err)
		}
		if math.Float64bits(stored) != math.Float64bits(v) {
			t.Fatalf("%s: Decode(%q) = %v, Encode stores %v (%q)", fm, text, v, stored, out)
		}
		back, err := fm.Decode(out)
		if err != nil || math.Float64bits(back) != math.Float64bits(v) {
			t.Fatalf("%s: Decode(%q) = %v, Encode gives %q, which decodes to %v, %v", fm, text, v, out, back, err)
		}
	})
}

func ExampleFormat_Encode() {
	f, _ := numfmt.Parse("Q1.15", "hex")
	text, stored, _ := f.Encode(-0.25)
	fmt.Println(text, stored)
	g, _ := numfmt.ParseScaled("int16", "decimal", 1e-6)
	text, stored, _ = g.Encode(0.0012345)
	fmt.Println(text, stored)
	// Output:
	// E000 -0.25
	// 1235 0.001235
}

// TestCodes: the code ranges of the demo cards' DACs, worked by hand.
func TestCodes(t *testing.T) {
	for _, c := range []struct {
		bits        int
		twos        bool
		lo, hi, mid int
	}{{12, false, 0, 4095, 2048}, {8, true, -128, 127, 0}, {1, false, 0, 1, 1}} {
		lo, hi, mid := numfmt.Codes(c.bits, c.twos)
		if lo != c.lo || hi != c.hi || mid != c.mid {
			t.Errorf("Codes(%d, %v) = %d, %d, %d; want %d, %d, %d", c.bits, c.twos, lo, hi, mid, c.lo, c.hi, c.mid)
		}
	}
}
