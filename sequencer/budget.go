package sequencer

// Uncertainty budgets: which input quantity a result's uncertainty comes from,
// with its sensitivity and its share (JCGM 100 §5.1.3, eq. (10)). A step that
// evaluates a result's uncertainty from independent inputs records them with
// SetBudget beside SetU; the certificate and `trimline check` print them.

import (
	"math"

	"trimline/sequencer/uncertainty"
)

// budgetInput is one input quantity of a result as budgetRows reads it: its
// name (the budget row it belongs to), kind, standard uncertainty u in unit,
// degrees of freedom, whether it is one of a pooled standard deviation's
// per-point inputs (which carry its dof once), the sweep point it belongs to
// (−1 for an input every point shares) and its sensitivity c, the result's
// change per unit of the input.
type budgetInput struct {
	name, kind, unit string
	point            int
	u, dof           float64
	pooled           bool
	c                float64
}

// budgetRows groups inputs into one BudgetRow per name, in order of first
// appearance: a row's contribution is the root-sum-square of its inputs'
// |c|·u (JCGM 100 eq. (10): the inputs are independent) and its dof their
// Welch–Satterthwaite dof (JCGM 100 G.2b), or the pooled dof for the inputs
// of one pooled standard deviation. A row whose inputs have no uncertainty is
// left out. Each row's Share is its fraction of the sum of the rows' variances;
// the shares sum to 1 (all 0 when every contribution is 0).
func budgetRows(ins []budgetInput) []BudgetRow {
	var order []string
	byName := map[string][]budgetInput{}
	for _, in := range ins {
		if _, seen := byName[in.name]; !seen {
			order = append(order, in.name)
		}
		byName[in.name] = append(byName[in.name], in)
	}
	var rows []BudgetRow
	var total float64
	for _, name := range order {
		group := byName[name]
		row := BudgetRow{Name: name, Kind: group[0].kind, InputUnit: group[0].unit}
		cs := make([]uncertainty.Component, 0, len(group))
		pooled, pooledDOF := false, 0.0
		for _, in := range group {
			row.InputU = math.Max(row.InputU, in.u)
			if in.point >= 0 {
				row.Points++
			} else {
				row.Sensitivity = in.c
			}
			if in.pooled {
				pooled, pooledDOF = true, in.dof
			}
			cs = append(cs, uncertainty.Component{U: in.c * in.u, DOF: in.dof})
		}
		if row.Points > 0 {
			row.Sensitivity = 0 // each point has its own
		}
		if row.InputU == 0 {
			continue // not in this budget (a spec of 0, no resolution)
		}
		row.U, row.DOF = uncertainty.Combine(cs)
		if pooled {
			row.DOF = pooledDOF
		}
		total += row.U * row.U
		rows = append(rows, row)
	}
	for i := range rows {
		if total > 0 {
			rows[i].Share = rows[i].U * rows[i].U / total
		}
	}
	return rows
}

// budget is the uncertainty budget of the result g[0]·b0 + g[1]·b1 of the fit
// (b0 and b1 the output and the slope at zero stimulus, as linear takes them):
// every input of the fit's model (uncertainty.LineFit.Inputs or QuadFit.Inputs,
// whatever inputs the sweep carries, a measured source offset included) with
// sensitivity g·C. Offsets and per-point inputs are in the response's unit,
// the source offset in the stimulus's, gains relative ("1"). The budget is the
// law of propagation's (JCGM 100 §5.1.3); a Monte Carlo result keeps it as the
// account of where its uncertainty comes from.
func (a analysis) budget(g [2]float64, plan SweepPlan, seq *Sequence) []BudgetRow {
	resp, stim := unitOf(seq.ResponseDim), unitOf(plan.stimDim())
	unit := func(name string) string {
		switch name {
		case uncertainty.NameMeterGain, uncertainty.NameSourceGain:
			return "1"
		case uncertainty.NameSourceOffset:
			return stim
		}
		return resp // per-point errors, the meter's offset, any other error of the reading
	}
	var ins []budgetInput
	if a.quad != nil {
		for _, in := range a.quad.Inputs {
			ins = append(ins, budgetInput{name: in.Name, kind: in.Kind, unit: unit(in.Name), point: in.Point,
				u: in.U, dof: in.DOF, pooled: in.Pooled, c: g[0]*in.C[0] + g[1]*in.C[1]})
		}
	} else {
		for _, in := range a.lf.Inputs {
			ins = append(ins, budgetInput{name: in.Name, kind: in.Kind, unit: unit(in.Name), point: in.Point,
				u: in.U, dof: in.DOF, pooled: in.Pooled, c: g[0]*in.C[0] + g[1]*in.C[1]})
		}
	}
	return budgetRows(ins)
}

// Names of a measure step's budget rows (its meter and source specs are
// evaluated at the one reading, each as one rectangular input).
const (
	nameMeterSpec  = "meter accuracy"  // ±(of reading + of range) at the reading
	nameSourceSpec = "source accuracy" // ±(of reading + of range) at the level
)

// budget is the uncertainty budget of the measure step's mean of p (withSource
// false) or of its error against the ideal output (withSource true): the
// readings' scatter (Type A, n − 1 dof), the meter's spec at the reading and its
// resolution, and for the error the source's spec at the level through the ideal
// gain, each rectangular (JCGM 100 §4.3.7). The measurand is the reading
// corrected for these errors, so each has sensitivity −1 (−ideal gain for the
// source), as a fit's inputs do.
func (s *measureStep) budget(cfg Config, p Point, withSource bool) []BudgetRow {
	return pointBudget(cfg, s.plan, p, float64(p.Valid-1), withSource && s.driven, nil)
}

// pointBudget is the budget of one point's mean (withSource false) or of its error
// against the ideal output (withSource true), its Type A part with dof degrees of
// freedom (n − 1 of its own readings, or the sweep's pooled Σ(n_i − 1)). It is the
// budget of pointErrorU's u for a fit's terminal offset, and of a measure step's
// results. With zero, a zero check's measurement of what the station delivers at
// a programmed 0 (Type A) takes the place of the source's spec, which at a 0 level
// is its offset term alone.
func pointBudget(cfg Config, plan SweepPlan, p Point, dof float64, withSource bool, zero *uncertainty.Measured) []BudgetRow {
	meter, source, res := specs(cfg.Station, plan, p.Mean, p.Stimulus)
	resp := unitOf(plan.Quantity)
	sq3 := math.Sqrt(3)
	ins := []budgetInput{{name: uncertainty.NameRepeatability, kind: uncertainty.KindA, unit: resp, point: -1,
		u: p.URandom, dof: dof, c: -1}}
	if plan.Response == nil {
		ins = append(ins, budgetInput{name: nameMeterSpec, kind: uncertainty.KindB, unit: resp, point: -1,
			u: meter.HalfWidth(p.Mean) / sq3, dof: math.Inf(1), c: -1})
	}
	ins = append(ins, budgetInput{name: uncertainty.NameResolution, kind: uncertainty.KindB, unit: resp, point: -1,
		u: res / (2 * sq3), dof: math.Inf(1), c: -1})
	switch {
	case withSource && zero != nil:
		ins = append(ins, budgetInput{name: uncertainty.NameSourceOffset, kind: zero.Evaluation(), unit: unitOf(plan.stimDim()), point: -1,
			u: zero.U, dof: zero.DOF, c: -cfg.Sequence.IdealGain})
	case withSource:
		ins = append(ins, budgetInput{name: nameSourceSpec, kind: uncertainty.KindB, unit: unitOf(plan.stimDim()), point: -1,
			u: source.HalfWidth(p.Stimulus) / sq3, dof: math.Inf(1), c: -cfg.Sequence.IdealGain})
	}
	return budgetRows(ins)
}

// SetBudget records the uncertainty budget of result name (the running
// channel's, as Set), set by SetU. A later Invalid drops it.
func (u *Unit) SetBudget(name string, rows []BudgetRow) { u.res.setBudget(u.key(name), rows) }

func (r *results) setBudget(name string, rows []BudgetRow) {
	if r.budget == nil {
		r.budget = map[string][]BudgetRow{}
	}
	r.budget[name] = rows
}

// PredictResults runs the sequence's steps on paper, as PredictUncertainty does
// (every sweep sees a unit with exactly the ideal transfer and no noise), and
// returns the results it evaluated, with their uncertainty budgets: a
// per-channel result once, its first channel's. The budgets are those of the
// instruments' specifications and resolution alone, what `trimline check`
// prints beside the TUR.
func PredictResults(st *Station, seq *Sequence) []Result {
	u, ok := onPaper(st, seq)
	if !ok {
		return nil
	}
	var out []Result
	seen := map[string]bool{}
	for _, r := range u.res.list() {
		if seen[r.Name] || !r.Valid {
			continue
		}
		seen[r.Name] = true
		out = append(out, r)
	}
	return out
}
