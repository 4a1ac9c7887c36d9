package certificate_test

import (
	"strings"
	"testing"

	"trimline/sequencer"
)

// withCalibration gives the sample record's source and meter what a station
// file with calibration: and spec: blocks records.
func withCalibration(rec *sequencer.Record) *sequencer.Record {
	band := &sequencer.TempBand{LowC: 18, HighC: 28}
	for i := range rec.Instruments {
		in := &rec.Instruments[i]
		switch in.Role {
		case "source":
			in.CalDate, in.CalCertificate, in.CalLab = "2025-10-01", "NVC-25-01234", "Northvale Calibration Services"
			in.SpecPeriod, in.SpecBand, in.Tempco = "1 year", band, "±(2 ppm of reading + 0.5 ppm of range) per °C"
		case "meter":
			in.CalDate, in.CalCertificate, in.CalLab = "2025-06-16", "KML-25-00777", "Kestrel Metrology Laboratory"
			in.SpecPeriod, in.SpecBand, in.Tempco = "1 year", band, "±(3 ppm of reading + 0.5 ppm of range) per °C"
		}
	}
	return rec
}

// The instrument table lists each reference's calibration (date, certificate,
// laboratory) and when its spec holds; the traceability statement names the
// certificates.
func TestCalibrationIsListed(t *testing.T) {
	text := pdfText(t, render(t, withCalibration(sampleRecord()), opt))
	requireText(t, text, "calibrated 2025-06-16", "certificate KML-25-00777", "Kestrel Metrology Laboratory",
		"1 year spec, holds 18 °C to 28 °C; outside, ±(3 ppm of reading + 0.5 ppm of range) per °C",
		"calibration certificate NVC-25-01234 of Northvale Calibration Services",
		"The results are traceable to the SI")
	if strings.Contains(text, "SIMULATED") {
		t.Error("a record of real instruments is marked simulated")
	}
}

// How the specs were applied at the ambient, in the certificate's words:
// assumed to hold without an ambient (the band named), as written within the
// band, widened (by how much) outside it. The numbers are the record's: the
// meter's 30 ppm + 4 ppm at 3 °C above 18–28 °C with 3 ppm + 0.5 ppm per °C is
// 39 ppm + 5.5 ppm (sequencer's TestTempcoWidensTheSpecOutsideItsBand).
func TestSpecsAppliedAtTheAmbient(t *testing.T) {
	rec := withCalibration(sampleRecord())
	rec.Conditions = sequencer.Conditions{}
	requireText(t, pdfText(t, render(t, rec, opt)),
		"The ambient temperature was not recorded, so the specifications were assumed to hold: they hold only within their temperature bands (source 18 °C to 28 °C and meter 18 °C to 28 °C).")

	rec.Conditions = sequencer.Conditions{AmbientC: 23.1, AmbientSource: "entered"}
	requireText(t, pdfText(t, render(t, rec, opt)),
		"The ambient temperature 23.1 °C lay within the temperature band of every specification (source 18 °C to 28 °C and meter 18 °C to 28 °C): the specifications were applied as written.")

	rec.Conditions = sequencer.Conditions{AmbientC: 31, AmbientSource: "entered"}
	rec.Instruments[1].OutsideBandC = 3
	rec.Instruments[1].AccuracyAtAmbient = "±(39 ppm of reading + 5.5 ppm of range), range 10 V"
	requireText(t, pdfText(t, render(t, rec, opt)),
		"The ambient temperature 31.0 °C lay outside the temperature band of a specification, so the uncertainties use that specification widened by its temperature coefficient for each degree outside the band: the meter's (band 18 °C to 28 °C, 3 °C outside it) by ±(3 ppm of reading + 0.5 ppm of range) per °C × 3 °C, to ±(39 ppm of reading + 5.5 ppm of range), range 10 V.",
		"used at 3 °C outside the band:")
}

// A record of a simulated run carries the mark on every page, claims no
// traceability and labels its times as the simulated bench's.
func TestSimulatedRunIsMarkedOnEveryPage(t *testing.T) {
	rec := withCalibration(sampleRecord())
	rec.Simulated = &sequencer.Simulation{Mark: sequencer.SimulatedMark, Roles: []string{"source", "meter"}, BenchClock: true}
	text := pdfText(t, render(t, rec, opt))
	pages := strings.Split(strings.TrimSuffix(text, "\f"), "\f")
	if len(pages) < 2 {
		t.Fatalf("%d pages", len(pages))
	}
	for i, p := range pages {
		if !strings.Contains(p, "SIMULATED BENCH — NOT A MEASUREMENT") {
			t.Errorf("page %d lacks the mark", i+1)
		}
	}
	requireText(t, text,
		"Nothing on this certificate is traceable to the SI: the source and meter roles were bound to simulated instruments",
		"simulated-bench time, not the time of day",
		"Its times are simulated-bench times")
	if strings.Contains(text, "The results are traceable to the SI") {
		t.Error("a simulated run claims traceability")
	}
}
