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

	tcUse          Trim          // "" = no temperature coefficients
	tcOffset       numfmt.Format // how the port writes and reads TCO
	tcGain         numfmt.Format // and TCG
	tcOffsetUnit   float64       // SI value per °C of one TCO number; 0 for counts
	tcOffsetCounts bool          // TCO is in counts of the converter per °C
	tcGainUnit     float64       // value per °C of one TCG number (1e-6 for ppm)
	tcRef          float64       // °C
}

// hasTCO and hasTCG report which temperature coefficients the card holds.
func (c coefs) hasTCO() bool { return c.tcUse != "" && c.tcUse.HasOffset() }
func (c coefs) hasTCG() bool { return c.tcUse != "" && c.tcUse.HasGain() }

// tcOffsetSI returns the TCO number v in V (A) per °C, lsb V per count.
func (c coefs) tcOffsetSI(v, lsb float64) float64 {
	if c.tcOffsetCounts {
		return v * lsb
	}
	return v * c.tcOffsetUnit
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
	return c, s.resolveTC(&c, out, format)
}

// resolveTC resolves the temperature coefficients' formats and units into c.
func (s Coefficients) resolveTC(c *coefs, out Output, format func(key, name string, scale float64, def string, defScale float64) (numfmt.Format, error)) error {
	c.tcUse, c.tcRef = s.TC, TCRef
	if s.TCRef != nil {
		c.tcRef = *s.TCRef
	}
	var err error
	if c.tcOffset, err = format("coef_tc_offset_format", s.TCOffsetFormat, 0, "float32", 1); err != nil {
		return err
	}
	if c.tcGain, err = format("coef_tc_gain_format", s.TCGainFormat, 0, "float32", 1); err != nil {
		return err
	}
	unit := strings.TrimSpace(s.TCOffsetUnit)
	want := units.Volt
	if out == OutputCurrent {
		want = units.Ampere
	}
	switch {
	case out == OutputReported && (unit == "" || unit == "count"):
		c.tcOffsetCounts = true
	case unit == "":
		c.tcOffsetUnit = 1
	default:
		q, err := units.Parse("1 " + unit)
		if err != nil || q.Dim != want {
			return settingErr("coef_tc_offset_unit", "%q: expected a unit of %s (per °C) such as u%s",
				s.TCOffsetUnit, want, map[units.Dim]string{units.Volt: "V", units.Ampere: "A"}[want])
		}
		c.tcOffsetUnit = q.Value
	}
	switch strings.TrimSpace(s.TCGainUnit) {
	case "", "ppm":
		c.tcGainUnit = 1e-6
	case "%":
		c.tcGainUnit = 1e-2
	case "1":
		c.tcGainUnit = 1
	default:
		return settingErr("coef_tc_gain_unit", "%q: expected ppm, %% or 1 (per °C)", s.TCGainUnit)
	}
	return nil
}

// tcCorrect applies the firmware's temperature correction to y (V or A, after
// the gain and offset coefficients) with sensor reading temp: vz + (y − vz −
// tco·ΔT)/(1 + tcg·ΔT), ΔT = temp − the reference; tco and tcg are the register
// numbers. It is the inverse of the drift model (doc.go) for a trimmed unit: the
// offset drift measured at zero input, gain drift relative to the unit's slope.
func (c coefs) tcCorrect(y, temp, tco, tcg, vz, lsb float64) float64 {
	if c.tcUse == "" {
		return y
	}
	dT := temp - c.tcRef
	return vz + (y-vz-c.tcOffsetSI(tco, lsb)*dT)/(1+tcg*c.tcGainUnit*dT)
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
