package certificate

// How the run adjusted the unit decides a few words of the certificate: a unit
// corrected by firmware coefficients alone has no trim DAC, so it has no trim
// codes to list and was not "trimmed" but corrected. A record with trim codes
// (with or without coefficients) reads as it always did.

// byCoefficients reports whether the record's adjustment is by firmware
// correction coefficients alone: coefficients written or attempted, and no
// trim code.
func (d *doc) byCoefficients() bool {
	return len(d.rec.Coefficients) > 0 && len(d.rec.Trims) == 0
}

// adjustedWord is the label of the ideal transfer in the identification
// block: "Trimmed to", or "Corrected to" for a unit corrected by coefficients.
func (d *doc) adjustedWord() string {
	if d.byCoefficients() {
		return "Corrected to"
	}
	return "Trimmed to"
}

// adjustNoun is what the plots call the adjustment: "trim", or "correction"
// for a unit corrected by coefficients.
func (d *doc) adjustNoun() string {
	if d.byCoefficients() {
		return "correction"
	}
	return "trim"
}
