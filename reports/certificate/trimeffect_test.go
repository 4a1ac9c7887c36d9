package certificate_test

import (
	"strings"
	"testing"

	"trimline/sequencer"
)

// A record whose largest error was evaluated by Monte Carlo of the maximum and
// which carries the trim's effect: the certificate states the method next to
// the maximum (JCGM 101, the number of points and trials, the interval and the
// bias as the record gives them, in the result's unit), and the trim-effect
// table gives the change with its u beside the u of independent fits, with the
// sentence that the verify sweep cannot detect the station's own errors.
func TestMaximumAndTrimEffectOnTheCertificate(t *testing.T) {
	rec := sampleRecord()
	for i, r := range rec.Results {
		if r.Name == "post_max_error" {
			r.Unc.Method = sequencer.MethodMaxMC
			r.Unc.Max = sequencer.MaxUnc{Points: 11, Trials: 20000, Mean: r.Value + 4e-6, Bias: 4e-6, Low: r.Value - 5e-6, High: r.Value + 12e-6}
			r.Unc.Expanded, r.Unc.K = 12e-6, 12e-6/r.Unc.Std
			rec.Results[i] = r
		}
	}
	rec.Results = append(rec.Results, sequencer.Result{Name: "trim_offset_change", Stage: sequencer.AsLeft, Step: "verify fit",
		Quantity: "offset_change", Value: -3.2184e-3, Unit: "V", Valid: true,
		Unc: sequencer.Uncertainty{Std: 3.24e-6, DOF: 163, K: 2.02, Expanded: 6.53e-6, Method: "GUM"}})
	rec.TrimEffects = []sequencer.TrimEffect{{Step: "verify fit", Baseline: "pre-trim fit", Result: "trim_offset_change",
		Quantity: "offset_change", Shared: []string{"meter gain", "meter offset", "source gain", "source offset"}, UIndependent: 107.5e-6}}
	text := pdfText(t, render(t, rec, opt))
	requireText(t, text,
		"uncertainty of a maximum: Monte Carlo of the maximum of 11 points, JCGM 101 (20000 trials",
		"post_max_error: interval",
		"Effect of the trim",
		"trim_offset_change", "from pre-trim fit to verify fit",
		"0.0033 mV", "0.11 mV", // u and u if independent in the change's unit, two significant digits rounded up
		"The verify sweep cannot detect errors of the station's own instruments: they are shared by both sweeps; their calibration covers them.",
	)
	// Without trim effects and maxima, neither appears.
	plain := pdfText(t, render(t, sampleRecord(), opt))
	for _, s := range []string{"Effect of the trim", "Monte Carlo of the maximum"} {
		if strings.Contains(flat(plain), s) {
			t.Errorf("a record without them shows %q", s)
		}
	}
}
