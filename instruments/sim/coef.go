package sim

import (
	"strings"

	"trimline/instruments/numfmt"
	"trimline/instruments/units"
)

// coefs is the resolved firmware correction of a card: the formats its port speaks
// and the SI value of one offset number.
type coefs struct {
	use          Trim          // "" = the card has no coefficients
	gain, offset numfmt.Format // how the port writes and reads each
	offsetUnit   float64       // SI value (V or A) of one offset number; 0 for counts of a reported card
	offsetCounts bool          // the offset number is in counts of the converter
}

// hasGain and hasOffset report which coefficients the card holds.
func (c coefs) hasGain() bool   { return c.use != "" && c.use.HasGain() }
func (c coefs) hasOffset() bool { return c.use != "" && c.use.HasOffset() }

// resolve checks the coefficient settings of a card with output kind out (also when
// Use is "": a coefficient setting is checked even where the card has none) and
// returns what the model uses; an error names the settings key.
func (s Coefficients) resolve(out Output) (coefs, error) {
	c := coefs{use: s.Use} // the settings are checked whether the card uses them or not
	text := "decimal"
	if s.Hex {
		text = "hex"
	}
	format := func(key, name string, scale float64, def string, defScale float64) (numfmt.Format, error) {
		if name == "" {
			name = def
		}
		f, err := numfmt.Parse(name, text)
		if err == nil && f.Kind != numfmt.Scaled && scale != 0 {
			return f, settingErr(strings.Replace(key, "_format", "_scale", 1), "a scale of one count applies only to int<bits> formats, not %s", name)
		}
		if err == nil && f.Kind == numfmt.Scaled {
			if scale == 0 {
				scale = defScale
			}
			f, err = numfmt.ParseScaled(name, text, scale)
		}
		if err != nil {
			return f, settingErr(key, "%v", err)
		}
		return f, nil
	}
	var err error
	if c.gain, err = format("coef_gain_format", s.GainFormat, s.GainScale, "Q2.14", 1e-4); err != nil {
		return c, err
	}
	if lo, hi := c.gain.Range(); 1 < lo || 1 > hi {
		return c, settingErr("coef_gain_format", "%s cannot hold the no-correction gain 1", c.gain)
	}
	unit := strings.TrimSpace(s.OffsetUnit)
	want := units.Volt
	if out == OutputCurrent {
		want = units.Ampere
	}
	switch {
	case out == OutputReported && (unit == "" || unit == "count"):
		c.offsetCounts = true
	case unit == "":
		c.offsetUnit = 1
	default:
		q, err := units.Parse("1 " + unit)
		if err != nil || q.Dim != want {
			alt := ""
			if out == OutputReported {
				alt = " or count"
			}
			return c, settingErr("coef_offset_unit", "%q: expected a unit of %s such as m%s%s", s.OffsetUnit, want,
				map[units.Dim]string{units.Volt: "V", units.Ampere: "A"}[want], alt)
		}
		c.offsetUnit = q.Value
	}
	scale := s.OffsetScale
	if s.OffsetScaleSI {
		if c.offsetCounts {
			return c, settingErr("coef_offset_scale", "the offset is in counts: expected a plain number of counts")
		}
		scale /= c.offsetUnit
	}
	if c.offset, err = format("coef_offset_format", s.OffsetFormat, scale, "float32", 1); err != nil {
		return c, err
	}
	return c, nil
}

// offsetSI returns the offset coefficient v (a number in the offset unit) as the
// card adds it: in V or A, or in V at the converter for counts (lsb V per count).
func (c coefs) offsetSI(v, lsb float64) float64 {
	if c.offsetCounts {
		return v * lsb
	}
	return v * c.offsetUnit
}

// coefScaleOf parses an int<bits> scale, the value of one count: a plain number (in
// the coefficient's number), or, for the offset (si non-nil), also a quantity in the
// output's dimension ("0.1 uA"), which resolve converts to the offset unit.
func coefScaleOf(p *float64, si *bool) setter {
	return func(k, val string) error {
		v, err := units.Parse(val)
		if err != nil {
			return settingErr(k, "%v", err)
		}
		if !(v.Value > 0) {
			return settingErr(k, "%q: expected a positive value of one count", val)
		}
		*p = v.Value
		switch {
		case v.Dim == units.Ratio || v.Dim == units.Count:
		case si == nil:
			return settingErr(k, "%q: the gain is a plain factor, expected a plain number such as 1e-4", val)
		case v.Dim != units.Volt && v.Dim != units.Ampere:
			return settingErr(k, "%q is a %s: expected a plain number or a voltage or current", val, v.Dim)
		default:
			*si = true
		}
		return nil
	}
}
