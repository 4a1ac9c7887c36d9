package plan

import (
	planner "trimline/sequencer/plan"
)

// PredictionOf is what plan r predicts, for Compare and Against: every
// quantity with its trials' values (pre-trim, each DAC's code, post-trim), the
// yield over the results the planner judges, and each DAC's saturation.
func PredictionOf(r *planner.Report) Prediction {
	p := Prediction{Product: r.Budget.Product, Yield: r.Yield, YieldSE: r.YieldSE,
		YieldOver: planner.Predicted, Saturation: map[string]float64{}}
	for _, qs := range [][]planner.Quantity{r.Pre, r.Codes, r.Post} {
		for _, q := range qs {
			p.Quantities = append(p.Quantities, Predicted{Name: q.Name, Unit: q.Unit, Values: q.Values, Shares: q.Shares})
		}
	}
	for _, d := range r.DACs {
		p.Saturation[d.DAC.Name] = d.Saturation
	}
	return p
}
