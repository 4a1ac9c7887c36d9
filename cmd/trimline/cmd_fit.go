package main

import (
	"context"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"strconv"

	"trimline/sequencer/fit"
)

func newFitCmd() *command {
	c := &command{
		UsageLine: "trimline fit [--order 1|2] [--x0 X] [--at X] [--u-y U] [--json] FILE.csv",
		Short:     "fit a line or quadratic to x,y data (bench characterisation)",
		Long: `Reads two columns x,y (a third column, if present, is each point's standard
uncertainty and makes the fit weighted); a header line is optional; separators are
commas, semicolons, tabs or spaces. Fits y = b0 + b1·(x−x0) [+ b2·(x−x0)²] by a QR
least-squares solver and prints the coefficients with their standard uncertainties,
their correlation, the residual standard deviation, the degrees of freedom and R².

Without per-point uncertainties the coefficient uncertainties come from the residual
scatter (s²·(XᵀX)⁻¹). With them (a third column, or --u-y for every point) the fit is
weighted by 1/u² and the uncertainties are taken as known ((XᵀWX)⁻¹); the printed
χ²/dof tells whether the scatter agrees with them. --at X adds the predicted y at X
with its standard uncertainty, propagated through the coefficient covariance
(JCGM 100:2008 §5.2, with the correlation term).`,
	}
	order := c.Flag.Int("order", 1, "polynomial `order`: 1 (line) or 2 (quadratic)")
	x0 := c.Flag.Float64("x0", 0, "centre `X` of the model")
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
		if u != nil {
			r, err = fit.Weighted(x, y, u, *order, *x0, true)
		} else {
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
		if *asJSON {
			e := json.NewEncoder(e.stdout)
			e.SetIndent("", "  ")
			out := map[string]any{
				"order": r.Order, "x0": r.X0, "n": r.N, "weighted": u != nil,
				"coefficients": r.Coef, "std_uncertainties": r.StdUnc, "covariance": r.Cov,
				"residual_sd": jsonNum(r.ResidualSD), "dof": r.DOF, "r_squared": jsonNum(r.RSquared),
			}
			if at.set {
				out["prediction"] = map[string]float64{"x": at.v, "y": py, "u": pu}
			}
			return e.Encode(out)
		}
		w := e.stdout
		fmt.Fprintf(w, "model: y = b0 + b1·(x − %g)", r.X0)
		if r.Order == 2 {
			fmt.Fprintf(w, " + b2·(x − %g)²", r.X0)
		}
		fmt.Fprintf(w, "   (%d points", r.N)
		if u != nil {
			fmt.Fprint(w, ", weighted by the third column")
		}
		fmt.Fprint(w, ")\n\n")
		for i := range r.Coef {
			fmt.Fprintf(w, "  b%d = %- .15g   u(b%d) = %.6g\n", i, r.Coef[i], i, r.StdUnc[i])
		}
		fmt.Fprintln(w, "\ncorrelation:")
		for i := range r.Coef {
			fmt.Fprint(w, " ")
			for j := range r.Coef {
				fmt.Fprintf(w, " %+.6f", r.Corr(i, j))
			}
			fmt.Fprintln(w)
		}
		if u != nil {
			fmt.Fprintf(w, "\nχ²/dof = %.4g   dof = %d   R² = %.12f   (uncertainties taken as known)\n", r.ResidualSD*r.ResidualSD, r.DOF, r.RSquared)
		} else {
			fmt.Fprintf(w, "\nresidual SD = %.6g   dof = %d   R² = %.12f\n", r.ResidualSD, r.DOF, r.RSquared)
		}
		if at.set {
			fmt.Fprintf(w, "\nat x = %g:  y = %.10g   u(y) = %.6g\n", at.v, py, pu)
		}
		return nil
	}
	return c
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
