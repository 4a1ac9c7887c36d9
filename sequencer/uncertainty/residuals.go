package uncertainty

import "fmt"

// FitLineResiduals fits y = b0 + b1·(x − X0) to a Sweep by ordinary least
// squares and takes the random part of its uncertainty from the residual
// scatter, as JCGM 100 H.3 does: s = sqrt(RSS/(n − 2)) is the standard
// uncertainty of every y_i, with n − 2 degrees of freedom counted once
// (FitLineLS). It is the choice for a model the points' own uncertainties do
// not explain (a lack of fit, JCGM 100 §4.1.2): the residual scatter then
// holds the model's misfit as well as the readings' noise.
//
// s replaces the per-point inputs of FitLine (the Type A scatter of the means
// and the meter resolution: the residuals contain both), so URandom,
// DOFRandom and MeterResolution are not used; every point is weighted
// equally. The four shared systematic errors of the Sweep's specs (meter gain
// and offset, source gain and offset, or SourceZero) are independent of the
// scatter and are added as in FitLine: Cov = s²·(XᵀX)⁻¹ + CovSys. Budget has
// five rows: NameResidualScatter, then NameMeterGain … NameSourceOffset. It
// returns the fit and s (unit of y).
//
// Errors: those of Sweep's contract (wrapping ErrInvalidInput) and of
// FitLineLS (fewer than 3 points, all x equal). The Sweep is not modified.
// FitLineResiduals is safe for concurrent use.
func FitLineResiduals(s Sweep) (LineFit, float64, error) {
	const fn = "uncertainty.FitLineResiduals"
	if err := s.validate(fn); err != nil {
		return LineFit{}, 0, err
	}
	f, sd, err := FitLineLS(s.X, s.Y, s.X0)
	if err != nil {
		return LineFit{}, 0, fmt.Errorf("%s: %w", fn, err)
	}
	f.addShared(s)
	f.finish([]string{NameResidualScatter, NameMeterGain, NameMeterOffset, NameSourceGain, NameSourceOffset})
	return f, sd, nil
}
