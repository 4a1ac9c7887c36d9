package main

import (
	"context"
	"encoding/json"
	"flag"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"time"

	"trimline/reports/chart"
	"trimline/sequencer/spc"
)

func newChartCmd() *command {
	c := &command{
		UsageLine: "trimline chart [--column NAME] [--kind imr|ewma|cusum] [--lambda L] [--width L] [--target T] [--sigma S] [--k K] [--h H] [--json] [--pdf FILE] FILE.csv",
		Short:     "control chart of one column of a CSV file (I-MR, EWMA, tabular CUSUM)",
		Long: `Reads a CSV table (separated by commas, semicolons or tabs; '#' lines are
comments; a first row with no number in it is the header) and charts one column in
the order of its rows: the column headed --column NAME, or else the first column
whose first data row holds a number. Other columns may hold anything (a serial, a
date).

--kind imr (the default): the individuals chart, x̄ ± 3·MR̄/1.128, with the Western
Electric run rules 1–4 as signals, and the moving-range chart, UCL 3.267·MR̄, LCL 0
(NIST/SEMATECH e-Handbook §6.3.2.2 and §6.3.2).

--kind ewma --lambda L [--width 3] [--target T] [--sigma S]: the EWMA
z_t = λ·x_t + (1−λ)·z_{t−1}, z_0 = T, with the exact limits of each point
T ± L·σ·√(λ/(2−λ)·[1−(1−λ)^{2t}]) and the steady-state ones (e-Handbook §6.3.2.4);
T defaults to the mean, σ to MR̄/1.128.

--kind cusum --target T --k K --h H: the tabular CUSUM (e-Handbook §6.3.2.3),
S_hi and S_lo (zero or negative) with k and h in the data's units; a point
signals where S_hi exceeds h or S_lo falls below −h.

Prints a table of the points (value, plotted statistic, its limits, the rules it
breaks) and a summary. --json writes one object instead: center, ucl, lcl (the
steady-state limits), points (value, statistic, ucl, lcl) and signals (1-based
index, rule). --pdf FILE also draws the chart on an A4 landscape page.`,
	}
	column := c.Flag.String("column", "", "chart the column headed `NAME` (default: the first numeric column)")
	kind := c.Flag.String("kind", "imr", "chart `kind`: imr, ewma or cusum")
	var lambda, target, sigma, k, h optFloat
	c.Flag.Var(&lambda, "lambda", "EWMA weight `L` of the newest point, 0 < L ≤ 1")
	width := c.Flag.Float64("width", 3, "EWMA limits at `L` sigma")
	c.Flag.Var(&target, "target", "target `T` (EWMA: default the mean; CUSUM: required)")
	c.Flag.Var(&sigma, "sigma", "EWMA process `S`D (default MR̄/1.128)")
	c.Flag.Var(&k, "k", "CUSUM reference value `K`, in the data's units")
	c.Flag.Var(&h, "h", "CUSUM decision interval `H`, in the data's units (written --h: -h alone asks for this help)")
	asJSON := jsonFlag(c, "the chart (one object)")
	pdfPath := c.Flag.String("pdf", "", "also draw the chart into this PDF `file`")
	c.Run = func(ctx context.Context, e *env, args []string) error {
		if len(args) != 1 {
			return usagef("name exactly one CSV file")
		}
		widthSet := false
		c.Flag.Visit(func(f *flag.Flag) {
			if f.Name == "width" {
				widthSet = true
			}
		})
		switch *kind {
		case "imr":
			if lambda.set || widthSet || target.set || sigma.set || k.set || h.set {
				return usagef("--kind imr takes none of --lambda, --width, --target, --sigma, --k, --h")
			}
		case "ewma":
			if !(*width > 0) {
				return usagef("--width must be a positive number of sigmas, found %g", *width)
			}
			if !lambda.set {
				return usagef("--kind ewma needs --lambda L (0 < L ≤ 1)")
			}
			if k.set || h.set {
				return usagef("--kind ewma takes no --k or --h (they are the CUSUM's)")
			}
		case "cusum":
			if !target.set || !k.set || !h.set {
				return usagef("--kind cusum needs --target T, --k K and --h H (in the data's units)")
			}
			if lambda.set || widthSet || sigma.set {
				return usagef("--kind cusum takes no --lambda, --width or --sigma (they are the EWMA's)")
			}
		default:
			return usagef("--kind must be imr, ewma or cusum, found %q", *kind)
		}
		f, err := os.Open(args[0])
		if err != nil {
			return badInput(err)
		}
		defer f.Close()
		xs, header, err := spc.ReadColumn(args[0], f, *column)
		if err != nil {
			return badInput(err)
		}
		var charts []spc.Chart
		var params string
		switch *kind {
		case "imr":
			ind, mr, err := spc.IMR(xs)
			if err != nil {
				return badInput(fmt.Errorf("%s: %w", args[0], err))
			}
			charts = []spc.Chart{ind, mr}
			params = "limits mean ± 3·MR/1.128, MR the average moving range; moving-range UCL 3.267·MR; Western Electric rules 1–4"
		case "ewma":
			o := spc.EWMAOptions{Lambda: lambda.v, Width: *width}
			if target.set {
				o.Target = &target.v
			}
			if sigma.set {
				o.Sigma = &sigma.v
			}
			ch, err := spc.EWMA(xs, o)
			if err != nil {
				return badInput(fmt.Errorf("%s: %w", args[0], err))
			}
			charts = []spc.Chart{ch}
			params = fmt.Sprintf("λ = %g, L = %g, target %.6g, sigma %.6g", lambda.v, *width, ch.Center, ch.Sigma)
		case "cusum":
			ch, err := spc.CUSUM(xs, target.v, k.v, h.v)
			if err != nil {
				return badInput(fmt.Errorf("%s: %w", args[0], err))
			}
			charts = []spc.Chart{ch}
			params = fmt.Sprintf("target %g, k = %g, h = %g", target.v, k.v, h.v)
		}
		if *pdfPath != "" {
			o := chart.Options{
				Title: chartTitle(*kind) + " of " + header,
				Lines: []string{
					fmt.Sprintf("File %s, column %q, %d points, in the order of its rows.", filepath.Base(args[0]), header, len(xs)),
					params + ".",
				},
				Stamp: time.Unix(0, 0),
			}
			if err := chart.WriteFile(*pdfPath, charts, o); err != nil {
				return fmt.Errorf("--pdf: %w", err)
			}
		}
		if *asJSON {
			enc := json.NewEncoder(e.stdout)
			enc.SetIndent("", "  ")
			out := chartJSON(charts[0])
			out["column"] = header
			out["n"] = len(xs)
			if len(charts) > 1 {
				out["moving_range"] = chartJSON(charts[1])
			}
			return enc.Encode(out)
		}
		writeChartText(e.stdout, *kind, header, params, xs, charts)
		if *pdfPath != "" {
			fmt.Fprintf(e.stdout, "\nchart drawn: %s\n", *pdfPath)
		}
		return nil
	}
	return c
}

// chartTitle is the name of a chart kind in a title.
func chartTitle(kind string) string {
	switch kind {
	case "ewma":
		return "EWMA chart"
	case "cusum":
		return "Tabular CUSUM"
	}
	return "Individuals and moving-range chart"
}

// chartJSON is one chart for --json: its kind, sigma, steady-state centre
// and limits, its points and its signals. A number that does not exist is
// null.
func chartJSON(c spc.Chart) map[string]any {
	pts := make([]map[string]any, len(c.Points))
	for i, p := range c.Points {
		m := map[string]any{"value": jsonNum(p.Value), "statistic": jsonNum(p.Statistic), "ucl": jsonNum(p.UCL), "lcl": jsonNum(p.LCL)}
		if c.Kind == "cusum" {
			m["lower"] = jsonNum(p.Lower)
		}
		pts[i] = m
	}
	sig := make([]map[string]any, len(c.Signals))
	for i, s := range c.Signals {
		sig[i] = map[string]any{"index": s.Index, "rule": s.Rule}
	}
	return map[string]any{
		"chart": c.Kind, "center": jsonNum(c.Center), "ucl": jsonNum(c.UCL), "lcl": jsonNum(c.LCL),
		"sigma": jsonNum(c.Sigma), "points": pts, "signals": sig,
	}
}

// signalsAt maps a signal's 1-based index (the observation's, for a
// moving-range chart too) to the rules it breaks, joined.
func signalsAt(c spc.Chart) map[int]string {
	m := make(map[int]string, len(c.Signals))
	for _, s := range c.Signals {
		if m[s.Index] != "" {
			m[s.Index] += ", "
		}
		m[s.Index] += s.Rule
	}
	return m
}

// writeChartText writes the table of points and the summary a person reads.
func writeChartText(w io.Writer, kind, header, params string, xs []float64, charts []spc.Chart) {
	c := charts[0]
	fmt.Fprintf(w, "%s of %q (%d points)\n%s\n\n", chartTitle(kind), header, len(xs), params)
	sig := signalsAt(c)
	switch kind {
	case "imr":
		mrSig := signalsAt(charts[1])
		fmt.Fprintf(w, "%5s %14s %14s %14s %14s  %s\n", "#", "value", "moving range", "LCL", "UCL", "signal")
		for i, p := range c.Points {
			mr := ""
			if i > 0 {
				mr = fmt.Sprintf("%.6g", charts[1].Points[i-1].Statistic)
			}
			s := sig[i+1]
			if mrSig[i+1] != "" { // a moving range's signal is at the later value
				s = strings.TrimPrefix(s+", MR "+mrSig[i+1], ", ")
			}
			row(w, "%5d %14.6g %14s %14.6g %14.6g  %s", i+1, p.Value, mr, p.LCL, p.UCL, s)
		}
	case "cusum":
		fmt.Fprintf(w, "%5s %14s %14s %14s %14s %14s  %s\n", "#", "value", "S_hi", "S_lo", "LCL (−h)", "UCL (h)", "signal")
		for i, p := range c.Points {
			row(w, "%5d %14.6g %14.6g %14.6g %14.6g %14.6g  %s", i+1, p.Value, p.Statistic, p.Lower, p.LCL, p.UCL, sig[i+1])
		}
	default:
		fmt.Fprintf(w, "%5s %14s %14s %14s %14s  %s\n", "#", "value", "EWMA", "LCL", "UCL", "signal")
		for i, p := range c.Points {
			row(w, "%5d %14.6g %14.6g %14.6g %14.6g  %s", i+1, p.Value, p.Statistic, p.LCL, p.UCL, sig[i+1])
		}
	}
	fmt.Fprintln(w)
	for _, ch := range charts {
		sigma := ""
		if ch.Kind != "cusum" {
			sigma = fmt.Sprintf("   sigma %.6g", ch.Sigma)
		}
		fmt.Fprintf(w, "%-13s center %.6g   UCL %.6g   LCL %.6g%s\n", ch.Kind+":", ch.Center, ch.UCL, ch.LCL, sigma)
	}
	n := 0
	for _, ch := range charts {
		n += len(ch.Signals)
	}
	if n == 0 {
		fmt.Fprintln(w, "signals: none")
		return
	}
	fmt.Fprintf(w, "signals: %d\n", n)
	for _, ch := range charts {
		for _, s := range ch.Signals {
			fmt.Fprintf(w, "  point %d: %s (%s)\n", s.Index, s.Rule, ch.Kind)
		}
	}
}

// row writes one table row, without the blanks an empty last column leaves.
func row(w io.Writer, format string, args ...any) {
	fmt.Fprintln(w, strings.TrimRight(fmt.Sprintf(format, args...), " "))
}
