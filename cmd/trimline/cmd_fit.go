package main

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"

	"trimline/sequencer/fit"
)

func init() { register(newFitCmd) }

func newFitCmd() *command {
	c := &command{
		Name:  "fit",
		Usage: "[--order 1|2] [--x0 X] [--json] FILE.csv",
		Short: "fit a line or quadratic to x,y data (bench characterisation)",
		Long: `Reads two columns x,y (a third column, if present, is each point's standard
uncertainty and makes the fit weighted); a header line is optional; separators are
commas, semicolons, tabs or spaces. Fits y = b0 + b1·(x−x0) [+ b2·(x−x0)²] by a QR
least-squares solver and prints the coefficients with their standard uncertainties,
their correlation, the residual standard deviation, the degrees of freedom and R².`,
		Flags: newFlags("fit"),
	}
	order := c.Flags.Int("order", 1, "polynomial `order`: 1 (line) or 2 (quadratic)")
	x0 := c.Flags.Float64("x0", 0, "centre `X` of the model")
	asJSON := c.Flags.Bool("json", false, "print a JSON object")
	c.Run = func(ctx context.Context, c *command, args []string) error {
		if len(args) != 1 {
			return usageErr("name exactly one CSV file")
		}
		if *order != 1 && *order != 2 {
			return usageErr("--order must be 1 or 2")
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
		var r fit.Result
		if u != nil {
			r, err = fit.Weighted(x, y, u, *order, *x0, false)
		} else {
			r, err = fit.Poly(x, y, *order, *x0)
		}
		if err != nil {
			if errors.Is(err, fit.ErrTooFewPoints) || errors.Is(err, fit.ErrSingular) || errors.Is(err, fit.ErrInvalidInput) {
				return badInput(fmt.Errorf("%s: %w", args[0], err))
			}
			return err
		}
		if *asJSON {
			e := json.NewEncoder(stdoutW)
			e.SetIndent("", "  ")
			return e.Encode(map[string]any{
				"order": r.Order, "x0": r.X0, "n": r.N,
				"coefficients": r.Coef, "std_uncertainties": r.StdUnc, "covariance": r.Cov,
				"residual_sd": jsonNum(r.ResidualSD), "dof": r.DOF, "r_squared": jsonNum(r.RSquared),
			})
		}
		w := stdoutW
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
		fmt.Fprintf(w, "\nresidual SD = %.6g   dof = %d   R² = %.12f\n", r.ResidualSD, r.DOF, r.RSquared)
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
