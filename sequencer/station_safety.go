package sequencer

// The station file's safety section: the source's own rating and the caps under it.

import (
	"fmt"
	"math"

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

func positiveFinite(v float64) bool { return v > 0 && !math.IsInf(v, 0) && !math.IsNaN(v) }

// fmtA writes a current with its unit, e.g. "10 mA".
func fmtA(a float64) string {
	if math.IsInf(a, 0) || math.IsNaN(a) {
		return fmt.Sprint(a)
	}
	return units.Format(a, "A", 4)
}
