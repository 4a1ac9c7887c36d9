package certificate_test

import "testing"

// The PFA column is the specific false-accept probability of the unit
// measured, the probability that its true value is outside the tolerance given
// its measured value (JCGM 106:2012 §9.5, the specific risk), not ANSI/NCSL
// Z540.3-2006's global PFA over a population: the footnote says which.
func TestPFAFootnoteNamesSpecificRisk(t *testing.T) {
	requireText(t, pdfText(t, render(t, sampleRecord(), opt)),
		"PFA: the specific false-accept probability of this unit",
		"the specific risk of JCGM 106:2012 §9.5",
		"not the global PFA of ANSI/NCSL Z540.3-2006")
}
