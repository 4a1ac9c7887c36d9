package sequencer

// The station file's safety section: the source's own rating and the caps under it.

import (
	"fmt"
	"math"
	"strconv"
	"strings"

	"trimline/instruments/files"
	"trimline/instruments/units"
)

// Rating is a source's own output rating, from its data sheet: the largest |level|
// it can program, volts, and the largest current it can deliver, amperes.
type Rating struct {
	Volts, Amps float64
}

// ratingDecl is the rating as the station file writes it:
// source_rating: {voltage: 100 mV, current: 20 mA}.
type ratingDecl struct {
	Voltage *units.Voltage `yaml:"voltage"`
	Current *units.Current `yaml:"current"`
}

// rating checks safety.source_rating: required, both terms finite and positive.
func rating(doc *files.Doc, d *ratingDecl, errs *files.List) Rating {
	bad := func(path, format string, args ...any) { *errs = append(*errs, doc.Errorf(path, format, args...)) }
	if d == nil {
		bad("$.safety.source_rating", "missing required key \"source_rating\": the source's own output rating from its data sheet, e.g. source_rating: {voltage: 10 V, current: 100 mA}; the caps may not exceed it")
		return Rating{}
	}
	var r Rating
	if d.Voltage == nil {
		bad("$.safety.source_rating.voltage", "missing required key \"voltage\": the largest level the source can program, e.g. 10 V")
	} else if r.Volts = float64(*d.Voltage); !positiveFinite(r.Volts) {
		bad("$.safety.source_rating.voltage", "expected a finite positive voltage such as 10 V, found %s", fmtV(r.Volts))
		r.Volts = 0
	}
	if d.Current == nil {
		bad("$.safety.source_rating.current", "missing required key \"current\": the largest current the source can deliver, e.g. 100 mA")
	} else if r.Amps = float64(*d.Current); !positiveFinite(r.Amps) {
		bad("$.safety.source_rating.current", "expected a finite positive current such as 100 mA, found %s", fmtA(r.Amps))
		r.Amps = 0
	}
	return r
}

// caps checks the safety caps: present, finite, positive and no larger than the
// source's rating r (a rating term already refused is 0 and bounds nothing). It
// returns the caps in volts and amperes.
func caps(doc *files.Doc, v *units.Voltage, a *units.Current, r Rating, errs *files.List) (volts, amps float64) {
	bad := func(path, format string, args ...any) { *errs = append(*errs, doc.Errorf(path, format, args...)) }
	if v == nil {
		bad("$.safety.max_source_voltage", "missing required key \"max_source_voltage\": the engine refuses to run without a cap on the source level")
	} else if volts = float64(*v); !positiveFinite(volts) {
		bad("$.safety.max_source_voltage", "expected a finite positive voltage no larger than source_rating.voltage, found %s", fmtV(volts))
	} else if r.Volts > 0 && volts > r.Volts {
		bad("$.safety.max_source_voltage", "the cap of %s is above the source's own rating of %s (source_rating.voltage): lower it to what the bench needs",
			fmtV(volts), fmtV(r.Volts))
	}
	if a == nil {
		bad("$.safety.max_source_current", "missing required key \"max_source_current\": the engine refuses to run without a cap on the source current")
	} else if amps = float64(*a); !positiveFinite(amps) {
		bad("$.safety.max_source_current", "expected a finite positive current no larger than source_rating.current, found %s", fmtA(amps))
	} else if r.Amps > 0 && amps > r.Amps {
		bad("$.safety.max_source_current", "the cap of %s is above the source's own rating of %s (source_rating.current): lower it to what the bench needs",
			fmtA(amps), fmtA(r.Amps))
	}
	return volts, amps
}

func positiveFinite(v float64) bool { return v > 0 && finite(v) }

// fmtA writes a current with its unit, e.g. "10 mA".
func fmtA(a float64) string {
	if math.IsInf(a, 0) || math.IsNaN(a) {
		return fmt.Sprint(a)
	}
	return units.Format(a, "A", 4)
}

// HazardousDCVolts is the d.c. level above which IEC 61010-1 §6.3.1 deems an
// accessible voltage hazardous live in normal condition. From memory, not read
// from the standard: the 2nd edition (2001) gives 30 V r.m.s., 42.4 V peak and
// 60 V d.c.; the 3rd edition (2010) 33 V r.m.s., 46.7 V peak and 70 V d.c. The
// source programs d.c. levels, so the d.c. level applies, and the lower of the two
// editions is used so that the rule holds under either.
const HazardousDCVolts = 60.0

// hazard refuses a voltage cap above HazardousDCVolts on a station without a
// fixture interlock: the engine could then drive a hazardous voltage into a fixture
// whose lid nothing watches.
func hazard(doc *files.Doc, st *Station, errs *files.List) {
	if st.MaxSourceVolts > HazardousDCVolts && st.Interlock == nil {
		*errs = append(*errs, doc.Errorf("$.safety.max_source_voltage",
			"the cap of %s is above the hazardous-live level of %s d.c. (IEC 61010-1 §6.3.1, normal condition, 2nd edition; 70 V in the 3rd): "+
				"a station that can drive it needs a fixture interlock that removes the source output when the lid opens (interlock: role, query, closed), or a lower cap",
			fmtV(st.MaxSourceVolts), fmtV(HazardousDCVolts)))
	}
}

// maxStationID is the longest station id or certificate prefix: certificate numbers
// add "-ENG" for engineering runs and "-000001", and file names the serial.
const maxStationID = 16

// stationIDRule says which station ids and certificate prefixes are allowed.
const stationIDRule = "1 to 16 characters of A–Z, 0–9 and '-', beginning and ending with a letter or digit"

// validStationID reports whether id follows stationIDRule: it stands in every
// certificate number (TL1-000042) and in file names (TL1-000042_BRX-00001.pdf,
// keys/TL1.key) on every file system, including case-insensitive ones, so no
// lowercase, spaces, separators or dots.
func validStationID(id string) bool {
	if id == "" || len(id) > maxStationID || id[0] == '-' || id[len(id)-1] == '-' {
		return false
	}
	for _, c := range id {
		if !(c >= 'A' && c <= 'Z' || c >= '0' && c <= '9' || c == '-') {
			return false
		}
	}
	return true
}

// stationIDs checks station.id and station.certificate_prefix against the rule.
func stationIDs(doc *files.Doc, id, prefix string, errs *files.List) {
	for _, k := range []struct{ key, v string }{{"id", id}, {"certificate_prefix", prefix}} {
		if strings.TrimSpace(k.v) == "" || validStationID(k.v) {
			continue
		}
		hint := ""
		if s := suggestID(k.v); s != "" {
			hint = ", e.g. " + s
		}
		*errs = append(*errs, doc.Errorf("$.station."+k.key,
			"%s %q cannot stand in certificate numbers and file names: use %s%s", k.key, k.v, stationIDRule, hint))
	}
}

// suggestID makes a valid id of s, or "".
func suggestID(s string) string {
	var b strings.Builder
	for _, c := range strings.ToUpper(s) {
		if c >= 'A' && c <= 'Z' || c >= '0' && c <= '9' || c == '-' {
			b.WriteRune(c)
		}
	}
	out := strings.Trim(b.String(), "-")
	if len(out) > maxStationID || !validStationID(out) {
		return ""
	}
	return out
}

// DefaultSafeTemperature is the safe temperature of a station file that names
// none, °C: room temperature. It is a set point: the engine commands every
// chamber there when a run ends, and the chamber takes its time to get there; a
// unit can be taken out by hand once the chamber reads within the handling band
// of it (see HandlingBand), which the engine checks at the end of a run.
const DefaultSafeTemperature = 25.0

// DefaultHandlingBand is the handling band of a station file that names none,
// °C: a chamber within 5 °C of the safe temperature can be opened by hand.
const DefaultHandlingBand = 5.0

// handlingBand checks safety.handling_band: a temperature difference in °C,
// positive and finite.
func handlingBand(doc *files.Doc, st *Station, q *units.Quantity, errs *files.List) {
	st.HandlingBand = DefaultHandlingBand
	if q == nil {
		return
	}
	if q.Dim != units.Celsius || !finite(q.Value) || q.Value <= 0 {
		*errs = append(*errs, doc.Errorf("$.safety.handling_band", "expected a positive temperature difference such as 5 °C"))
		return
	}
	st.HandlingBand = q.Value
}

// temperatures checks safety.safe_temperature, min_temperature and
// max_temperature: each a temperature in °C, min below max, the safe
// temperature between them.
func temperatures(doc *files.Doc, st *Station, safe, lo, hi *units.Quantity, errs *files.List) {
	bad := func(path, format string, args ...any) { *errs = append(*errs, doc.Errorf(path, format, args...)) }
	get := func(key string, q *units.Quantity) (float64, bool) {
		if q == nil {
			return 0, false
		}
		if q.Dim != units.Celsius || !finite(q.Value) {
			bad("$.safety."+key, "expected a temperature such as 25 °C")
			return 0, false
		}
		return q.Value, true
	}
	st.SafeTemperature = DefaultSafeTemperature
	if v, ok := get("safe_temperature", safe); ok {
		st.SafeTemperature = v
	}
	st.MinTemperature, st.HasMinTemperature = get("min_temperature", lo)
	st.MaxTemperature, st.HasMaxTemperature = get("max_temperature", hi)
	switch {
	case st.HasMinTemperature && st.HasMaxTemperature && st.MinTemperature >= st.MaxTemperature:
		bad("$.safety.max_temperature", "expected max_temperature above min_temperature (%s), found %s", fmtC(st.MinTemperature), fmtC(st.MaxTemperature))
	case !st.TemperatureAllowed(st.SafeTemperature):
		path := "$.safety.safe_temperature"
		if safe == nil {
			path = "$.safety"
		}
		bad(path, "the safe temperature %s is outside the station's temperature caps (%s): the engine could not return the chamber there", fmtC(st.SafeTemperature), st.temperatureCapsText())
	}
}

// TemperatureAllowed reports whether a set point of c °C is within the
// station's temperature caps.
func (s *Station) TemperatureAllowed(c float64) bool {
	return !(s.HasMinTemperature && c < s.MinTemperature) && !(s.HasMaxTemperature && c > s.MaxTemperature)
}

// temperatureCapsText says the station's temperature caps in words.
func (s *Station) temperatureCapsText() string {
	switch {
	case s.HasMinTemperature && s.HasMaxTemperature:
		return fmt.Sprintf("%s to %s", fmtC(s.MinTemperature), fmtC(s.MaxTemperature))
	case s.HasMinTemperature:
		return "at least " + fmtC(s.MinTemperature)
	case s.HasMaxTemperature:
		return "at most " + fmtC(s.MaxTemperature)
	}
	return "none"
}

// fmtC writes a temperature, e.g. "85 °C".
func fmtC(c float64) string { return strconv.FormatFloat(c, 'g', 6, 64) + " °C" }
