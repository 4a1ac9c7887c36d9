package sequencer

// Trim DACs: how the sequence file declares them, and how their codes are written
// to and read from the unit's port.

import (
	"fmt"
	"strconv"
	"strings"
	"trimline/instruments/numfmt"

	"trimline/instruments/files"
	"trimline/instruments/units"
)

// What a trim DAC adjusts.
const (
	AdjustGain   = "gain"   // scales the signal about the trim's pivot
	AdjustOffset = "offset" // adds to the output (or, before the gain, to the input)
)

// DAC is one trim DAC of the unit. Its code runs MinCode..MaxCode: 0..2^Bits−1
// for binary-offset coding, −2^(Bits−1)..2^(Bits−1)−1 for two's complement; each
// code away from NoCorrection moves the transfer by LSB (a fraction of the gain
// for a gain DAC; for an offset DAC, in the response's unit (V, A or count) at the
// output, or input-referred in the stimulus's unit (V, or A for a current
// stimulus) when BeforeGain).
type DAC struct {
	Name           string
	Adjusts        string // AdjustGain or AdjustOffset
	Bits           int
	LSB            float64
	NoCorrection   int
	TwosComplement bool // the code is signed, written as its Bits-bit pattern in hex
	Hex            bool // the port writes and reads the code in hexadecimal
	// BeforeGain is true for an offset DAC that adds at the input of the gain
	// stage (its LSB is input-referred and its output effect scales with the
	// gain); false when it adds at the output.
	BeforeGain bool
	Port       string // the DUT port role it is written through
	Write      string // command template; {code} is replaced by the code
	Read       string // query that returns the code
	Where      string // "file:line:col" of its declaration
}

// MinCode is the smallest code the DAC accepts.
func (d DAC) MinCode() int { lo, _, _ := numfmt.Codes(d.Bits, d.TwosComplement); return lo }

// MaxCode is the largest code the DAC accepts.
func (d DAC) MaxCode() int { _, hi, _ := numfmt.Codes(d.Bits, d.TwosComplement); return hi }

// Word is the text of code as the port writes it: decimal, or hexadecimal
// (uppercase, ⌈Bits/4⌉ digits; a two's-complement code as its Bits-bit pattern).
func (d DAC) Word(code int) string {
	if !d.Hex {
		return strconv.Itoa(code)
	}
	v := uint64(code) & (1<<d.Bits - 1)
	return fmt.Sprintf("%0*X", (d.Bits+3)/4, v)
}

// ParseWord reads a code the port replied: decimal (signed for two's
// complement), or hexadecimal with or without 0x (a two's-complement pattern is
// sign-extended).
func (d DAC) ParseWord(s string) (int, error) {
	s = strings.TrimSpace(s)
	if !d.Hex {
		c, err := strconv.Atoi(s)
		if err != nil || c < d.MinCode() || c > d.MaxCode() {
			return 0, fmt.Errorf("%q is not a code in %d..%d", s, d.MinCode(), d.MaxCode())
		}
		return c, nil
	}
	h := strings.TrimPrefix(strings.TrimPrefix(s, "0x"), "0X")
	v, err := strconv.ParseUint(h, 16, 64)
	if err != nil || h == "" || v >= 1<<d.Bits {
		return 0, fmt.Errorf("%q is not a %d-bit hexadecimal code", s, d.Bits)
	}
	c := int(v)
	if d.TwosComplement && c >= 1<<(d.Bits-1) {
		c -= 1 << d.Bits
	}
	return c, nil
}

// Line is the write command for code.
func (d DAC) Line(code int) string { return strings.ReplaceAll(d.Write, "{code}", d.Word(code)) }

type dacDecl struct {
	Name         string `yaml:"name"`
	Adjusts      string `yaml:"adjusts"`
	Bits         int    `yaml:"bits"`
	LSB          string `yaml:"lsb"`
	Coding       string `yaml:"coding"`
	Format       string `yaml:"format"`
	NoCorrection *int   `yaml:"no_correction"`
	Placement    string `yaml:"placement"`
	Port         string `yaml:"port"`
	Write        string `yaml:"write"`
	Read         string `yaml:"read"`
}

// dacList checks the dacs: section; response is the dimension of the unit's
// response, in which an offset DAC after the gain writes its LSB, stimulus that
// of its stimulus, in which one before the gain writes it.
func dacList(doc *files.Doc, ds []*dacDecl, response, stimulus units.Dim, errs *files.List) []DAC {
	var out []DAC
	seen := map[string]int{}
	for i, d := range ds {
		path := fmt.Sprintf("$.dacs[%d]", i)
		if d == nil {
			*errs = append(*errs, doc.Errorf(path, "expected a trim DAC: name, adjusts, bits, lsb, write, read"))
			continue
		}
		if d.Name == "" {
			*errs = append(*errs, doc.Errorf(path, "missing required key \"name\""))
		} else if !validName(d.Name) {
			*errs = append(*errs, doc.Errorf(path+".name", "DAC name %q: expected letters, digits and _ beginning with a letter (its code's result is NAME_code)", d.Name))
		} else if j, dup := seen[d.Name]; dup {
			*errs = append(*errs, doc.Errorf(path+".name", "DAC name %q is already used by dacs[%d]", d.Name, j))
		}
		seen[d.Name] = i
		out = append(out, dacFrom(doc, path, d, d.Adjusts, response, stimulus, errs))
	}
	return out
}

// dacFrom checks one DAC declared at path; adjusts is what it trims (the first
// layout knows it from the key, gain: or offset:). An offset DAC's LSB is in the
// response's dimension after the gain, in the stimulus's (volts or amperes of
// input) before it.
func dacFrom(doc *files.Doc, path string, d *dacDecl, adjusts string, response, stimulus units.Dim, errs *files.List) DAC {
	bad := func(p, format string, args ...any) { *errs = append(*errs, doc.Errorf(p, format, args...)) }
	out := DAC{Name: d.Name, Adjusts: adjusts, Bits: d.Bits, Write: d.Write, Read: d.Read, Port: d.Port,
		Where: whereIn(doc, path)}
	if out.Port == "" {
		out.Port = RoleDUT
	}
	switch adjusts {
	case AdjustGain, AdjustOffset:
	case "":
		bad(path, "missing required key \"adjusts\" (gain or offset)")
	default:
		bad(path+".adjusts", "expected gain or offset, found %q", adjusts)
	}
	if d.Bits < 1 || d.Bits > MaxDACBits {
		bad(path+".bits", "expected 1 to %d bits, found %d", MaxDACBits, d.Bits)
		out.Bits = 1
	}
	// either reads a key with two values, the first the default: it reports
	// whether the second is set.
	either := func(key, v, first, second string) bool {
		if v != "" && v != first && v != second {
			bad(path+"."+key, "expected %s or %s, found %q", first, second, v)
		}
		return v == second
	}
	out.TwosComplement = either("coding", d.Coding, "binary_offset", "twos_complement")
	out.Hex = either("format", d.Format, "decimal", "hex")
	out.BeforeGain = either("placement", d.Placement, "after_gain", "before_gain")
	dim := response
	switch {
	case adjusts == AdjustGain:
		dim = units.Ratio
	case out.BeforeGain:
		dim = stimulus
	}
	if d.LSB == "" {
		bad(path, "missing required key \"lsb\"")
	} else if v, err := parseLSB(d.LSB, dim); err != nil {
		bad(path+".lsb", "%v", err)
	} else if out.LSB = v; v <= 0 {
		bad(path+".lsb", "expected a positive LSB size")
	}
	switch {
	case d.NoCorrection != nil:
		out.NoCorrection = *d.NoCorrection
		if out.NoCorrection < out.MinCode() || out.NoCorrection > out.MaxCode() {
			bad(path+".no_correction", "expected a code in %d..%d", out.MinCode(), out.MaxCode())
		}
	case out.TwosComplement:
		out.NoCorrection = 0
	default:
		bad(path, "missing required key \"no_correction\" (the code that applies no correction, often mid-scale)")
	}
	if d.Placement != "" && adjusts == AdjustGain {
		bad(path+".placement", "placement applies to offset DACs only")
	}
	if !strings.Contains(d.Write, "{code}") {
		bad(path+".write", "expected a command template containing {code}, e.g. \"TRIM OFS {code}\"")
	}
	if d.Read == "" {
		bad(path, "missing required key \"read\" (the query that reads the code back)")
	}
	return out
}
