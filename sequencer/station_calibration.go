package sequencer

import (
	"regexp"
	"strconv"
	"strings"
	"time"

	"trimline/instruments/files"
	"trimline/instruments/units"
)

// calibrationDecl is an instrument's calibration: block as the station file
// writes it.
type calibrationDecl struct {
	Date        string `yaml:"date"`
	Certificate string `yaml:"certificate"`
	Laboratory  string `yaml:"laboratory"`
}

// specDecl is an instrument's spec: block as the station file writes it.
type specDecl struct {
	Period      string `yaml:"period"`
	Temperature *struct {
		Low  *units.Quantity `yaml:"low"`
		High *units.Quantity `yaml:"high"`
	} `yaml:"temperature"`
	Tempco *struct {
		OfReading units.Fraction `yaml:"of_reading"`
		OfRange   units.Fraction `yaml:"of_range"`
	} `yaml:"tempco"`
}

// calibration checks an instrument's calibration: block (date, certificate,
// laboratory, all three required when the block is there) and keeps it in si.
// The date is not after cal_due, nor in the future of the station file: a
// calibration not yet made traces nothing.
func calibration(doc *files.Doc, base string, si *StationInstrument, c *calibrationDecl, errs *files.List) {
	if c == nil {
		return
	}
	path := base + ".calibration"
	for _, kv := range [][2]string{{"date", c.Date}, {"certificate", c.Certificate}, {"laboratory", c.Laboratory}} {
		if strings.TrimSpace(kv[1]) == "" {
			*errs = append(*errs, doc.Errorf(path, "missing required key %q (the calibration's date, certificate number and laboratory)", kv[0]))
		}
	}
	si.CalCertificate, si.CalLab = strings.TrimSpace(c.Certificate), strings.TrimSpace(c.Laboratory)
	if c.Date == "" {
		return
	}
	d, err := time.Parse("2006-01-02", c.Date)
	if err != nil {
		*errs = append(*errs, doc.Errorf(path+".date", "expected a date as YYYY-MM-DD, found %q", c.Date))
		return
	}
	si.CalDate = d
	if !si.CalDue.IsZero() && !d.Before(si.CalDue) {
		*errs = append(*errs, doc.Errorf(path+".date", "the calibration date %s is not before cal_due %s", c.Date, si.CalDue.Format("2006-01-02")))
	}
}

// periodRE is a spec period as data sheets head their columns: "24 hours",
// "90 days", "1 year".
var periodRE = regexp.MustCompile(`^([1-9][0-9]{0,3}) *(hours?|days?|months?|years?)$`)

// validity checks an instrument's spec: block and returns it. The period is
// required; a temperature band needs its tempco (what the spec becomes outside
// it) and the other way round. With calibration.date and cal_due both given,
// the period must last until cal_due: a 90-day spec used for a year-long
// calibration interval claims an accuracy the instrument is not calibrated to.
func validity(doc *files.Doc, path string, d specDecl, si StationInstrument, errs *files.List) SpecValidity {
	bad := func(p, format string, args ...any) { *errs = append(*errs, doc.Errorf(p, format, args...)) }
	v := SpecValidity{Period: strings.Join(strings.Fields(d.Period), " ")}
	switch m := periodRE.FindStringSubmatch(v.Period); {
	case v.Period == "":
		bad(path, "missing required key \"period\" (how long after calibration the accuracy holds: 24 hours, 90 days, 1 year)")
	case m == nil:
		bad(path+".period", "expected a period such as 90 days or 1 year, found %q", d.Period)
	case !si.CalDate.IsZero() && !si.CalDue.IsZero():
		n, _ := strconv.Atoi(m[1])
		end := si.CalDate
		switch strings.TrimSuffix(m[2], "s") {
		case "hour":
			end = end.Add(time.Duration(n) * time.Hour)
		case "day":
			end = end.AddDate(0, 0, n)
		case "month":
			end = end.AddDate(0, n, 0)
		case "year":
			end = end.AddDate(n, 0, 0)
		}
		// cal_due is the last valid day: the spec must hold to its end.
		if end.Before(si.CalDue.AddDate(0, 0, 1)) {
			bad(path+".period", "the %s spec holds only until %s (calibrated %s), but cal_due is %s: give the spec for the calibration interval (e.g. the 1 year spec) or bring cal_due forward",
				v.Period, end.Format("2006-01-02"), si.CalDate.Format("2006-01-02"), si.CalDue.Format("2006-01-02"))
		}
	}
	t, tc := d.Temperature, d.Tempco
	switch {
	case t == nil && tc == nil:
		return v
	case t == nil:
		bad(path+".tempco", "a tempco needs the temperature band outside which it applies (temperature: {low: 18 °C, high: 28 °C})")
		return v
	case tc == nil:
		bad(path+".temperature", "a temperature band needs the tempco that applies outside it (tempco: {of_reading: 3 ppm, of_range: 0.5 ppm}, per °C)")
		return v
	}
	get := func(key string, q *units.Quantity) (float64, bool) {
		switch {
		case q == nil:
			bad(path+".temperature", "missing required key %q (the band in which the accuracy holds, e.g. low: 18 °C, high: 28 °C)", key)
		case q.Dim != units.Celsius || !finite(q.Value):
			bad(path+".temperature."+key, "expected a temperature such as 23 °C")
		default:
			return q.Value, true
		}
		return 0, false
	}
	lo, okLo := get("low", t.Low)
	hi, okHi := get("high", t.High)
	if okLo && okHi && lo >= hi {
		bad(path+".temperature.high", "expected high above low (%s), found %s", fmtC(lo), fmtC(hi))
		okHi = false
	}
	if tc.OfReading < 0 || tc.OfRange < 0 || !finite(float64(tc.OfReading)) || !finite(float64(tc.OfRange)) {
		bad(path+".tempco", "tempco terms must be finite and not negative (per °C outside the band)")
		return v
	}
	if okLo && okHi {
		v.HasBand, v.LowC, v.HighC = true, lo, hi
		v.TempcoOfReading, v.TempcoOfRange = float64(tc.OfReading), float64(tc.OfRange)
	}
	return v
}

// Ambient is the run's ambient temperature, °C, and whether it was recorded
// (entered or read); a zero Conditions has none.
func (c Conditions) Ambient() (float64, bool) {
	if c.AmbientSource == "" && c.AmbientC == 0 || !finite(c.AmbientC) {
		return 0, false
	}
	return c.AmbientC, true
}

// atAmbient is the station with every instrument's specs as they hold at the
// run's ambient: widened by the tempco for each degree outside the
// instrument's band (SpecValidity.Widen). Without a recorded ambient, or with
// the ambient in every band, it is s itself: the specs are assumed to hold as
// written, and the certificate says so. The copy shares everything but the
// instruments' specs with s.
func (s *Station) atAmbient(c Conditions) *Station {
	amb, ok := c.Ambient()
	if !ok || s == nil {
		return s
	}
	var out *Station
	for role, si := range s.Instruments {
		dt := si.Validity.Outside(amb)
		if dt <= 0 {
			continue
		}
		if out == nil {
			cp := *s
			cp.Instruments = make(map[string]StationInstrument, len(s.Instruments))
			for r, x := range s.Instruments {
				cp.Instruments[r] = x
			}
			out = &cp
		}
		si.Accuracy = si.Validity.Widen(si.Accuracy, dt)
		specs := make([]Accuracy, len(si.Specs))
		for i, a := range si.Specs {
			specs[i] = si.Validity.Widen(a, dt)
		}
		si.Specs = specs
		out.Instruments[role] = si
	}
	if out == nil {
		return s
	}
	return out
}

// ambientRef fills what ref says of the instrument's specs at the run's
// ambient: the distance outside the spec's band and the widened specs, when
// the ambient lies outside it.
func ambientRef(ref *InstrumentRef, si StationInstrument, c Conditions) {
	amb, ok := c.Ambient()
	if !ok {
		return
	}
	dt := si.Validity.Outside(amb)
	if dt <= 0 {
		return
	}
	ref.OutsideBandC = round6(dt)
	w := si
	w.Accuracy = si.Validity.Widen(si.Accuracy, dt)
	w.Specs = nil
	for _, a := range si.Specs {
		w.Specs = append(w.Specs, si.Validity.Widen(a, dt))
	}
	ref.AccuracyAtAmbient = w.AccuracyText()
}

// instrumentRef is what a record keeps of one role's instrument before it has
// identified itself: the station file's declarations and, at the run's
// ambient, how its specs were applied.
func instrumentRef(role string, si StationInstrument, c Conditions) InstrumentRef {
	ref := InstrumentRef{Role: role, Kind: si.Kind, Address: si.Address, Asset: si.Asset, Accuracy: si.AccuracyText(),
		CalCertificate: si.CalCertificate, CalLab: si.CalLab, SpecPeriod: si.Validity.Period}
	if !si.CalDue.IsZero() {
		ref.CalDue = si.CalDue.Format("2006-01-02")
	}
	if !si.CalDate.IsZero() {
		ref.CalDate = si.CalDate.Format("2006-01-02")
	}
	if v := si.Validity; v.HasBand {
		ref.SpecBand = &TempBand{LowC: v.LowC, HighC: v.HighC}
		ref.Tempco = v.TempcoText()
	}
	ambientRef(&ref, si, c)
	return ref
}

// String is the band in words: "18 °C to 28 °C".
func (b TempBand) String() string { return fmtC(b.LowC) + " to " + fmtC(b.HighC) }
