package certificate_test

import (
	"testing"
	"time"

	"trimline/sequencer"
)

// A run with a soak: the sample record (run from t0 to t0 + 48.35 s) given a
// 25 s soak at its start and the soak's temperature on both sweeps. Page 1
// splits the run time into soak and test time (48.35 s − 25 s = 23.35 s, to
// the second 23 s); the soak table gives the set point and band, the dwell,
// the time from the set point to the band's last entry (t0 + 10 s − t0 = 10 s)
// and the mean ± sd over the dwell to 0.01 °C (85.075 → 85.08, 0.170783 →
// 0.17); the sweep titles and the fits table name 85.08 °C.
func TestSoakOnTheCertificate(t *testing.T) {
	rec := sampleRecord()
	t0 := rec.Started
	rec.Soaks = []sequencer.Soak{{Step: "hot soak", Role: "chamber", SetPoint: 85, Band: 0.5, Dwell: 15,
		Started: t0, Stable: t0.Add(10 * time.Second), Ended: t0.Add(25 * time.Second), MeanC: 85.075, SDC: 0.170783}}
	for i := range rec.Sweeps {
		rec.Sweeps[i].TempC, rec.Sweeps[i].TempKnown = 85.075, true
	}
	text := pdfText(t, render(t, rec, opt))
	requireText(t, text,
		"(run time 48s: soak time 25s, test time 23s)",
		"Temperature soaks",
		"hot soak (chamber)", "85.00 °C ± 0.5 °C", "15s", "10s", "85.08 °C ± 0.17 °C",
		"Sweep “pre-trim” (as found) · 85.08 °C",
	)
}
