package plan

// The comparison of a plan's predictions with what the stations measured: per
// quantity the two samples side by side (n, mean, SD, quantiles), the
// two-sample Kolmogorov–Smirnov test, the ratio of SDs with its F test, the
// difference of means with Welch's t test, and a sentence that says whether
// the budget got the quantity right; per proportion (yield, saturation of each
// DAC) the predicted fraction beside the measured count with an exact binomial
// test. Nothing here knows how the prediction was made: the planner hands over
// samples by name.

import (
	"cmp"
	"context"
	"errors"
	"fmt"
	"io/fs"
	"maps"
	"math"
	"os"
	"slices"
	"strings"
	"time"

	"gonum.org/v1/gonum/stat/distuv"

	"trimline/reports/ledger"
	"trimline/reports/stats"
)

// QuantileProbs are the probabilities of the quantile table
// (Summary.Quantiles), in order: 1, 5, 25, 50, 75, 95 and 99 %. Read only.
var QuantileProbs = []float64{0.01, 0.05, 0.25, 0.50, 0.75, 0.95, 0.99}

// The quartiles' places in QuantileProbs.
const lowerQuartile, upperQuartile = 2, 4

// DefaultAlpha is the significance level below which a test says that the
// measured side differs from the predicted. A comparison makes several tests
// at once (three per quantity, several quantities), so it is 1 %, not the 5 %
// common practice takes for one test.
const DefaultAlpha = 0.01

// Verdicts of a Quantity or a Proportion.
const (
	Agrees      = "agrees"
	Differs     = "differs"
	NotCompared = "not compared"
)

// MeasuredResults are the results Measured reads from each unit's latest
// attempt: the as-found offset and gain error (the pre-trim fit) and the
// as-left ones (the verification fit), by the names the demo products'
// sequences give them. Written trim codes come from the records' trims, as the
// quantity "<dac>_code" (the trim step's own name for its code result).
var MeasuredResults = []string{"pre_offset", "pre_gain_error", "post_offset", "post_gain_error"}

// Options configures a comparison.
type Options struct {
	Alpha float64 // significance level of every test; 0 means DefaultAlpha
}

func (o Options) alpha() float64 {
	if o.Alpha > 0 && o.Alpha < 1 {
		return o.Alpha
	}
	return DefaultAlpha
}

// Sample is one quantity's two sides: the values a plan predicts and the
// values stations measured, both in Unit (SI: "V", "ratio" for a relative
// gain error, "code"). Shares, optional, are the fractions of the predicted
// variance by source of error (name → fraction); the sentence of a quantity
// whose spread disagrees names the largest.
type Sample struct {
	Name, Unit          string
	Predicted, Measured []float64
	Shares              map[string]float64
}

// Summary describes one side of a quantity. A number that cannot be computed
// (SD of one value, quantiles of none) is NaN.
type Summary struct {
	N         int       `json:"n"`
	Mean      float64   `json:"mean"`
	SD        float64   `json:"sd"`        // sample standard deviation (n − 1)
	Quantiles []float64 `json:"quantiles"` // at QuantileProbs, Hyndman–Fan definition 7 (linear between order statistics)
}

// Quantity is the comparison of one quantity. Every number is in Unit, except
// the ratio and the p-values; NaN where not computable (JSON writers write
// null).
type Quantity struct {
	Name      string  `json:"name"`
	Unit      string  `json:"unit"`
	Predicted Summary `json:"predicted"`
	Measured  Summary `json:"measured"`
	// KSD is the two-sample Kolmogorov–Smirnov statistic (the largest distance
	// between the two empirical distribution functions), KSP its asymptotic
	// p-value (see KS).
	KSD float64 `json:"ks_d"`
	KSP float64 `json:"ks_p"`
	// SDRatio is the measured SD over the predicted; FP the two-sided p-value
	// of the F test of equal variances (which assumes both sides normal).
	SDRatio float64 `json:"sd_ratio"`
	FP      float64 `json:"f_p"`
	// IQRRatio is the measured interquartile range over the predicted: the
	// spread of the middle half, which a few outlying units do not move.
	IQRRatio float64 `json:"iqr_ratio"`
	// MeanDifference is the measured mean minus the predicted; MeanP the
	// two-sided p-value of Welch's t test.
	MeanDifference float64            `json:"mean_difference"`
	MeanP          float64            `json:"mean_p"`
	Shares         map[string]float64 `json:"shares,omitempty"`
	Verdict        string             `json:"verdict"` // Agrees, Differs or NotCompared
	Finding        string             `json:"finding"` // one sentence for the designer
}

// Proportion is the comparison of a predicted fraction of units (the yield,
// the saturation of a DAC) with the count the stations measured.
type Proportion struct {
	Name        string  `json:"name"`         // "yield", "offset DAC saturated"
	Predicted   float64 `json:"predicted"`    // fraction 0–1
	PredictedSE float64 `json:"predicted_se"` // its standard error (Monte Carlo), NaN when not given
	Count       int     `json:"count"`        // units (channels) counted in
	N           int     `json:"n"`            // of so many
	Measured    float64 `json:"measured"`     // Count/N, NaN when N is 0
	// Interval95 is the exact (Clopper–Pearson) 95 % interval of the measured
	// fraction.
	Interval95 [2]float64 `json:"interval_95"`
	// P is the two-sided exact binomial test's p-value of Count of N against
	// Predicted (the predicted fraction taken as exact).
	P       float64 `json:"p"`
	Verdict string  `json:"verdict"`
	Finding string  `json:"finding"`
}

// Summarize describes xs (any order; xs is not changed).
func Summarize(xs []float64) Summary {
	s := Summary{N: len(xs), Mean: math.NaN(), SD: math.NaN(), Quantiles: make([]float64, len(QuantileProbs))}
	sorted := slices.Clone(xs)
	slices.Sort(sorted)
	for i, p := range QuantileProbs {
		s.Quantiles[i] = Quantile(sorted, p)
	}
	if len(xs) == 0 {
		return s
	}
	s.Mean = mean(xs)
	if len(xs) > 1 {
		ss := 0.0
		for _, x := range xs {
			ss += (x - s.Mean) * (x - s.Mean)
		}
		s.SD = math.Sqrt(ss / float64(len(xs)-1))
	}
	return s
}

func mean(xs []float64) float64 {
	s := 0.0
	for _, x := range xs {
		s += x
	}
	return s / float64(len(xs))
}

// Quantile is the p-quantile of sorted (ascending) by Hyndman and Fan's
// definition 7, the linear interpolation between order statistics at rank
// (n − 1)·p that R and spreadsheets use by default: the median of an even
// count is the mean of the middle two. NaN for no values or p outside [0, 1].
func Quantile(sorted []float64, p float64) float64 {
	n := len(sorted)
	if n == 0 || !(p >= 0 && p <= 1) {
		return math.NaN()
	}
	h := float64(n-1) * p
	lo := int(math.Floor(h))
	if lo >= n-1 {
		return sorted[n-1]
	}
	return sorted[lo] + (h-float64(lo))*(sorted[lo+1]-sorted[lo])
}

// KS is the two-sample Kolmogorov–Smirnov test of a and b (any order; neither
// is changed): d is the largest distance between their empirical distribution
// functions, p its asymptotic p-value, the Kolmogorov distribution's upper
// tail KolmogorovQ at λ = (√nₑ + 0.12 + 0.11/√nₑ)·d with nₑ = n·m/(n + m)
// (Stephens' small-sample correction, as Numerical Recipes §14.3 gives it).
// Ties (codes are integers) make the test conservative: p is then too large.
// NaN for an empty side or a NaN value.
func KS(a, b []float64) (d, p float64) {
	if len(a) == 0 || len(b) == 0 || slices.ContainsFunc(a, math.IsNaN) || slices.ContainsFunc(b, math.IsNaN) {
		return math.NaN(), math.NaN()
	}
	x, y := slices.Clone(a), slices.Clone(b)
	slices.Sort(x)
	slices.Sort(y)
	n, m := float64(len(x)), float64(len(y))
	i, j := 0, 0
	for i < len(x) && j < len(y) {
		v := min(x[i], y[j])
		for i < len(x) && x[i] == v {
			i++
		}
		for j < len(y) && y[j] == v {
			j++
		}
		d = max(d, math.Abs(float64(i)/n-float64(j)/m))
	}
	en := math.Sqrt(n * m / (n + m))
	return d, KolmogorovQ((en + 0.12 + 0.11/en) * d)
}

// KolmogorovQ is the upper tail of the Kolmogorov distribution,
// Q(λ) = 2·Σ_{j≥1} (−1)^(j−1)·exp(−2j²λ²), the limit of P(√n·D > λ): 1 for
// λ ≤ 0. Below λ = 1.18 it sums the equivalent series of the lower tail,
// √(2π)/λ·Σ exp(−(2j−1)²π²/(8λ²)), which converges there in a few terms.
func KolmogorovQ(lambda float64) float64 {
	switch {
	case math.IsNaN(lambda):
		return math.NaN()
	case lambda <= 0:
		return 1
	case lambda < 1.18:
		k := 0.0
		for j := 1; j <= 8; j++ {
			t := float64(2*j - 1)
			k += math.Exp(-t * t * math.Pi * math.Pi / (8 * lambda * lambda))
		}
		return min(1, max(0, 1-math.Sqrt(2*math.Pi)/lambda*k))
	}
	q, sign := 0.0, 1.0
	for j := 1; j <= 100; j++ {
		t := sign * math.Exp(-2*float64(j*j)*lambda*lambda)
		q += t
		if math.Abs(t) < 1e-16*q {
			break
		}
		sign = -sign
	}
	return min(1, max(0, 2*q))
}

// FTest is the two-sided p-value of the F test that two normal samples of
// sizes n1 and n2 with SDs sd1 and sd2 have the same variance: F = sd1²/sd2²
// with n1 − 1 and n2 − 1 degrees of freedom. NaN when either side has fewer
// than two values or both SDs are zero.
func FTest(sd1 float64, n1 int, sd2 float64, n2 int) float64 {
	if n1 < 2 || n2 < 2 || math.IsNaN(sd1) || math.IsNaN(sd2) || (sd1 == 0 && sd2 == 0) {
		return math.NaN()
	}
	if sd1 == 0 || sd2 == 0 {
		return 0
	}
	f := distuv.F{D1: float64(n1 - 1), D2: float64(n2 - 1)}
	x := sd1 * sd1 / (sd2 * sd2)
	return min(1, 2*min(f.CDF(x), f.Survival(x)))
}

// WelchT is the two-sided p-value of Welch's t test that two samples (means
// m1, m2, SDs sd1, sd2, sizes n1, n2) have the same mean, with the
// Welch–Satterthwaite degrees of freedom. NaN when a side has fewer than two
// values.
func WelchT(m1, sd1 float64, n1 int, m2, sd2 float64, n2 int) float64 {
	if n1 < 2 || n2 < 2 || math.IsNaN(sd1) || math.IsNaN(sd2) {
		return math.NaN()
	}
	v1, v2 := sd1*sd1/float64(n1), sd2*sd2/float64(n2)
	se := math.Sqrt(v1 + v2)
	if se == 0 {
		if m1 == m2 {
			return 1
		}
		return 0
	}
	dof := (v1 + v2) * (v1 + v2) / (v1*v1/float64(n1-1) + v2*v2/float64(n2-1))
	t := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: dof}
	return min(1, 2*t.Survival(math.Abs(m1-m2)/se))
}

// CompareSample compares one quantity's predicted and measured values under o.
// It is pure; s is only read.
func CompareSample(s Sample, o Options) Quantity {
	q := Quantity{Name: s.Name, Unit: canonUnit(s.Unit), Shares: s.Shares,
		Predicted: Summarize(s.Predicted), Measured: Summarize(s.Measured)}
	q.KSD, q.KSP = KS(s.Predicted, s.Measured)
	q.SDRatio = q.Measured.SD / q.Predicted.SD
	iqr := func(s Summary) float64 { return s.Quantiles[upperQuartile] - s.Quantiles[lowerQuartile] }
	q.IQRRatio = iqr(q.Measured) / iqr(q.Predicted)
	q.FP = FTest(q.Measured.SD, q.Measured.N, q.Predicted.SD, q.Predicted.N)
	q.MeanDifference = q.Measured.Mean - q.Predicted.Mean
	q.MeanP = WelchT(q.Measured.Mean, q.Measured.SD, q.Measured.N, q.Predicted.Mean, q.Predicted.SD, q.Predicted.N)
	q.Verdict, q.Finding = q.judge(o.alpha())
	return q
}

// judge says in one sentence whether the measured side agrees with the
// predicted, and if not, how it differs.
func (q *Quantity) judge(alpha float64) (verdict, finding string) {
	what := Describe(q.Name)
	switch {
	case q.Measured.N < 2:
		return NotCompared, fmt.Sprintf("not compared: the stations measured %d value(s) of %s", q.Measured.N, what)
	case q.Predicted.N < 2:
		return NotCompared, fmt.Sprintf("not compared: the plan predicts %d value(s) of %s", q.Predicted.N, what)
	}
	var parts []string
	switch {
	case q.Predicted.SD == 0 && q.Measured.SD > 0:
		parts = append(parts, fmt.Sprintf("the budget predicts no spread of %s, the stations measured an SD of %s",
			what, formatValue(q.Measured.SD, q.Unit)))
	case q.FP < alpha && q.SDRatio > 1 && q.IQRRatio >= 0.8 && q.IQRRatio <= 1.25:
		// The band is our choice, not a published rule: the middle half within
		// ±25 % of the predicted, while the SD is not.
		parts = append(parts, fmt.Sprintf("measured SD is %s× the predicted (F test %s), but the middle half agrees (IQR ratio %s): a few outlying units widen %s — see the 1 %% and 99 %% rows (defective units, or a tail the budget lacks)",
			formatRatio(q.SDRatio), formatP(q.FP), formatRatio(q.IQRRatio), what))
	case q.FP < alpha && q.SDRatio > 1:
		parts = append(parts, fmt.Sprintf("measured SD is %s× the predicted (F test %s): the budget underestimates what drives %s%s",
			formatRatio(q.SDRatio), formatP(q.FP), what, q.sharesClause()))
	case q.FP < alpha && q.SDRatio < 1:
		parts = append(parts, fmt.Sprintf("measured SD is %s× the predicted (F test %s): the budget overestimates what drives %s%s",
			formatRatio(q.SDRatio), formatP(q.FP), what, q.sharesClause()))
	}
	if q.MeanP < alpha {
		dir := "above"
		if q.MeanDifference < 0 {
			dir = "below"
		}
		parts = append(parts, fmt.Sprintf("measured mean is %s %s the predicted (Welch %s): a systematic error in %s that the budget does not have",
			formatValue(math.Abs(q.MeanDifference), q.Unit), dir, formatP(q.MeanP), what))
	}
	if len(parts) == 0 && q.KSP < alpha {
		parts = append(parts, fmt.Sprintf("the distributions of %s differ in shape though mean and SD agree (KS D = %s, %s): compare the quantiles",
			what, formatRatio(q.KSD), formatP(q.KSP)))
	}
	if len(parts) == 0 {
		return Agrees, fmt.Sprintf("%s agrees: KS D = %s (%s), SD ratio %s (%s)",
			capitalize(what), formatRatio(q.KSD), formatP(q.KSP), formatRatio(q.SDRatio), formatP(q.FP))
	}
	return Differs, capitalize(strings.Join(parts, "; "))
}

// sharesClause names the sources with the largest shares of the predicted
// variance: the largest, and the next ones down to a tenth, three at most.
func (q *Quantity) sharesClause() string {
	if len(q.Shares) == 0 {
		return ""
	}
	names := slices.Collect(maps.Keys(q.Shares))
	slices.SortFunc(names, func(a, b string) int {
		return cmp.Or(cmp.Compare(q.Shares[b], q.Shares[a]), strings.Compare(a, b))
	})
	var parts []string
	for i, n := range names {
		if i == 3 || (i > 0 && q.Shares[n] < 0.1) {
			break
		}
		parts = append(parts, fmt.Sprintf("%s %s", n, formatPercent(q.Shares[n])))
	}
	return " (largest shares: " + strings.Join(parts, ", ") + ")"
}

// Describe is a quantity's name as a sentence says it: "pre_offset" is "the
// pre-trim offset", "gain_code" "the gain DAC's code"; a name it does not know
// is itself.
func Describe(name string) string {
	switch name {
	case "pre_offset":
		return "the pre-trim offset"
	case "pre_gain_error":
		return "the pre-trim gain error"
	case "post_offset":
		return "the offset after trim"
	case "post_gain_error":
		return "the gain error after trim"
	}
	if dac, ok := strings.CutSuffix(name, "_code"); ok && dac != "" {
		return "the " + dac + " DAC's code"
	}
	return name
}

func capitalize(s string) string {
	if s == "" {
		return s
	}
	return strings.ToUpper(s[:1]) + s[1:]
}

// CompareProportion compares a predicted fraction of units (predicted, with
// its standard error se, NaN when unknown) with count of n measured, under o.
func CompareProportion(name string, predicted, se float64, count, n int, o Options) Proportion {
	p := Proportion{Name: name, Predicted: predicted, PredictedSE: se, Count: count, N: n,
		Measured: math.NaN(), Interval95: [2]float64{math.NaN(), math.NaN()}, P: math.NaN()}
	if n > 0 {
		p.Measured = float64(count) / float64(n)
		p.Interval95 = ClopperPearson(count, n, 0.95)
	}
	switch {
	case n == 0:
		p.Verdict, p.Finding = NotCompared, fmt.Sprintf("not compared: no unit measured for %s", name)
		return p
	case math.IsNaN(predicted):
		p.Verdict, p.Finding = NotCompared, fmt.Sprintf("not compared: the plan predicts no %s", name)
		return p
	}
	p.P = BinomialTest(count, n, predicted)
	measured := fmt.Sprintf("%s (%d of %d, 95 %% interval %s to %s)", formatPercent(p.Measured), count, n,
		formatPercent(p.Interval95[0]), formatPercent(p.Interval95[1]))
	if p.P >= o.alpha() {
		p.Verdict = Agrees
		p.Finding = fmt.Sprintf("%s agrees: measured %s, predicted %s (%s)", capitalize(name), measured, formatPercent(predicted), formatP(p.P))
		return p
	}
	dir := "above"
	if p.Measured < predicted {
		dir = "below"
	}
	p.Verdict = Differs
	p.Finding = fmt.Sprintf("Measured %s %s is %s the predicted %s (%s)", name, measured, dir, formatPercent(predicted), formatP(p.P))
	return p
}

// ClopperPearson is the exact two-sided interval at level of a binomial
// fraction from count successes of n: the Beta quantiles (Clopper and
// Pearson 1934), [0, …] for none and […, 1] for all.
func ClopperPearson(count, n int, level float64) [2]float64 {
	if n <= 0 || count < 0 || count > n {
		return [2]float64{math.NaN(), math.NaN()}
	}
	a := (1 - level) / 2
	lo, hi := 0.0, 1.0
	k, nf := float64(count), float64(n)
	if count > 0 {
		lo = distuv.Beta{Alpha: k, Beta: nf - k + 1}.Quantile(a)
	}
	if count < n {
		hi = distuv.Beta{Alpha: k + 1, Beta: nf - k}.Quantile(1 - a)
	}
	return [2]float64{lo, hi}
}

// BinomialTest is the two-sided exact binomial test's p-value of count
// successes of n against the probability p: the total probability of every
// count no more likely than the observed one (as R's binom.test sums it).
func BinomialTest(count, n int, p float64) float64 {
	if n <= 0 || count < 0 || count > n || !(p >= 0 && p <= 1) {
		return math.NaN()
	}
	switch p {
	case 0:
		return b2f(count == 0)
	case 1:
		return b2f(count == n)
	}
	b := distuv.Binomial{N: float64(n), P: p}
	obs := b.Prob(float64(count)) * (1 + 1e-7)
	s := 0.0
	for i := 0; i <= n; i++ {
		if pi := b.Prob(float64(i)); pi <= obs {
			s += pi
		}
	}
	return min(1, s)
}

func b2f(b bool) float64 {
	if b {
		return 1
	}
	return 0
}

// Measurement is what the stations measured of one product, from a ledger:
// the units as trimline stats counts them (a unit is a serial; its latest
// completed attempt counts, with its final verdict; engineering runs are left
// out), and per quantity the values of the units' latest attempts, one per
// channel. Values are in SI units (Unit names them: "V", "ratio", "code").
type Measurement struct {
	Ledger, Product string
	Units           int // counted units
	Passed          int // of them, those whose latest attempt's final verdict is PASS
	// Values and Unit are by quantity: MeasuredResults and "<dac>_code" for
	// every trim DAC with a written code. Missing counts, by quantity, the
	// units (channels) whose latest attempt has the result but no valid value.
	Values  map[string][]float64
	Unit    map[string]string
	Missing map[string]int
	// U is, by quantity, the median expanded uncertainty the stations stated
	// for its values (absent when none was evaluated). Its random part widens
	// the measured spread; its systematic part (shared by every unit) does not.
	U map[string]float64
	// Written and Saturated count, by DAC name, the latest attempts' written
	// codes and those of them the trim marked saturated.
	Written, Saturated map[string]int

	latest []*ledger.QualityRun
}

// Measured reads what the stations of led measured of product (ignoring case;
// "" when the ledger holds one product only): the latest attempt of each unit
// (as trimline stats counts them), its as-found and as-left results
// (MeasuredResults) and the trim codes it wrote. It fails when no unit of the
// product was measured, or product is "" and the ledger holds several, and
// with the ledger's errors. A cancelled ctx stops the read.
func Measured(ctx context.Context, led *ledger.Ledger, product string) (Measurement, error) {
	runs, err := led.QualityRuns(ctx, time.Time{}, time.Time{})
	if err != nil {
		return Measurement{}, fmt.Errorf("against: %w", err)
	}
	if product == "" {
		seen := map[string]bool{}
		for _, r := range runs {
			seen[r.Product] = true
		}
		names := slices.Sorted(maps.Keys(seen))
		if len(names) != 1 {
			return Measurement{}, fmt.Errorf("against: the ledger holds %d products (%s): name one", len(names), strings.Join(names, ", "))
		}
		product = names[0]
	}
	rep := stats.Compute(runs, stats.Options{Filter: stats.Filter{Product: product}})
	m := Measurement{Product: product, Units: rep.Counts.Units, Passed: rep.Counts.Passed,
		Values: map[string][]float64{}, Unit: map[string]string{}, Missing: map[string]int{}, U: map[string]float64{},
		Written: map[string]int{}, Saturated: map[string]int{}}
	if m.Units == 0 {
		return m, fmt.Errorf("against: no unit of %s was measured in the ledger (%d run(s) in all)", product, len(runs))
	}
	expanded := map[string][]float64{}
	byID := make(map[string]*ledger.QualityRun, len(runs))
	for i := range runs {
		byID[runs[i].RunID] = &runs[i]
	}
	for _, u := range rep.Units {
		run := byID[u.RunID]
		if run != nil && run.Disposition != nil { // a review decision: the attempt it decided
			run = byID[run.Disposition.Of]
		}
		if run == nil {
			return m, fmt.Errorf("against: unit %s: run %s not found in the ledger's runs", u.Serial, u.RunID)
		}
		m.latest = append(m.latest, run)
		for _, r := range run.Results {
			if !slices.Contains(MeasuredResults, r.Name) {
				continue
			}
			if !r.Valid || math.IsNaN(r.Value) || math.IsInf(r.Value, 0) {
				m.Missing[r.Name]++
				continue
			}
			m.Values[r.Name] = append(m.Values[r.Name], r.Value)
			m.Unit[r.Name] = r.Unit
			if !math.IsNaN(r.ExpandedU) {
				expanded[r.Name] = append(expanded[r.Name], r.ExpandedU)
			}
		}
	}
	for name, us := range expanded {
		slices.Sort(us)
		m.U[name] = Quantile(us, 0.5)
	}
	codes, err := led.TrimCodes(ctx, product)
	if err != nil {
		return m, fmt.Errorf("against: %w", err)
	}
	for _, run := range m.latest {
		for _, c := range codes[run.RunID] {
			if !c.Written {
				continue
			}
			name := c.DAC + "_code"
			m.Values[name] = append(m.Values[name], float64(c.Code))
			m.Unit[name] = "code"
			m.Written[c.DAC]++
			if c.Saturated {
				m.Saturated[c.DAC]++
			}
		}
	}
	return m, nil
}

// PassedOn counts the units whose latest attempt passed every limit that
// uses any of the results named (a limit's outcome names the results it
// used), of the units whose latest attempt has at least one such limit. It
// is the measured yield a prediction made on those results alone is
// compared with.
func (m Measurement) PassedOn(results []string) (passed, units int) {
	for _, run := range m.latest {
		judged, ok := false, true
		for _, o := range run.Outcomes {
			uses := false
			for name := range o.Values {
				if slices.Contains(results, name) {
					uses = true
					break
				}
			}
			if uses {
				judged = true
				ok = ok && o.Pass
			}
		}
		if judged {
			units++
			if ok {
				passed++
			}
		}
	}
	return passed, units
}

// Prediction is what a plan predicts of a product's units, for Compare.
type Prediction struct {
	Product    string
	Quantities []Predicted
	// Yield is the predicted fraction of units that pass, YieldSE its standard
	// error; NaN when not predicted. YieldOver names the results whose limits
	// the prediction judged (e.g. post_offset, post_gain_error): the measured
	// yield is then counted over those limits only (Measurement.PassedOn);
	// empty means every limit (the units' final verdicts).
	Yield, YieldSE float64
	YieldOver      []string
	// Saturation is, by DAC name, the predicted fraction of units whose code
	// saturates that DAC.
	Saturation map[string]float64
}

// Predicted is one predicted quantity: its name (as Measurement names it:
// MeasuredResults, "<dac>_code"), unit (SI, as Sample; "1" and "fraction"
// are taken for "ratio"), the values (Monte Carlo trials) and optionally each
// source's share of its variance.
type Predicted struct {
	Name, Unit string
	Values     []float64
	Shares     map[string]float64
}

// Comparison is a plan's predictions beside what the stations measured. Its
// fields carry JSON names; a number that cannot be computed is NaN, which a
// JSON writer must write as null (encoding/json refuses NaN).
type Comparison struct {
	Ledger        string       `json:"ledger"`
	Product       string       `json:"product"`
	Units         int          `json:"units"` // units counted in the ledger
	Alpha         float64      `json:"alpha"` // significance level of every test
	QuantileProbs []float64    `json:"probabilities"`
	Quantities    []Quantity   `json:"quantities"`
	Proportions   []Proportion `json:"proportions"` // the yield, then each DAC's saturation
	Notes         []string     `json:"notes"`
}

// Compare compares the prediction p with the measurement m under o: each
// predicted quantity with the measured values of the same name, the yield
// and each DAC's saturation. A quantity measured but not predicted, or
// predicted in another unit, is named in the notes. It is pure.
func Compare(p Prediction, m Measurement, o Options) Comparison {
	c := Comparison{Ledger: m.Ledger, Product: cmp.Or(m.Product, p.Product), Units: m.Units, Alpha: o.alpha(), QuantileProbs: QuantileProbs}
	predicted := map[string]bool{}
	for _, q := range p.Quantities {
		predicted[q.Name] = true
		mu, ok := m.Unit[q.Name]
		if ok && sameUnit(mu, q.Unit) {
			c.Quantities = append(c.Quantities, CompareSample(Sample{Name: q.Name, Unit: mu, Predicted: q.Values, Measured: m.Values[q.Name], Shares: q.Shares}, o))
			continue
		}
		c.Quantities = append(c.Quantities, CompareSample(Sample{Name: q.Name, Unit: q.Unit, Predicted: q.Values, Shares: q.Shares}, o))
		if ok {
			c.Notes = append(c.Notes, fmt.Sprintf("%s is predicted in %s but measured in %s: not compared.", q.Name, q.Unit, mu))
		}
	}
	for _, name := range slices.Sorted(maps.Keys(m.Values)) {
		if !predicted[name] {
			c.Notes = append(c.Notes, fmt.Sprintf("%s was measured (%d values) but not predicted.", name, len(m.Values[name])))
		}
	}
	for _, q := range c.Quantities {
		if u, ok := m.U[q.Name]; ok && q.Measured.N > 0 && strings.HasPrefix(q.Name, "post_") {
			c.Notes = append(c.Notes, fmt.Sprintf("%s: the stations stated a median expanded uncertainty of %s per value; its random part (noise, resolution) widens the measured spread, and a predicted residual may leave it out.",
				q.Name, formatValue(u, q.Unit)))
		}
	}
	for _, name := range slices.Sorted(maps.Keys(m.Values)) {
		if n := len(m.Values[name]); n > m.Units {
			c.Notes = append(c.Notes, fmt.Sprintf("%s: %d values from %d units: every channel of a unit counts as one value.", name, n, m.Units))
		}
	}
	for _, name := range slices.Sorted(maps.Keys(m.Missing)) {
		c.Notes = append(c.Notes, fmt.Sprintf("%s: %d unit(s) have no valid value in their latest attempt; they are left out.", name, m.Missing[name]))
	}

	passed, units := m.Passed, m.Units
	name := "yield"
	if len(p.YieldOver) > 0 {
		passed, units = m.PassedOn(p.YieldOver)
		name = "yield on the limits of " + strings.Join(p.YieldOver, ", ")
		c.Notes = append(c.Notes, fmt.Sprintf("Yield counts the units passing the limits that use %s: %d of %d; on every limit %d of %d passed.",
			strings.Join(p.YieldOver, ", "), passed, units, m.Passed, m.Units))
	}
	c.Proportions = append(c.Proportions, CompareProportion(name, p.Yield, p.YieldSE, passed, units, o))
	for _, dac := range slices.Sorted(maps.Keys(p.Saturation)) {
		c.Proportions = append(c.Proportions, CompareProportion(dac+" DAC saturated", p.Saturation[dac], math.NaN(), m.Saturated[dac], m.Written[dac], o))
	}
	if m.Units < 30 {
		c.Notes = append(c.Notes, fmt.Sprintf("Only %d units measured: the tests see only large differences, and the 1 %% and 99 %% quantiles are the extreme units.", m.Units))
	}
	return c
}

// sameUnit reports whether a and b name the same unit.
func sameUnit(a, b string) bool { return canonUnit(a) == canonUnit(b) }

// canonUnit is the ledger's name of a unit: a plain fraction ("1", as the
// budget names it, or "fraction") is "ratio".
func canonUnit(u string) string {
	if u == "1" || u == "fraction" {
		return "ratio"
	}
	return u
}

// Against opens the ledger at path (a missing file is an error, never a new
// empty ledger), reads what its stations measured of the prediction's product
// (Measured) and compares (Compare). ctx bounds the read.
func Against(ctx context.Context, path string, p Prediction, o Options) (Comparison, error) {
	if _, err := os.Stat(path); err != nil {
		if errors.Is(err, fs.ErrNotExist) {
			return Comparison{}, fmt.Errorf("against: no ledger at %s: %w", path, err)
		}
		return Comparison{}, fmt.Errorf("against: %w", err)
	}
	led, err := ledger.Open(ctx, path)
	if err != nil {
		return Comparison{}, fmt.Errorf("against: %w", err)
	}
	m, err := Measured(ctx, led, p.Product)
	if cerr := led.Close(); cerr != nil && err == nil {
		err = fmt.Errorf("against: close %s: %w", path, cerr)
	}
	if err != nil {
		return Comparison{}, err
	}
	m.Ledger = path
	return Compare(p, m, o), nil
}
