package sequencer

// Firmware correction coefficients: how the sequence file declares them, and how
// one is written to the unit, read back and recorded. The unit computes
// corrected = gain·raw + offset with the numbers it holds; the station writes
// them as text in the coefficient's number format (package numfmt).

import (
	"context"
	"fmt"
	"slices"
	"strings"
	"unicode"

	"trimline/instruments/files"
	"trimline/instruments/numfmt"
	"trimline/instruments/units"
)

// Coefficient is one firmware correction coefficient of the unit.
type Coefficient struct {
	Name    string
	Adjusts string // AdjustGain, AdjustOffset, AdjustOffsetTC or AdjustGainTC
	// FormatName is the format as the file writes it ("Q2.14", "float32",
	// "int16"), for messages; Format encodes and decodes the number the
	// firmware holds, in Unit.
	FormatName string
	Format     numfmt.Format
	// Unit is the unit of the firmware's number for an offset ("mA", "V"), ""
	// for a gain (a plain factor); UnitSI is the SI value of one Unit (1e-3 for
	// mA), 1 for a gain. For a temperature coefficient the unit is per °C,
	// which the file does not write: "uV" for offset_tc is µV/°C (UnitSI 1e-6),
	// "ppm" for gain_tc is ppm/°C (UnitSI 1e-6), "" for gain_tc a plain
	// fraction per °C.
	Unit   string
	UnitSI float64
	Port   string // the DUT port role it is written through
	Write  string // command template; {value} is replaced by the text, {channel} by the channel
	Read   string // query that returns the text; {channel} allowed
	Where  string // "file:line:col" of its declaration
}

// The temperature coefficients a coefficient may adjust: the firmware corrects
// y' = y − offset_tc·(T − Tref) − gain_tc·(T − Tref)·(y − Y0) with T its own
// sensor's temperature.
const (
	AdjustOffsetTC = "offset_tc" // output unit per °C
	AdjustGainTC   = "gain_tc"   // fraction of the gain per °C
)

// adjustsKnown are what a coefficient may adjust, as messages list them.
var adjustsKnown = []string{AdjustGain, AdjustOffset, AdjustOffsetTC, AdjustGainTC}

// NoCorrection is the value that leaves the unit's output as it is: 1 for a
// gain, 0 for an offset or a temperature coefficient.
func (c Coefficient) NoCorrection() float64 {
	if c.Adjusts == AdjustGain {
		return 1
	}
	return 0
}

// UnitText is the unit of the firmware's number as the record and messages
// write it: Unit, with "/°C" after it for a temperature coefficient ("uV/°C",
// "ppm/°C", "1/°C" for a plain fraction per °C).
func (c Coefficient) UnitText() string {
	if c.Adjusts != AdjustOffsetTC && c.Adjusts != AdjustGainTC {
		return c.Unit
	}
	if c.Unit == "" {
		return "1/°C"
	}
	return c.Unit + "/°C"
}

// Line is the write command for text (before {channel} is filled).
func (c Coefficient) Line(text string) string { return strings.Replace(c.Write, "{value}", text, 1) }

// Coefficient returns the coefficient that adjusts what (AdjustGain or
// AdjustOffset).
func (s *Sequence) Coefficient(what string) (Coefficient, bool) {
	for _, c := range s.Coefficients {
		if c.Adjusts == what {
			return c, true
		}
	}
	return Coefficient{}, false
}

type coefDecl struct {
	Name    string `yaml:"name"`
	Adjusts string `yaml:"adjusts"`
	Format  string `yaml:"format"`
	Scale   string `yaml:"scale"`
	Text    string `yaml:"text"`
	Unit    string `yaml:"unit"`
	Port    string `yaml:"port"`
	Write   string `yaml:"write"`
	Read    string `yaml:"read"`
}

// coefList checks the coefficients: section.
func coefList(doc *files.Doc, s *Sequence, cs []*coefDecl, errs *files.List) []Coefficient {
	bad := func(p, format string, args ...any) { *errs = append(*errs, doc.Errorf(p, format, args...)) }
	var out []Coefficient
	names := map[string]int{}
	adjusts := map[string]int{}
	for i, d := range cs {
		path := fmt.Sprintf("$.coefficients[%d]", i)
		if d == nil {
			bad(path, "expected a coefficient: name, adjusts, format, write, read")
			continue
		}
		c := Coefficient{Name: d.Name, Adjusts: d.Adjusts, FormatName: d.Format, Port: orDefault(d.Port, RoleDUT),
			Write: d.Write, Read: d.Read, UnitSI: 1, Where: whereIn(doc, path)}
		switch j, dup := names[d.Name]; {
		case d.Name == "":
			bad(path, "missing required key \"name\"")
		case !validName(d.Name):
			bad(path+".name", "coefficient name %q: expected letters, digits and _ beginning with a letter", d.Name)
		case dup:
			bad(path+".name", "coefficient name %q is already used by coefficients[%d]", d.Name, j)
		default:
			names[d.Name] = i
		}
		switch j, dup := adjusts[d.Adjusts]; {
		case d.Adjusts == "":
			bad(path, "missing required key \"adjusts\" (gain, offset, offset_tc or gain_tc)")
		case !slices.Contains(adjustsKnown, d.Adjusts):
			bad(path+".adjusts", "expected gain, offset, offset_tc or gain_tc, found %q", d.Adjusts)
		case dup:
			bad(path+".adjusts", "coefficients[%d] adjusts %s already: the unit has one %s coefficient (corrected = gain·raw + offset)", j, d.Adjusts, d.Adjusts)
		default:
			adjusts[d.Adjusts] = i
		}
		c.Format = coefFormat(doc, s, path, d, &c, errs)
		if n := strings.Count(d.Write, "{value}"); n != 1 {
			if d.Write == "" {
				bad(path, "missing required key \"write\" (the command template, e.g. \"CAL GAIN {value}\")")
			} else {
				bad(path+".write", "expected a command template containing {value} once, e.g. \"CAL GAIN {value}\", found it %d times", n)
			}
		}
		if d.Read == "" {
			bad(path, "missing required key \"read\" (the query that answers the value, e.g. \"CAL GAIN?\")")
		} else if strings.Contains(d.Read, "{value}") {
			bad(path+".read", "a read query has no {value}: it asks for the value the unit holds")
		}
		if !validRoleName(c.Port) {
			bad(path+".port", "role %q: expected a name of lowercase letters, digits and _ beginning with a letter", c.Port)
		}
		out = append(out, c)
	}
	return out
}

// unitExamples names units an offset coefficient of dimension dim may be held
// in, for messages: "V, mV or uV"; a count has no prefixes.
func unitExamples(dim units.Dim) string {
	u := unitOf(dim)
	if dim == units.Count {
		return u
	}
	return u + ", m" + u + " or u" + u
}

// coefFormat checks format:, text:, scale: and unit: of the coefficient d at path
// and sets c's unit; it returns the number format.
func coefFormat(doc *files.Doc, s *Sequence, path string, d *coefDecl, c *Coefficient, errs *files.List) numfmt.Format {
	bad := func(p, format string, args ...any) { *errs = append(*errs, doc.Errorf(p, format, args...)) }
	text := d.Text
	switch text {
	case "":
		text = "decimal"
	case "decimal", "hex":
	default:
		bad(path+".text", "expected decimal or hex, found %q", d.Text)
		text = "decimal"
	}
	dim := s.ResponseDim
	if d.Adjusts == AdjustGainTC {
		dim = units.Ratio // ppm (per °C), or a plain fraction per °C without a unit
	}
	if d.Unit != "" {
		switch {
		case d.Adjusts == AdjustGainTC:
			if q, err := units.Parse("1 " + d.Unit); err != nil || q.Dim != units.Ratio || !(q.Value > 0) || strings.ContainsAny(d.Unit, "/ ") {
				bad(path+".unit", "expected ppm, ppb or %% (meaning per °C: the file does not write the /°C), found %q", d.Unit)
			} else {
				c.Unit, c.UnitSI = d.Unit, q.Value
			}
		case d.Adjusts == AdjustGain:
			bad(path+".unit", "unit applies to offset coefficients only: a gain is a plain factor (no correction = 1)")
		case strings.IndexFunc(d.Unit, func(r rune) bool { return unicode.IsDigit(r) || unicode.IsSpace(r) }) >= 0:
			bad(path+".unit", "expected a unit of the response such as %s, found %q", unitExamples(dim), d.Unit)
		default:
			q, err := units.Parse("1 " + d.Unit)
			if err != nil || q.Dim != dim || !(q.Value > 0) {
				perC := ""
				if d.Adjusts == AdjustOffsetTC {
					perC = " (meaning per °C: the file does not write the /°C)"
				}
				bad(path+".unit", "expected a unit of the response (%s) such as %s%s, found %q", dim, unitExamples(dim), perC, d.Unit)
			} else {
				c.Unit, c.UnitSI = d.Unit, q.Value
			}
		}
	} else if d.Adjusts == AdjustOffset || d.Adjusts == AdjustOffsetTC {
		c.Unit = unitOf(dim)
	}
	if d.Format == "" {
		bad(path, "missing required key \"format\" (float32, Q<m>.<n> such as Q2.14, or int<bits> such as int16 with scale)")
		return numfmt.Format{}
	}
	f, err := numfmt.Parse(d.Format, text)
	if err != nil {
		bad(path+".format", "%v", err)
		return numfmt.Format{}
	}
	if f.Kind != numfmt.Scaled {
		if d.Scale != "" {
			bad(path+".scale", "scale applies to int<bits> formats only: %s has a resolution of its own", d.Format)
		}
		return holdsNoCorrection(doc, path+".format", d, f, errs)
	}
	if d.Scale == "" {
		example := "1e-6"
		if d.Adjusts == AdjustGainTC {
			example = "0.01 ppm"
		} else if d.Adjusts != AdjustGain {
			example = "1 u" + unitOf(dim)
		}
		bad(path, "missing required key \"scale\": an int<bits> format needs the value of one count, e.g. scale: %s", example)
		return numfmt.Format{}
	}
	var scale float64
	switch d.Adjusts {
	case AdjustGain:
		scale, err = units.ParseAs(d.Scale, units.Number)
	case AdjustGainTC:
		scale, err = units.ParseRatio(d.Scale)
		scale /= c.UnitSI
	default:
		scale, err = units.ParseAs(d.Scale, dim)
		scale /= c.UnitSI // in the coefficient's unit
	}
	if err != nil {
		bad(path+".scale", "%v", err)
		return numfmt.Format{}
	}
	f, err = numfmt.ParseScaled(d.Format, text, scale)
	if err != nil {
		bad(path+".scale", "%v", err)
		return numfmt.Format{}
	}
	return holdsNoCorrection(doc, path+".scale", d, f, errs)
}

// holdsNoCorrection returns f when it stores the no-correction value of the
// coefficient d exactly (1 for a gain, 0 for an offset), which clear_trim writes;
// else it reports at key and returns the zero Format.
func holdsNoCorrection(doc *files.Doc, key string, d *coefDecl, f numfmt.Format, errs *files.List) numfmt.Format {
	if d.Adjusts != AdjustGain {
		return f // every format holds 0 exactly
	}
	_, v, err := f.Encode(1)
	if err == nil && v == 1 {
		return f
	}
	lo, hi := f.Range()
	why := fmt.Sprintf("its range is %s … %s", units.FormatSig(lo, 6), units.FormatSig(hi, 6))
	if err == nil {
		why = fmt.Sprintf("1 rounds to %g", v)
	}
	*errs = append(*errs, doc.Errorf(key, "%s cannot hold 1, a gain's no correction (%s): expected a format with a wider range or a scale that divides 1", f, why))
	return numfmt.Format{}
}

// coefWrite writes the word text (standing for value) to coefficient c through
// its port and reads it back, filling w's Written, Readback, ReadbackValue and
// Match. found, when set, is filled first with what the unit held before the write
// (read and decoded; the reply as is when it does not decode). A port error or a
// reply beginning "ERR" is a station fault; a read-back that is not the word
// written is left to the caller (Match false). Call it on a live unit only.
func coefWrite(ctx context.Context, u *Unit, c Coefficient, w *CoefficientWrite, found bool) error {
	port, err := u.Port(c.Port)
	if err != nil {
		return err
	}
	query := func(ctx context.Context, what string) (string, error) {
		reply, err := port.Query(ctx, u.Fill(c.Read))
		if err != nil {
			return "", u.e.blame(c.Port, err.Error(), fmt.Errorf("%s: read coefficient %s (%s): %w", c.Port, c.Name, what, err))
		}
		if r := strings.TrimSpace(reply); strings.HasPrefix(r, "ERR") {
			return "", u.Fault("%s: coefficient %s: the unit answered %q to %q (%s)", c.Port, c.Name, r, u.Fill(c.Read), what)
		}
		return reply, nil
	}
	return u.Do(ctx, func(ctx context.Context) error {
		if found {
			reply, err := query(ctx, "as found")
			if err != nil {
				return err
			}
			w.Found = reply
			if v, err := c.Format.Decode(reply); err == nil {
				w.FoundValue = v
			}
		}
		line := u.Fill(c.Line(w.Text))
		if err := port.Command(ctx, line); err != nil {
			return u.e.blame(c.Port, err.Error(), fmt.Errorf("%s: write coefficient %s %q: %w", c.Port, c.Name, line, err))
		}
		w.Written = true
		reply, err := query(ctx, "read back")
		if err != nil {
			return err
		}
		w.Readback = reply
		if v, err := c.Format.Decode(reply); err == nil {
			w.ReadbackValue = v
			w.Match = c.Format.Equal(v, w.Value)
		}
		return nil
	})
}

// mismatch is the reason a unit fails when w did not read back as written.
func (w CoefficientWrite) mismatch() string {
	return fmt.Sprintf("coefficient %s read back %q after writing %q (expected %s)", w.Name, strings.TrimSpace(w.Readback), w.Text, w.Format)
}

// storedCoef returns the stored record's entry of coefficient name written by
// step on channel.
func storedCoef(rec *Record, step, name, channel string) (CoefficientWrite, bool) {
	if rec == nil {
		return CoefficientWrite{}, false
	}
	for _, w := range rec.Coefficients {
		if w.Step == step && w.Name == name && w.Channel == channel {
			return w, true
		}
	}
	return CoefficientWrite{}, false
}

// fromStored takes into w the facts of the run a replay cannot compute (what the
// unit held, whether the word was sent, what the unit answered, whether it was
// stored) and decodes the replies again.
func (w *CoefficientWrite) fromStored(c Coefficient, st CoefficientWrite) {
	w.Found, w.Written, w.Readback, w.Stored = st.Found, st.Written, st.Readback, st.Stored
	w.FoundValue, w.ReadbackValue, w.Match = 0, 0, false
	if v, err := c.Format.Decode(w.Found); err == nil && w.Found != "" {
		w.FoundValue = v
	}
	if !w.Written {
		return
	}
	if v, err := c.Format.Decode(w.Readback); err == nil {
		w.ReadbackValue = v
		w.Match = c.Format.Equal(v, w.Value)
	}
}
