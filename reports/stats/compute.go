package stats

import (
	"cmp"
	"fmt"
	"math"
	"slices"
	"strings"

	"trimline/instruments/units"
	"trimline/limits"
	"trimline/reports/ledger"
	"trimline/sequencer"
	"trimline/sequencer/spc"
)

// Compute makes the Report of runs (oldest first, as Ledger.QualityRuns
// returns them) under o: it filters the runs, forms the population (see
// Report.Population), counts the rates and the Pareto, and computes every
// toleranced result's capability, histogram and trend. It is pure: the same
// runs and options give the same Report. runs is only read.
func Compute(runs []ledger.QualityRun, o Options) Report {
	o = withDefaults(o)
	r := Report{Ledger: o.Ledger, Filter: o.Filter, By: o.By, Generated: o.Generated, Confidence: o.Confidence}
	kept := r.filter(runs)
	units := r.population(kept)
	r.Population = population(o)
	if n := r.Counts.Engineering; n > 0 && !o.IncludeEngineering {
		r.Notes = append(r.Notes, fmt.Sprintf("%d engineering run(s) matched the filter and are left out (--include-engineering counts them).", n))
	}
	r.rates()
	r.pareto(units)
	r.results(units, o)
	r.pairs()
	r.trends(o.By)
	return r
}

func withDefaults(o Options) Options {
	if o.By == "" {
		o.By = ByDay
	}
	if o.Confidence == 0 {
		o.Confidence = 0.95
	}
	if o.Bins <= 0 {
		o.Bins = DefaultBins
	}
	if !(o.Margin > 0) {
		o.Margin = DefaultMargin
	}
	return o
}

// population states the rules Compute applies, one sentence each. Which
// filter was applied is Report.Filter, for the writers to print beside them.
func population(o Options) []string {
	eng := "Engineering runs (made with unreleased files) are left out; they are only counted."
	if o.IncludeEngineering {
		eng = "Engineering runs (made with unreleased files) are counted like production runs, as asked."
	}
	return []string{
		"The filter (product, revision, station, site, lot, finish date) selects runs before anything else is counted.",
		eng,
		"A unit is a serial number; its runs are taken in the order the ledger recorded them (a retest after the run it repeats, whatever the stations' clocks said).",
		"An attempt is a completed run (PASS, FAIL or REVIEW); a reviewer's decision on a REVIEW run is not an attempt but gives that run its final verdict (accept: PASS, reject: FAIL).",
		"Each unit's latest attempt counts for yield and capability, with its final verdict; a REVIEW run not yet decided is held, not passed.",
		"Earlier attempts count only for the retest rate (units tested more than once); first-pass yield counts the units whose first attempt's final verdict is PASS. A unit whose earliest counted run is a retest (its first attempt lies outside the filter) counts as retested, not as passed first time.",
		"FAULT and ABORTED runs measured nothing: they count only in the fault rate, faults over all runs counted (attempts, faults and aborted runs).",
		"The Pareto counts, per limit, the units whose latest attempt failed it (a conditional pass counts only where a reviewer rejected the unit), the units held for review on it, and the units whose first attempt did not pass it.",
		"Capability takes each unit's value in the limit's unit, units in test order (the order their latest attempts were recorded), against the tolerance of the newest counted run.",
	}
}

// matches reports whether run passes the filter's fields and time range (not
// the engineering rule).
func (f Filter) matches(run *ledger.QualityRun) bool {
	eq := func(want, got string) bool { return want == "" || strings.EqualFold(want, got) }
	return eq(f.Product, run.Product) && eq(f.Revision, run.Revision) && eq(f.Station, run.Station) &&
		eq(f.Site, run.Site) && eq(f.Lot, run.Lot) &&
		(f.Since.IsZero() || !run.Finished.Before(f.Since)) && (f.Until.IsZero() || run.Finished.Before(f.Until))
}

// filter returns the runs the report counts, engineering runs counted and
// left out unless included.
func (r *Report) filter(runs []ledger.QualityRun) []*ledger.QualityRun {
	var kept []*ledger.QualityRun
	for i := range runs {
		run := &runs[i]
		if !r.Filter.matches(run) {
			continue
		}
		if run.Engineering {
			r.Counts.Engineering++
			if !r.Filter.IncludeEngineering {
				continue
			}
		}
		kept = append(kept, run)
	}
	return kept
}

// unit is one serial's attempts, with the decisions on them.
type unit struct {
	attempts []*ledger.QualityRun
	decided  map[string]*ledger.QualityRun // decision record by the run id it decides
	last     int                           // index in the kept runs of the latest attempt
}

// final is an attempt's final verdict and the decision record, if any.
func (u *unit) final(a *ledger.QualityRun) (string, *ledger.QualityRun) {
	if a.Verdict == sequencer.Review {
		if d := u.decided[a.RunID]; d != nil {
			return string(d.Verdict), d
		}
	}
	return string(a.Verdict), nil
}

// latest is the unit's latest attempt.
func (u *unit) latest() *ledger.QualityRun { return u.attempts[len(u.attempts)-1] }

// population forms the units and counts, and fills r.Units in test order. It
// returns the units indexed like r.Units.
func (r *Report) population(kept []*ledger.QualityRun) []*unit {
	bySerial := map[string]*unit{}
	var serials []string
	c := &r.Counts
	for i, run := range kept {
		u := bySerial[run.Serial]
		if u == nil {
			u = &unit{decided: map[string]*ledger.QualityRun{}}
			bySerial[run.Serial] = u
			serials = append(serials, run.Serial)
		}
		switch {
		case run.Verdict == sequencer.Fault:
			c.Faults++
			c.Runs++
		case run.Verdict == sequencer.Aborted:
			c.Aborted++
			c.Runs++
		case run.Disposition != nil:
			c.Decisions++
			u.decided[run.Disposition.Of] = run
		case run.Verdict == sequencer.Pass || run.Verdict == sequencer.Fail || run.Verdict == sequencer.Review:
			c.Attempts++
			c.Runs++
			u.attempts = append(u.attempts, run)
			u.last = i
		}
	}
	var us []*unit
	for _, s := range serials {
		u := bySerial[s]
		if len(u.attempts) == 0 {
			if len(u.decided) == 0 {
				c.NoCompleted++
			}
			continue
		}
		us = append(us, u)
	}
	slices.SortStableFunc(us, func(a, b *unit) int { return cmp.Compare(a.last, b.last) })
	for _, u := range us {
		a := u.latest()
		verdict, d := u.final(a)
		first, _ := u.final(u.attempts[0])
		// A unit whose earliest counted run is a retest had its first
		// attempt outside the filter (another lot, station or date): it was
		// retested and did not pass first time, whatever that attempt said.
		outside := u.attempts[0].RetestOf != ""
		if outside {
			first = ""
		}
		row := UnitRow{Serial: a.Serial, Product: a.Product, Revision: a.Revision, RunID: a.RunID, Certificate: a.Certificate,
			Station: a.Station, Site: a.Site, Lot: a.Lot, Started: a.Started, Finished: a.Finished,
			Verdict: verdict, FirstVerdict: first, Attempts: len(u.attempts)}
		if d != nil {
			row.RunID, row.Certificate = d.RunID, d.Certificate
		}
		c.Units++
		switch verdict {
		case string(sequencer.Pass):
			c.Passed++
		case string(sequencer.Fail):
			c.Failed++
		default:
			c.Held++
		}
		if first == string(sequencer.Pass) {
			c.FirstPass++
		}
		if len(u.attempts) > 1 || outside {
			c.Retested++
		}
		r.Units = append(r.Units, row)
	}
	return us
}

// rates fills the rates from the counts.
func (r *Report) rates() {
	c := r.Counts
	r.Yield = ratio(c.Passed, c.Units)
	r.FirstPassYield = ratio(c.FirstPass, c.Units)
	r.RetestRate = ratio(c.Retested, c.Units)
	r.FaultRate = ratio(c.Faults, c.Runs)
}

func ratio(n, d int) float64 {
	if d == 0 {
		return math.NaN()
	}
	return float64(n) / float64(d)
}

// pareto counts, per limit and channel, the units whose latest attempt failed
// or held it and those whose first attempt did not pass it.
func (r *Report) pareto(us []*unit) {
	type key struct{ limit, ch string }
	at := map[key]int{}
	get := func(o *ledger.QualityOutcome) *LimitFailures {
		k := key{o.Name, o.Channel}
		i, ok := at[k]
		if !ok {
			i = len(r.Pareto)
			at[k] = i
			r.Pareto = append(r.Pareto, LimitFailures{Limit: o.Name, Channel: o.Channel})
		}
		return &r.Pareto[i]
	}
	for _, u := range us {
		a := u.latest()
		verdict, _ := u.final(a)
		if verdict != string(sequencer.Pass) {
			for i := range a.Outcomes {
				o := &a.Outcomes[i]
				if o.Pass {
					continue
				}
				switch {
				case verdict == string(sequencer.Review):
					get(o).Held++ // the unit waits for a reviewer
				case o.Zone != limits.ZoneConditionalPass || a.Verdict == sequencer.Review:
					// Failed, or a conditional pass a reviewer rejected.
					get(o).Failed++
				}
				// A conditional pass beside another limit's failure failed
				// nothing: the unit failed on the other limit.
			}
		}
		for i := range u.attempts[0].Outcomes {
			if o := &u.attempts[0].Outcomes[i]; !o.Pass && u.attempts[0].RetestOf == "" {
				get(o).First++
			}
		}
	}
	slices.SortStableFunc(r.Pareto, func(a, b LimitFailures) int {
		return cmp.Or(cmp.Compare(b.Failed+b.Held, a.Failed+a.Held), cmp.Compare(b.First, a.First),
			cmp.Compare(a.Limit, b.Limit), cmp.Compare(a.Channel, b.Channel))
	})
}

// resultAcc gathers one toleranced result over the units.
type resultAcc struct {
	ResultStats
	stage  sequencer.Stage
	scale  float64 // of Unit: SI value = value in Unit × scale; NaN when the unit does not parse
	other  int     // runs judged against another tolerance or unit
	absent int     // counted units whose latest run has neither the result nor its limit
	failed error   // why spc.Capable computed nothing
}

// results computes every toleranced result's capability over the units'
// latest attempts.
func (r *Report) results(us []*unit, o Options) {
	accs := toleranced(us)
	for ui, u := range us {
		a := u.latest()
		for _, acc := range accs {
			acc.add(a, ui)
		}
	}
	for _, acc := range accs {
		acc.capability(o)
		r.Results = append(r.Results, acc.ResultStats)
		r.notes(acc)
	}
}

// toleranced finds the toleranced results of the units' latest attempts: the
// newest run's first, in its outcomes' order, then those only older runs have,
// the pre-trim ones moved to the front. Each takes the limit, unit and
// tolerance of the newest run that judged it.
func toleranced(us []*unit) []*resultAcc {
	var accs []*resultAcc
	seen := map[string]bool{}
	for i := len(us) - 1; i >= 0; i-- {
		a := us[i].latest()
		for j := range a.Outcomes {
			o := &a.Outcomes[j]
			name, ok := decided(o)
			if !ok {
				continue
			}
			k := limits.ChannelKey(name, o.Channel)
			if seen[k] {
				continue
			}
			seen[k] = true
			acc := &resultAcc{ResultStats: ResultStats{Name: k, Result: name, Channel: o.Channel, Limit: o.Name, Unit: o.Unit,
				Lower: clone(o.Lower), Upper: clone(o.Upper)}, scale: scaleOf(o.Unit)}
			if res := resultOf(a, name, o.Channel); res != nil {
				acc.stage, acc.Quantity = res.Stage, res.Quantity
			} else {
				sr := sequencer.Result{Name: name}
				acc.stage, acc.Quantity = sr.StageOf(), sr.QuantityOf()
			}
			if b, err := acc.stage.MarshalText(); err == nil {
				acc.Stage = string(b)
			}
			accs = append(accs, acc)
		}
	}
	slices.SortStableFunc(accs, func(a, b *resultAcc) int {
		return cmp.Compare(stageRank(a.stage), stageRank(b.stage))
	})
	return accs
}

func stageRank(s sequencer.Stage) int {
	if s == sequencer.AsFound {
		return 0
	}
	return 1
}

// decided returns the result a toleranced limit judged under its decision
// rule; ok is false for an expression limit, or a toleranced one not judged.
func decided(o *ledger.QualityOutcome) (result string, ok bool) {
	if o.Rule == "" || len(o.Values) != 1 {
		return "", false
	}
	for k := range o.Values {
		return k, true
	}
	return "", false
}

func resultOf(a *ledger.QualityRun, name, ch string) *ledger.QualityResult {
	for i := range a.Results {
		if r := &a.Results[i]; r.Name == name && r.Channel == ch {
			return r
		}
	}
	return nil
}

func outcomeOf(a *ledger.QualityRun, name, ch string) *ledger.QualityOutcome {
	for i := range a.Outcomes {
		if o := &a.Outcomes[i]; o.Name == name && o.Channel == ch {
			return o
		}
	}
	return nil
}

// scaleOf is the SI value of 1 unit as a limit file writes it (limits' own
// rule: the empty unit is a plain number), NaN when it does not parse.
func scaleOf(unit string) float64 {
	if unit == "" {
		return 1
	}
	q, err := units.Parse("1 " + unit)
	if err != nil || !(q.Value > 0) {
		return math.NaN()
	}
	return q.Value
}

// add takes unit ui's value from its latest attempt a.
func (acc *resultAcc) add(a *ledger.QualityRun, ui int) {
	res := resultOf(a, acc.Result, acc.Channel)
	o := outcomeOf(a, acc.Limit, acc.Channel)
	if res == nil && o == nil {
		acc.absent++
		return
	}
	if o != nil && o.Rule != "" && (o.Unit != acc.Unit || !samePtr(o.Lower, acc.Lower) || !samePtr(o.Upper, acc.Upper)) {
		acc.other++
	}
	v := math.NaN()
	if o != nil && o.Unit == acc.Unit {
		if x, ok := o.Values[acc.Result]; ok {
			v = x
		}
	}
	if math.IsNaN(v) && res != nil && res.Valid {
		v = res.Value / acc.scale
	}
	if res != nil && !res.Valid || math.IsNaN(v) || math.IsInf(v, 0) {
		acc.Invalid++
		return
	}
	u := math.NaN()
	if res != nil {
		u = res.ExpandedU / acc.scale
	}
	acc.Values = append(acc.Values, v)
	acc.U = append(acc.U, u)
	acc.Units = append(acc.Units, ui)
}

// clone is a copy of *p, nil for nil: the Report shares nothing with the runs.
func clone(p *float64) *float64 {
	if p == nil {
		return nil
	}
	v := *p
	return &v
}

func samePtr(a, b *float64) bool {
	return (a == nil) == (b == nil) && (a == nil || *a == *b)
}

// capability computes the numbers of the values gathered.
func (acc *resultAcc) capability(o Options) {
	s := &acc.ResultStats
	nan := math.NaN()
	s.N = len(s.Values)
	s.Mean, s.SDWithin, s.SDOverall, s.Min, s.Max = nan, nan, nan, nan, nan
	s.Cp, s.Cpk, s.Pp, s.Ppk, s.FractionOutside = nan, nan, nan, nan, nan
	s.CpCI, s.CpkCI = [2]float64{nan, nan}, [2]float64{nan, nan}
	s.MeanU = nan
	s.Outside = 0
	for _, v := range s.Values {
		if (s.Lower != nil && v < *s.Lower) || (s.Upper != nil && v > *s.Upper) {
			s.Outside++
		}
	}
	if s.N > 0 {
		s.Min, s.Max = slices.Min(s.Values), slices.Max(s.Values)
		sum := 0.0
		for _, v := range s.Values {
			sum += v
		}
		s.Mean = sum / float64(s.N)
	}
	if s.N >= 2 {
		c, err := spc.Capable(s.Values, s.Lower, s.Upper, o.Confidence)
		if err != nil {
			acc.failed = err
		} else {
			s.Mean, s.SDWithin, s.SDOverall = c.Mean, c.SDWithin, c.SDOverall
			s.Cp, s.Cpk, s.Pp, s.Ppk = c.Cp, c.Cpk, c.Pp, c.Ppk
			s.CpCI, s.CpkCI, s.FractionOutside = c.CpCI, c.CpkCI, c.FractionOutside
		}
	}
	sumU, nU := 0.0, 0
	for _, u := range s.U {
		if !math.IsNaN(u) && !math.IsInf(u, 0) {
			sumU += u
			nU++
		}
	}
	if nU > 0 {
		s.MeanU = sumU / float64(nU)
	}
	lo, hi := band(s.Values, s.Lower, s.Upper, o.Margin)
	s.Hist = spc.Bin(s.Values, lo, hi, o.Bins)
	if s.N >= 2 {
		lo, hi = band(s.Values, nil, nil, o.Margin)
		s.DataHist = spc.Bin(s.Values, lo, hi, o.Bins)
	}
}

// band is the histogram's range: a two-sided tolerance widened by margin·W on
// each side (W its width); a one-sided one from the limit to the far end of
// the data's robust range, widened by margin times that span on each side;
// with no tolerance, the data's robust range widened the same way. The robust
// range is the data within Tukey's inner fences (fences), so a few outliers
// never set it, whatever the number of values.
func band(xs []float64, lower, upper *float64, margin float64) (lo, hi float64) {
	switch {
	case lower != nil && upper != nil && *upper > *lower:
		w := *upper - *lower
		return *lower - margin*w, *upper + margin*w
	case lower == nil && upper == nil:
		if len(xs) == 0 {
			return 0, 1
		}
		a, b := fences(xs)
		if !(b > a) { // all equal: a band of their size around them
			d := math.Abs(a) / 2
			if !(d > 0) {
				d = 0.5
			}
			a, b = a-d, b+d
		}
		return a - margin*(b-a), b + margin*(b-a)
	}
	var tl, end float64
	if upper != nil {
		tl = *upper
		end = tl
		if len(xs) > 0 {
			end, _ = fences(xs)
		}
	} else {
		tl = *lower
		end = tl
		if len(xs) > 0 {
			_, end = fences(xs)
		}
	}
	a, b := min(tl, end), max(tl, end)
	span := b - a
	if !(span > 0) {
		span = math.Abs(tl)
		if !(span > 0) {
			span = 1
		}
	}
	return a - margin*span, b + margin*span
}

// fences is the robust range of xs (at least one value): the smallest and
// the largest value within Tukey's inner fences Q1 − 1.5·IQ and
// Q3 + 1.5·IQ, IQ = Q3 − Q1 (NIST/SEMATECH e-Handbook §7.1.6, "What are
// outliers in the data?"), the quartiles interpolated between order
// statistics.
func fences(xs []float64) (lo, hi float64) {
	s := slices.Clone(xs)
	slices.Sort(s)
	q := func(p float64) float64 {
		h := p * float64(len(s)-1)
		i := int(h)
		if i+1 >= len(s) {
			return s[len(s)-1]
		}
		return s[i] + (h-float64(i))*(s[i+1]-s[i])
	}
	q1, q3 := q(0.25), q(0.75)
	lf, uf := q1-1.5*(q3-q1), q3+1.5*(q3-q1)
	lo, hi = s[len(s)-1], s[0]
	for _, x := range s {
		if x >= lf && x <= uf {
			lo, hi = min(lo, x), max(hi, x)
		}
	}
	return lo, hi
}

// notes adds what a reader must know about acc's numbers.
func (r *Report) notes(acc *resultAcc) {
	if acc.other > 0 {
		r.Notes = append(r.Notes, fmt.Sprintf("%s: %d run(s) were judged against another tolerance than the newest run's (%s); every value is compared with the newest.",
			acc.Name, acc.other, tolerance(acc.Lower, acc.Upper, acc.Unit)))
	}
	if acc.failed != nil {
		r.Notes = append(r.Notes, fmt.Sprintf("%s: no capability: %v.", acc.Name, acc.failed))
	}
	if acc.N < 2 {
		r.Notes = append(r.Notes, fmt.Sprintf("%s: %d valid value(s), fewer than 2: no capability.", acc.Name, acc.N))
	} else if acc.SDWithin == 0 || acc.SDOverall == 0 {
		r.Notes = append(r.Notes, fmt.Sprintf("%s: a standard deviation is 0 (within %s, overall %s): the indices built on it are not numbers a process can be judged by (the values may be rounded, or a unit repeated).",
			acc.Name, units.FormatSig(acc.SDWithin, 3), units.FormatSig(acc.SDOverall, 3)))
	}
	if acc.Invalid > 0 {
		r.Notes = append(r.Notes, fmt.Sprintf("%s: %d unit(s) have no valid value in their latest run; they are left out of its numbers.", acc.Name, acc.Invalid))
	}
	if acc.absent > 0 {
		r.Notes = append(r.Notes, fmt.Sprintf("%s: %d unit(s) were tested without this result or its limit (another product or sequence).", acc.Name, acc.absent))
	}
}

// tolerance is a tolerance in words: "−50 … 50 uV", "≤ 100 ppm".
func tolerance(lower, upper *float64, unit string) string {
	f := func(v float64) string { return units.FormatSig(v, 6) }
	u := ""
	if unit != "" {
		u = " " + unit
	}
	switch {
	case lower != nil && upper != nil:
		return f(*lower) + " … " + f(*upper) + u
	case lower != nil:
		return "≥ " + f(*lower) + u
	case upper != nil:
		return "≤ " + f(*upper) + u
	}
	return "no tolerance"
}

// pairs puts each pre-trim result beside the post-trim result of the same
// quantity and channel (by name, pre_X beside post_X, where the record does
// not say the quantity).
func (r *Report) pairs() {
	for i, pre := range r.Results {
		if pre.Stage != "as_found" {
			continue
		}
		for j, post := range r.Results {
			if post.Stage != "as_left" || post.Channel != pre.Channel {
				continue
			}
			q, ok := pre.Quantity, pre.Quantity != "" && pre.Quantity == post.Quantity && pre.Quantity != "code"
			if !ok && (pre.Quantity == "" || post.Quantity == "") {
				x, a := strings.CutPrefix(pre.Result, "pre_")
				y, b := strings.CutPrefix(post.Result, "post_")
				q, ok = x, a && b && x == y
			}
			if ok {
				r.Pairs = append(r.Pairs, Pair{Quantity: q, Channel: pre.Channel, Pre: i, Post: j})
				break
			}
		}
	}
}

// noLot is the trend group of the runs made without a lot.
const noLot = "(no lot)"

// trends groups each result's values by the unit's day, lot or station and
// charts the group means and spreads.
func (r *Report) trends(by string) {
	for ri := range r.Results {
		s := &r.Results[ri]
		if !(s.SDWithin > 0) || math.IsInf(s.SDWithin, 0) || math.IsNaN(s.Mean) || math.IsInf(s.Mean, 0) {
			continue
		}
		at := map[string]int{}
		var keys []string
		var groups [][]float64
		for vi, v := range s.Values {
			u := &r.Units[s.Units[vi]]
			var k string
			switch by {
			case ByLot:
				k = u.Lot
				if k == "" {
					k = noLot
				}
			case ByStation:
				k = u.Station
			default:
				k = u.Finished.UTC().Format("2006-01-02")
			}
			g, ok := at[k]
			if !ok {
				g = len(keys)
				at[k] = g
				keys = append(keys, k)
				groups = append(groups, nil)
			}
			groups[g] = append(groups[g], v)
		}
		if len(keys) < 2 {
			continue
		}
		if by != ByLot && by != ByStation {
			order := make([]int, len(keys))
			for i := range order {
				order[i] = i
			}
			slices.SortFunc(order, func(a, b int) int { return cmp.Compare(keys[a], keys[b]) })
			ks, gs := make([]string, len(keys)), make([][]float64, len(keys))
			for i, j := range order {
				ks[i], gs[i] = keys[j], groups[j]
			}
			keys, groups = ks, gs
		}
		means, spreads, err := spc.Subgroups(groups, s.Mean, s.SDWithin)
		if err != nil {
			continue
		}
		t := Trend{Result: ri, By: by, Means: means, Spreads: spreads}
		for i, g := range groups {
			t.Groups = append(t.Groups, Group{Key: keys[i], N: len(g), Mean: mean(g), SD: sd(g)})
		}
		r.Trends = append(r.Trends, t)
	}
}

func mean(xs []float64) float64 {
	s := 0.0
	for _, x := range xs {
		s += x
	}
	return s / float64(len(xs))
}

// sd is the sample standard deviation (n − 1), NaN for fewer than 2 values.
func sd(xs []float64) float64 {
	if len(xs) < 2 {
		return math.NaN()
	}
	m := mean(xs)
	s := 0.0
	for _, x := range xs {
		s += (x - m) * (x - m)
	}
	return math.Sqrt(s / float64(len(xs)-1))
}
