package certificate_test

import (
	"strings"
	"testing"

	"trimline/sequencer"
)

// measurandRecord is the sample record with what a record of metrology
// revision 1 says about its fits: the fit steps, the results' quantities and
// steps, a terminal offset, and a lack of fit judged at α = 0.01 (the verify
// fit's not adequate, χ²/ν = 131 on 9 dof, as on the demo's crossover units).
func measurandRecord(judged bool) *sequencer.Record {
	r := sampleRecord()
	steps := map[string]string{"pre-trim": "pre-trim fit", "verify": "verify fit"}
	for i := range r.Fits {
		f := &r.Fits[i]
		f.Step = steps[f.Sweep]
		f.LackOfFit = &sequencer.LackOfFit{Method: "chi2/dof", Statistic: 0.84, DOF1: 9, P: 0.58}
		if f.Sweep == "verify" {
			f.LackOfFit = &sequencer.LackOfFit{Method: "chi2/dof", Statistic: 131.2, DOF1: 9, P: 1e-30}
		}
		if judged {
			f.LackOfFit.Alpha, f.LackOfFit.Adequate = 0.01, f.LackOfFit.P >= 0.01
		}
	}
	for i := range r.Results {
		res := &r.Results[i]
		switch {
		case strings.HasPrefix(res.Name, "pre_"):
			res.Step = "pre-trim fit"
		case strings.HasPrefix(res.Name, "post_"):
			res.Step = "verify fit"
		}
	}
	for i := range r.Trims {
		if r.Trims[i].DAC == "offset" && judged {
			r.Trims[i].Offset = sequencer.OffsetTerminal // the trim's offset: terminal
		}
	}
	r.Results = append(r.Results, sequencer.Result{Name: "post_terminal_offset", Step: "verify fit", Quantity: "terminal_offset",
		Value: -126e-6, Unit: "V", Valid: true, Unc: unc(88e-6, 1e4, 2, "GUM")})
	return r
}

// The certificate says which offset each limit judges, shows the lack of fit
// and says in plain words when the straight line is not adequate (JCGM
// 100:2008 §4.1.2), naming its criterion.
func TestCertificateNamesMeasurands(t *testing.T) {
	text := pdfText(t, render(t, measurandRecord(true), opt))
	requireText(t, text,
		"best-fit-line offset (fit “verify fit”)",                            // the post_offset limit's measurand line
		"Best-fit-line offset",                                               // the fits table's column
		"Line at 0 V in",                                                     // not "output at 0 V in": the line's value there
		"post_terminal_offset", "terminal offset at 0 V in (sweep “verify”)", // listed with the other results, saying what it is
		"Lack of fit", "χ²/ν 131", "ν 9 · p < 0.0001", "not adequate",
		"p < 0.01 (a 1 % significance level, common practice)", "JCGM 100:2008 §4.1.2",
		"The straight-line model is not adequate for fit “verify fit”",
		"the straight-line model is not adequate for fit “verify fit” (JCGM 100:2008 §4.1.2)", // page 1
		"†", "to the terminal offset", "† At 0 V in the error is the terminal offset")
	if strings.Contains(flat(text), "not adequate for fits “pre-trim fit”") {
		t.Error("the pre-trim fit (p = 0.58) is called not adequate")
	}
}

// A record made before the model was judged (metrology revision 0) shows its
// lack of fit but no judgement the record did not make.
func TestCertificateOldRecordNoAdequacy(t *testing.T) {
	text := flat(pdfText(t, render(t, measurandRecord(false), opt)))
	requireText(t, text, "Lack of fit", "χ²/ν 131")
	for _, no := range []string{"not adequate", "Criterion:", "to the terminal offset"} {
		if strings.Contains(text, no) {
			t.Errorf("a record that did not judge its model says %q", no)
		}
	}
}

// A quadratic's offset is the curve's value at 0 V in, and the certificate
// says so rather than calling it a line's.
func TestCertificateQuadraticMeasurand(t *testing.T) {
	r := measurandRecord(true)
	for i := range r.Fits {
		if r.Fits[i].Sweep == "verify" {
			r.Fits[i].Order = 2
		}
	}
	text := pdfText(t, render(t, r, opt))
	requireText(t, text, "best-fit-quadratic offset (fit “verify fit”)", "best-fit-line offset (fit “pre-trim fit”)",
		"a quadratic's gain and line at 0 V in: its slope and value at 0 V")
}
