package sequencer

// The trim's effect: the change of the fitted offset and gain from an earlier
// fit (the unit as found) to this one (as left), with the uncertainty of the
// change.
//
// The two fits are made with the same instruments. Where both sweeps used the
// same meter on the same range and the same source on the same range, the four
// systematic instrument errors of the line-fit model (g_m, o_m, g_s, o_s, see
// package uncertainty's doc) are the same unknown errors in both fits: they
// enter the change through the difference of their sensitivities in the two
// fits (JCGM 100:2008 §5.2, correlated input quantities, eq. (13) with
// r = 1: u²(Δ) = Σ (c_post − c_pre)²·u² over each shared input). The meter's
// offset cancels exactly (c = −1 in both fits); the meter's gain and the
// source's offset leave only (b0_post − b0_pre)·u(g_m) and (b1_post −
// b1_pre)·u(o_s). The random inputs (each point's Type A scatter and rounding)
// are independent between the sweeps and add in quadrature. Where the ranges
// or the instruments differ, the inputs are not the same errors and are
// treated as independent (TrimEffect.Separate says which).
//
// The flip side is stated on the certificate: the verify sweep cannot detect
// an error of the station's own instruments, since both sweeps share it; their
// calibration covers it.

import (
	"fmt"
	"math"

	"trimline/sequencer/uncertainty"
)

// TrimEffect is how the uncertainty of one trim-effect result (a fit step's
// offset_change or gain_change) was evaluated. The result itself (value, u, U)
// is in Record.Results under Result.
type TrimEffect struct {
	Step     string `json:"step"`              // the fit step that computed it
	Channel  string `json:"channel,omitempty"` // "" for a one-channel unit
	Baseline string `json:"baseline"`          // the earlier fit step it is the change from
	Result   string `json:"result"`            // the result's name
	Quantity string `json:"quantity"`          // "offset_change" or "gain_change"
	// Shared are the systematic instrument inputs common to both sweeps (same
	// instrument, same range), whose contributions cancel but for the change of
	// their sensitivity; Separate those treated as independent because the
	// sweeps used another instrument or range. Names as uncertainty's Name…
	// constants.
	Shared   []string `json:"shared,omitempty"`
	Separate []string `json:"separate,omitempty"`
	// UIndependent is the standard uncertainty the change would have with the
	// two fits treated as independent, sqrt(u²_pre + u²_post), in the unit of
	// the result: what the shared errors would wrongly add.
	UIndependent float64 `json:"u_independent"`
}

// trimEffectOutputs are the fit results that need a baseline, with the
// gradient g of the result in (b0, b1) for ideal gain G: offset_change =
// b0_post − b0_pre, gain_change = (b1_post − b1_pre)/G.
func trimEffectGradient(what string, idealGain float64) ([2]float64, bool) {
	switch what {
	case "offset_change":
		return [2]float64{1, 0}, true
	case "gain_change":
		return [2]float64{0, 1 / idealGain}, true
	}
	return [2]float64{}, false
}

// fitInput is one input of a fit's uncertainty model with its sensitivities to
// (b0, b1), for a line or a quadratic alike.
type fitInput struct {
	name   string
	point  int // −1 for the shared systematic inputs
	u, dof float64
	pooled bool
	c      [2]float64
}

func (a analysis) inputs() []fitInput {
	var out []fitInput
	if a.quad != nil {
		for _, in := range a.quad.Inputs {
			out = append(out, fitInput{in.Name, in.Point, in.U, in.DOF, in.Pooled, [2]float64{in.C[0], in.C[1]}})
		}
		return out
	}
	for _, in := range a.lf.Inputs {
		out = append(out, fitInput{in.Name, in.Point, in.U, in.DOF, in.Pooled, in.C})
	}
	return out
}

// sweepRoles are the meter and source roles a sweep read and drove.
type sweepRoles struct{ meter, source string }

// trimEffect is the change g·(b_post − b_pre) between two fits with its
// standard uncertainty and Welch–Satterthwaite dof (JCGM 100 G.2b), and the
// record of which systematic inputs were shared. pre and post are the fits,
// preRoles and postRoles their sweeps' instrument roles.
func trimEffect(pre, post analysis, preRoles, postRoles sweepRoles, g [2]float64) (v, u, dof float64, te TrimEffect) {
	v = g[0]*(post.sum.Intercept-pre.sum.Intercept) + g[1]*(post.sum.Slope-pre.sum.Slope)
	contrib := func(in fitInput) float64 { return (g[0]*in.c[0] + g[1]*in.c[1]) * in.u }
	var cs []uncertainty.Component
	// The random inputs of each fit, one component per row and fit: a pooled
	// Type A estimate carries its degrees of freedom once (JCGM 100 G.4.1).
	random := func(a analysis, which string) {
		rows := map[string]*uncertainty.Component{}
		var order []string
		var parts = map[string][]uncertainty.Component{}
		for _, in := range a.inputs() {
			if in.point < 0 {
				continue
			}
			if rows[in.name] == nil {
				rows[in.name] = &uncertainty.Component{Name: in.name + ", " + which}
				order = append(order, in.name)
			}
			parts[in.name] = append(parts[in.name], uncertainty.Component{U: contrib(in), DOF: in.dof})
			if in.pooled {
				rows[in.name].DOF = in.dof
			}
		}
		for _, name := range order {
			c := rows[name]
			pooledDOF := c.DOF
			c.U, c.DOF = uncertainty.Combine(parts[name])
			if pooledDOF > 0 {
				c.DOF = pooledDOF
			}
			cs = append(cs, *c)
		}
	}
	random(pre, "as found")
	random(post, "as left")
	sys := func(a analysis) map[string]fitInput {
		m := map[string]fitInput{}
		for _, in := range a.inputs() {
			if in.point < 0 {
				m[in.name] = in
			}
		}
		return m
	}
	ps, qs := sys(pre), sys(post)
	for _, name := range []string{uncertainty.NameMeterGain, uncertainty.NameMeterOffset, uncertainty.NameSourceGain, uncertainty.NameSourceOffset} {
		a, b := ps[name], qs[name]
		if a.u == 0 && b.u == 0 {
			continue
		}
		if sameError(name, pre, post, preRoles, postRoles) {
			te.Shared = append(te.Shared, name)
			d := (g[0]*(b.c[0]-a.c[0]) + g[1]*(b.c[1]-a.c[1])) * b.u
			cs = append(cs, uncertainty.Component{Name: name, U: d, DOF: b.dof})
			continue
		}
		te.Separate = append(te.Separate, name)
		cs = append(cs, uncertainty.Component{Name: name + ", as found", U: contrib(a), DOF: a.dof},
			uncertainty.Component{Name: name + ", as left", U: contrib(b), DOF: b.dof})
	}
	u, dof = uncertainty.Combine(cs)
	te.UIndependent = math.Hypot(gumU(pre, contrib), gumU(post, contrib))
	return v, u, dof, te
}

// gumU is the standard uncertainty of the fit's g·b from its inputs alone
// (law of propagation, every input independent).
func gumU(a analysis, contrib func(fitInput) float64) float64 {
	var s float64
	for _, in := range a.inputs() {
		c := contrib(in)
		s += c * c
	}
	return math.Sqrt(s)
}

// sameError reports whether systematic input name is the same unknown error in
// both fits: the same instrument (role) on the same range with the same spec,
// or for the source offset the same measured zero.
func sameError(name string, pre, post analysis, preRoles, postRoles sweepRoles) bool {
	switch name {
	case uncertainty.NameMeterGain, uncertainty.NameMeterOffset:
		return preRoles.meter == postRoles.meter && pre.sw.Meter == post.sw.Meter
	case uncertainty.NameSourceGain:
		return preRoles.source == postRoles.source && pre.sw.Source == post.sw.Source
	case uncertainty.NameSourceOffset:
		if preRoles.source != postRoles.source || pre.sw.Source != post.sw.Source {
			return false
		}
		// The same measured zero is the same check (by name and channel), not two
		// checks whose numbers happen to agree.
		zp, zq := pre.sw.SourceZero, post.sw.SourceZero
		return (zp == nil) == (zq == nil) && pre.sum.SourceZero == post.sum.SourceZero && pre.sum.Channel == post.sum.Channel
	}
	return false
}

// setTrimEffect computes result name (offset_change or gain_change) of the
// running fit against the baseline fit, and records how (Record.TrimEffects).
func (f *fitStep) setTrimEffect(u *Unit, what, name string, post analysis) {
	base, ok := u.Kept(f.Baseline).(fitKept)
	if !ok {
		u.Invalid(name, fmt.Sprintf("fit %q was not run", f.Baseline))
		return
	}
	g, _ := trimEffectGradient(what, u.seq.IdealGain)
	v, su, dof, te := trimEffect(base.a, post, f.base.roles(), f.roles(), g)
	unc := u.Unc(su, dof)
	unc.Method = "GUM" // the law of propagation with the shared inputs, whatever the fits used
	u.SetU(name, v, unc)
	te.Step, te.Channel, te.Baseline, te.Result, te.Quantity = u.step.Name, u.channel, f.Baseline, name, what
	u.Rec.TrimEffects = append(u.Rec.TrimEffects, te)
}

// roles are the instrument roles of the fit's sweep.
func (f *fitStep) roles() sweepRoles {
	if f.sweep == nil {
		return sweepRoles{}
	}
	return sweepRoles{meter: f.sweep.Plan.Meter, source: f.sweep.Plan.Source}
}
