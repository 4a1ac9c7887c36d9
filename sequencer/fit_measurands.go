package sequencer

// What a fit says beyond its line: whether the straight-line model is adequate
// (its lack of fit judged), and the line's uncertainty from its residuals when
// the sequence asks for it.

import (
	"fmt"
	"math"

	"trimline/sequencer/uncertainty"
)

// LackOfFitAlpha is the significance level below which a fit's lack-of-fit
// probability says the model does not describe the measurement (JCGM 100
// §4.1.2: the model must describe it): p < 0.01. The level is common practice
// (NIST/SEMATECH e-Handbook §4.4.4 leaves it to the user; 1 % keeps a fit
// that merely looks unlucky from being called inadequate).
const LackOfFitAlpha = 0.01

// judge records the criterion and its outcome (records of metrology revision
// 1 on).
func (l *LackOfFit) judge() {
	l.Alpha = LackOfFitAlpha
	l.Adequate = l.P >= LackOfFitAlpha
}

// Judged reports whether the record judged the model's adequacy (Alpha is
// set), and if so, whether the straight line describes the points.
func (l *LackOfFit) Judged() (adequate, judged bool) {
	if l == nil || l.Alpha == 0 || math.IsNaN(l.P) {
		return false, false
	}
	return l.Adequate, true
}

// fromResiduals replaces the line and its uncertainty by those of the
// residual scatter (uncertainty.FitLineResiduals, JCGM 100 H.3): an ordinary
// least-squares line whose random part is the residual standard deviation with
// n − 2 degrees of freedom, in place of the readings' pooled standard deviation
// and the resolution; the four systematic specs still apply. The lack-of-fit
// statistic is made again against the new residuals and the readings'
// uncertainties (it judges the model, whatever the line's uncertainty).
func (a *analysis) fromResiduals(fullScale float64) error {
	lf, _, err := uncertainty.FitLineResiduals(a.sw)
	if err != nil {
		return err
	}
	a.lf = lf
	s := &a.sum
	s.Intercept, s.Slope = lf.B0, lf.B1
	s.Cov, s.CovTotal = lf.CovRandom, lf.Cov
	s.DOFEff, s.Residuals, s.DOF = lf.DOFB0, lf.Residuals, lf.ResidualDOF
	s.Random = RandomResiduals
	s.LackOfFit = lackOfFit(a.sw, s.Residuals, 2)
	var rss, maxAbs float64
	for _, r := range s.Residuals {
		rss += r * r
		maxAbs = math.Max(maxAbs, math.Abs(r))
	}
	s.ResidualSD = math.Sqrt(rss / float64(s.DOF))
	s.Nonlinearity = maxAbs / fullScale
	return nil
}

// The offsets a trim or a coefficients step can bring to the ideal (their
// offset: key).
const (
	OffsetLine     = "line"     // the best-fit line's output at zero input (the intercept)
	OffsetTerminal = "terminal" // the output measured at zero input
)

// checkOffsetChoice checks a step's offset: key (defaulting it to the line)
// and, for the terminal offset, that the fit it names has a level at zero
// input; fit is nil when the step names no earlier fit (reported already).
func checkOffsetChoice(c *Checker, offset *string, fit *StepDecl) {
	switch *offset {
	case "":
		*offset = OffsetLine
	case OffsetLine:
	case OffsetTerminal:
		if fit == nil {
			return
		}
		if fs, ok := fit.Step.(*fitStep); ok && !fs.hasZero {
			c.Errorf("offset", "offset: terminal trims the output measured at zero input: expected a level of 0 %s in %s (fit %q)", unitOf(c.Sequence().stimDim()), fs.levelsText(), fit.Name)
		}
	default:
		c.Errorf("offset", "expected line (the best-fit line's output at zero input) or terminal (the output measured at zero input), found %q", *offset)
	}
}

// offsetAt is the output at zero input a trim solves its offset for, with
// its standard uncertainty: the fit's intercept (OffsetLine) or the mean
// output measured at zero input (OffsetTerminal, that point's own
// uncertainty, pointErrorU).
func (fk fitKept) offsetAt(which string) (y0, u0 float64, err error) {
	if which == OffsetTerminal {
		if fk.term == nil {
			return 0, 0, fmt.Errorf("the fit has no point at zero input")
		}
		return fk.term.y0, fk.term.std, nil
	}
	return fk.a.sum.Intercept, math.Sqrt(fk.a.cov()[0][0]), nil
}
