package main

import (
	"context"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"os"
	"strconv"

	"trimline/sequencer/fit"
	"trimline/sequencer/uncertainty"
)

func newFitCmd() *command {
	c := &command{
		UsageLine: "trimline fit [--order 1|2 | --through-origin] [--x0 X] [--at X] [--u-y U] [--json] FILE.csv",
		Short:     "fit a line or quadratic to x,y data (bench characterisation)",
		Long: `Reads two columns x,y (a third column, if present, is each point's standard
uncertainty and makes the fit weighted); a header line is optional; separators are
commas, semicolons, tabs or spaces. Fits y = b0 + b1·(x−x0) [+ b2·(x−x0)²] by a QR
least-squares solver and prints the coefficients with their standard uncertainties,
their correlation, the residual standard deviation, the degrees of freedom and R².
--through-origin fits the line y = b1·x instead (no constant term, one coefficient);
its R² is the uncentred one, 1 − RSS/Σy², as NIST StRD certifies it for such models.

Without per-point uncertainties the coefficient uncertainties come from the residual
scatter (s²·(XᵀX)⁻¹). With them (a third column, or --u-y for every point) the fit is
weighted by 1/u² and the uncertainties are taken as known ((XᵀWX)⁻¹); the printed
χ²/dof tells whether the scatter agrees with them. --at X adds the predicted y at X
with its standard uncertainty, propagated through the coefficient covariance
(JCGM 100:2008 §5.2, with the correlation term).

Where an x value repeats, the fit is tested for lack of fit against pure error
(NIST/SEMATECH e-Handbook §4.4.4): the residual sum of squares splits into the
scatter of the replicates about their means (pure error) and the distance of those
means from the model (lack of fit); F = MS_LOF/MS_PE with its degrees of freedom and
p-value, a small p meaning the model does not describe the data. Without replicates,
or in a weighted fit (the F test assumes one common standard deviation; χ²/dof
tests the scatter there), no F test is made and the output says why.`,
	}
	order := c.Flag.Int("order", 1, "polynomial `order`: 1 (line) or 2 (quadratic)")
	x0 := c.Flag.Float64("x0", 0, "centre `X` of the model")
	origin := c.Flag.Bool("through-origin", false, "fit the line through the origin y = b1·x (no constant term)")
	asJSON := jsonFlag(c, "the fit (one object)")
	var at optFloat
	c.Flag.Var(&at, "at", "predict y and its standard uncertainty at `X`")
	var uy optFloat
	c.Flag.Var(&uy, "u-y", "standard uncertainty `U` of every y (overrides a third column)")
	c.Run = func(ctx context.Context, e *env, args []string) error {
		if len(args) != 1 {
			return usagef("name exactly one CSV file")
		}
		if *order != 1 && *order != 2 {
			return usagef("--order must be 1 or 2")
		}
		if *origin && *order != 1 {
			return usagef("--through-origin fits a line: it takes no --order 2")
		}
		if *origin && *x0 != 0 {
			return usagef("--through-origin fits y = b1·x: it takes no --x0")
		}
		f, err := os.Open(args[0])
		if err != nil {
			return badInput(err)
		}
		defer f.Close()
		x, y, u, err := fit.ReadXY(args[0], f)
		if err != nil {
			return badInput(err)
		}
		if uy.set {
			if !(uy.v > 0) {
				return usagef("--u-y must be a positive standard uncertainty")
			}
			u = make([]float64, len(y))
			for i := range u {
				u[i] = uy.v
			}
		}
		var r fit.Result
		switch {
		case *origin && u != nil:
			r, err = fit.WeightedOrigin(x, y, u, true)
		case *origin:
			r, err = fit.Origin(x, y)
		case u != nil:
			r, err = fit.Weighted(x, y, u, *order, *x0, true)
		default:
			r, err = fit.Poly(x, y, *order, *x0)
		}
		if err != nil {
			return fmt.Errorf("%s: %w", args[0], err)
		}
		var py, pu float64
		if at.set {
			if py, pu, err = r.Prediction(at.v); err != nil {
				return fmt.Errorf("%s: --at: %w", args[0], err)
			}
		}
		lof := lackOfFit(x, y, r, u != nil)
		if *asJSON {
			e := json.NewEncoder(e.stdout)
			e.SetIndent("", "  ")
			out := map[string]any{
				"order": r.Order, "x0": r.X0, "n": r.N, "weighted": u != nil,
				"coefficients": r.Coef, "std_uncertainties": r.StdUnc, "covariance": r.Cov,
				"residual_sd": jsonNum(r.ResidualSD), "dof": r.DOF, "r_squared": jsonNum(r.RSquared),
				"through_origin": r.ThroughOrigin, "lack_of_fit": lof.json(),
			}
			if at.set {
				out["prediction"] = map[string]float64{"x": at.v, "y": py, "u": pu}
			}
			return e.Encode(out)
		}
		w := e.stdout
		if r.ThroughOrigin {
			fmt.Fprint(w, "model: y = b1·x (through the origin)")
		} else {
			fmt.Fprintf(w, "model: y = b0 + b1·(x − %g)", r.X0)
			if r.Order == 2 {
				fmt.Fprintf(w, " + b2·(x − %g)²", r.X0)
			}
		}
		fmt.Fprintf(w, "   (%d points", r.N)
		switch {
		case uy.set:
			fmt.Fprint(w, ", weighted by --u-y")
		case u != nil:
			fmt.Fprint(w, ", weighted by the third column")
		}
		fmt.Fprint(w, ")\n\n")
		first := 0 // the name of Coef[0]: b0, or b1 through the origin
		if r.ThroughOrigin {
			first = 1
		}
		for i := range r.Coef {
			fmt.Fprintf(w, "  b%d = %- .15g   u(b%d) = %.6g\n", first+i, r.Coef[i], first+i, r.StdUnc[i])
		}
		if len(r.Coef) > 1 {
			fmt.Fprintln(w, "\ncorrelation:")
			for i := range r.Coef {
				fmt.Fprint(w, " ")
				for j := range r.Coef {
					fmt.Fprintf(w, " %+.6f", r.Corr(i, j))
				}
				fmt.Fprintln(w)
			}
		}
		r2 := "R²"
		if r.ThroughOrigin {
			r2 = "R² (uncentred)"
		}
		if u != nil {
			fmt.Fprintf(w, "\nχ²/dof = %.4g   dof = %d   %s = %.12f   (uncertainties taken as known)\n", r.ResidualSD*r.ResidualSD, r.DOF, r2, r.RSquared)
		} else {
			fmt.Fprintf(w, "\nresidual SD = %.6g   dof = %d   %s = %.12f\n", r.ResidualSD, r.DOF, r2, r.RSquared)
		}
		lof.text(w)
		if at.set {
			fmt.Fprintf(w, "\nat x = %g:  y = %.10g   u(y) = %.6g\n", at.v, py, pu)
		}
		return nil
	}
	return c
}

// fitLOF is the lack-of-fit test of a fit against pure error, or why none was
// made.
type fitLOF struct {
	test   *uncertainty.LOF // nil when no F test was made
	why    string           // the reason, when test is nil
	n      int
	levels int
}

// lackOfFit tests the fit r of the points (x, y) against pure error where x
// values repeat (uncertainty.LackOfFit, NIST/SEMATECH e-Handbook §4.4.4),
// for any model r is: its number of coefficients is the params of the test.
// A weighted fit is not tested: the F test assumes one common SD for all y.
func lackOfFit(x, y []float64, r fit.Result, weighted bool) fitLOF {
	seen := make(map[float64]bool, len(x))
	for _, v := range x {
		seen[v] = true
	}
	out := fitLOF{n: len(x), levels: len(seen)}
	params := len(r.Coef)
	switch {
	case weighted:
		out.why = "the fit is weighted and the pure-error F test assumes one common standard deviation; χ²/dof tests the scatter against the given uncertainties"
		return out
	case out.levels == out.n:
		out.why = "no x value is repeated, and the pure-error F test needs replicates"
		return out
	case out.levels <= params:
		out.why = fmt.Sprintf("%d distinct x for %d coefficient(s) leave no degree of freedom for lack of fit", out.levels, params)
		return out
	}
	fitted := make([]float64, len(x))
	for i := range x {
		fitted[i] = y[i] - r.Residuals[i]
	}
	test, err := uncertainty.LackOfFit(x, y, nil, fitted, params)
	if err != nil || test.Method != uncertainty.LOFF {
		out.why = "the repeated x values have identical y, so there is no pure error to test against"
		return out
	}
	out.test = &test
	return out
}

// text writes the lack-of-fit table, or one line saying why there is none.
func (l fitLOF) text(w io.Writer) {
	if l.test == nil {
		fmt.Fprintf(w, "\nlack of fit: not tested: %s\n", l.why)
		return
	}
	t := l.test
	fmt.Fprintf(w, "\nlack of fit (F test against pure error, NIST/SEMATECH e-Handbook §4.4.4; %d distinct x, %d points):\n", l.levels, l.n)
	fmt.Fprintf(w, "  %-12s %14s %5s %14s\n", "source", "SS", "dof", "MS")
	fmt.Fprintf(w, "  %-12s %14.6g %5d %14.6g\n", "lack of fit", t.SSLOF, t.DOF1, t.SSLOF/float64(t.DOF1))
	fmt.Fprintf(w, "  %-12s %14.6g %5d %14.6g\n", "pure error", t.SSPE, t.DOF2, t.SSPE/float64(t.DOF2))
	// The 5 % level is common practice (e-Handbook §4.4.4 uses it too).
	verdict := "no significant lack of fit at the 5 % level"
	if t.P < 0.05 {
		verdict = "significant lack of fit at the 5 % level: the model does not describe the data"
	}
	// p is 1 − CDF (gonum's F.Survival): good to about 1e-16 absolute, so
	// below 1e-10 only its order is told.
	p := fmt.Sprintf("p = %.3g", t.P)
	if t.P < 1e-10 {
		p = "p < 1e-10"
	}
	fmt.Fprintf(w, "  F = MS_LOF/MS_PE = %.6g on (%d, %d) dof   %s: %s\n", t.Statistic, t.DOF1, t.DOF2, p, verdict)
}

// json is the lack of fit for --json: the F test's numbers, or tested false
// with the reason.
func (l fitLOF) json() map[string]any {
	if l.test == nil {
		return map[string]any{"tested": false, "reason": l.why, "levels": l.levels}
	}
	t := l.test
	return map[string]any{
		"tested": true, "method": "F test against pure error (NIST/SEMATECH e-Handbook §4.4.4)",
		"levels": l.levels, "ss_lack_of_fit": t.SSLOF, "dof_lack_of_fit": t.DOF1,
		"ss_pure_error": t.SSPE, "dof_pure_error": t.DOF2, "f": t.Statistic, "p": t.P,
	}
}

// jsonNum keeps NaN out of JSON, which has no such number.
func jsonNum(v float64) any {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return nil
	}
	return v
}

// optFloat is a float flag that remembers whether it was given.
type optFloat struct {
	v   float64
	set bool
}

func (o *optFloat) String() string {
	if !o.set {
		return ""
	}
	return strconv.FormatFloat(o.v, 'g', -1, 64)
}

func (o *optFloat) Set(s string) error {
	v, err := strconv.ParseFloat(s, 64)
	if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
		return fmt.Errorf("expected a finite number, found %q", s)
	}
	o.v, o.set = v, true
	return nil
}
