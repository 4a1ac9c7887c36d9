package certificate_test

import (
	"strings"
	"testing"

	"trimline/limits"
	"trimline/sequencer"
)

// A record with temperature coefficients: the record writes offset_tc in V and
// gain_tc as a ratio, the limit file judges offset_tc in "uV" (µV per °C), and
// the certificate prints each per °C. offset drift = −731e−6 V/°C → −731 µV/°C,
// U = 11e−6 → 11 µV/°C, tolerance −1500 … 1500 µV/°C; gain drift = −32.4e−6 per
// °C, no limit uses it → −32.4 ppm/°C among the other results.
func TestTempcoPerDegree(t *testing.T) {
	rec := sampleRecord()
	rec.Results = append(rec.Results,
		sequencer.Result{Name: "offset drift", Quantity: sequencer.AdjustOffsetTC, Unit: "V", Value: -731e-6, Valid: true,
			Unc: unc(5.5e-6, 40, 2, "A")},
		sequencer.Result{Name: "gain drift", Quantity: sequencer.AdjustGainTC, Unit: "ratio", Value: -32.4e-6, Valid: true})
	d := decide("offset drift", -731, ptr(-1500), ptr(1500), "simple", 0, false, 5.5, 2, 40)
	d.Statement = "Judged by simple acceptance: the measured value −731 µV with U = 11 µV lies in the pass zone."
	rec.Outcomes = append(rec.Outcomes, limits.Outcome{Name: "offset drift in range", Unit: "uV", Pass: true,
		Uses: []string{"offset drift"}, Values: map[string]float64{"offset drift": -731}, Decision: d})
	text := flat(pdfText(t, render(t, rec, opt)))
	requireText(t, text,
		"−731 µV/°C ± 11 µV/°C",
		"−1500 … 1500 µV/°C",
		"the measured value −731 µV/°C with U = 11 µV/°C lies",
		"−32.4 ppm/°C",
	)
	for _, bad := range []string{"−731 µV ±", "−32.4 ppm "} {
		if strings.Contains(text, bad) {
			t.Errorf("certificate prints %q without per °C", bad)
		}
	}
}
