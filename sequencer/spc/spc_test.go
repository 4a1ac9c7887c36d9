package spc_test

import (
	"errors"
	"fmt"
	"math"
	"reflect"
	"strings"
	"testing"

	"trimline/sequencer/spc"
)

// near fails the test unless got is within tol of want.
func near(t *testing.T, what string, got, want, tol float64) {
	t.Helper()
	if !(math.Abs(got-want) <= tol) {
		t.Errorf("%s = %.10g, want %.10g ± %g", what, got, want, tol)
	}
}

func ptr(v float64) *float64 { return &v }

// ehandbookIMR is the data of the individuals-chart example, NIST/SEMATECH
// e-Handbook of Statistical Methods §6.3.2.2.
var ehandbookIMR = []float64{49.6, 47.6, 49.9, 51.3, 47.8, 51.2, 52.6, 52.4, 53.6, 52.1}

// ehandbookCUSUM is the data of the tabular CUSUM example, e-Handbook
// §6.3.2.3 (target 325, k = 0.3175, h = 4.1959).
var ehandbookCUSUM = []float64{
	324.925, 324.675, 324.725, 324.350, 325.350, 325.225, 324.125, 324.525, 325.225, 324.600,
	324.625, 325.150, 328.325, 327.250, 327.825, 328.500, 326.675, 327.775, 326.875, 328.350,
}

func TestIMRHandbookExample(t *testing.T) {
	ind, mr, err := spc.IMR(ehandbookIMR)
	if err != nil {
		t.Fatal(err)
	}
	// e-Handbook §6.3.2.2: x̄ = 50.81, MR̄ = 1.8778, UCL = 55.8041,
	// LCL = 45.8159 (x̄ ± 3·MR̄/1.128), MR chart UCL = 3.267·MR̄ = 6.1347.
	near(t, "center", ind.Center, 50.81, 5e-9)
	near(t, "MR̄", mr.Center, 1.8778, 5e-5)
	near(t, "UCL", ind.UCL, 55.8041, 5e-5)
	near(t, "LCL", ind.LCL, 45.8159, 5e-5)
	near(t, "MR UCL", mr.UCL, 6.1347, 5e-5)
	near(t, "MR LCL", mr.LCL, 0, 0)
	near(t, "sigma", ind.Sigma, 1.8778/1.128, 5e-5)
	if ind.Kind != "individuals" || mr.Kind != "moving_range" {
		t.Errorf("kinds %q, %q", ind.Kind, mr.Kind)
	}
	if len(ind.Points) != 10 || len(mr.Points) != 9 {
		t.Fatalf("%d individuals and %d moving ranges, want 10 and 9", len(ind.Points), len(mr.Points))
	}
	// e-Handbook §6.3.2.2 data: the 4th moving range is |47.8 − 51.3| = 3.5.
	near(t, "MR 4", mr.Points[3].Value, 3.5, 1e-12)
	near(t, "I 5", ind.Points[4].Statistic, 47.8, 0)
	near(t, "point UCL", ind.Points[9].UCL, 55.8041, 5e-5)
	// Hand-worked from the limits above: σ = 1.6647, so the 1σ band is
	// 49.145 … 52.475 and the 2σ band 47.48 … 54.14; no point is beyond 2σ,
	// only 52.6 and 53.6 of the last five lie above 1σ, and no run of eight
	// stays on one side of 50.81: no Western Electric rule fires.
	if len(ind.Signals) != 0 || len(mr.Signals) != 0 {
		t.Errorf("signals %v, %v; want none", ind.Signals, mr.Signals)
	}
}

func TestIMRMovingRangeSignal(t *testing.T) {
	// Hand-worked: moving ranges eight times 1, then 9: MR̄ = 17/9 = 1.8889,
	// MR UCL = 3.267·17/9 = 6.171 (e-Handbook §6.3.2.2 formula) < 9; the
	// individuals chart has x̄ = 2.3, σ = 1.6745, UCL = 7.32 < 10, and
	// points 1…9 all lie below x̄, so rule 4 fires at 8 and 9.
	ind, mr, err := spc.IMR([]float64{1, 2, 1, 2, 1, 2, 1, 2, 1, 10})
	if err != nil {
		t.Fatal(err)
	}
	near(t, "MR UCL", mr.UCL, 3.267*(17.0/9), 1e-12)
	near(t, "UCL", ind.UCL, 2.3+3*(17.0/9)/1.128, 1e-12)
	want := []spc.Signal{{Index: 10, Rule: "beyond_3_sigma"}}
	if !reflect.DeepEqual(mr.Signals, want) {
		t.Errorf("moving-range signals %v, want %v", mr.Signals, want)
	}
	want = []spc.Signal{{8, "8_on_one_side"}, {9, "8_on_one_side"}, {10, "beyond_3_sigma"}}
	if !reflect.DeepEqual(ind.Signals, want) {
		t.Errorf("individuals signals %v, want %v", ind.Signals, want)
	}
}

func TestCUSUMHandbookExample(t *testing.T) {
	c, err := spc.CUSUM(ehandbookCUSUM, 325, 0.3175, 4.1959)
	if err != nil {
		t.Fatal(err)
	}
	// e-Handbook §6.3.2.3: first out-of-control signal at group 14 with
	// S_hi = 4.94; S_hi = 19.04 at group 20.
	if len(c.Signals) == 0 || c.Signals[0] != (spc.Signal{Index: 14, Rule: "cusum_high"}) {
		t.Fatalf("signals %v, want the first at 14 (cusum_high)", c.Signals)
	}
	near(t, "S_hi(14)", c.Points[13].Statistic, 4.94, 0.005)
	near(t, "S_hi(20)", c.Points[19].Statistic, 19.04, 0.005)
	// Hand-worked from the §6.3.2.3 recursion: S_hi(13) = 3.325 − 0.3175 =
	// 3.0075 < h, so 13 does not signal; S_hi rises to group 20 and is never
	// reset, so groups 14…20 all signal high. The e-Handbook's low sum
	// max(0, S_lo + 325 − k − x) reaches 0.715 at group 8 (0.5575 at 7 plus
	// 0.475 − 0.3175) and never h, so Lower = −0.715 there and no low signal.
	near(t, "S_hi(13)", c.Points[12].Statistic, 3.0075, 1e-9)
	near(t, "S_lo(8)", c.Points[7].Lower, -0.715, 1e-9)
	if len(c.Signals) != 7 || c.Signals[6] != (spc.Signal{Index: 20, Rule: "cusum_high"}) {
		t.Errorf("signals %v, want cusum_high at 14…20", c.Signals)
	}
	for i, p := range c.Points {
		if p.Lower > 0 || p.Statistic < 0 || p.UCL != 4.1959 || p.LCL != -4.1959 {
			t.Errorf("point %d: %+v", i+1, p)
		}
	}
	if c.Center != 0 || c.UCL != 4.1959 || c.LCL != -4.1959 {
		t.Errorf("limits %v %v %v, want 0, h, −h", c.Center, c.UCL, c.LCL)
	}
}

func TestCUSUMLow(t *testing.T) {
	// Hand-worked, target 10, k = 0.5, h = 2: deviations −1.5 add −1 each to
	// S_lo: −1, −2, −3, so the third value crosses −h.
	c, err := spc.CUSUM([]float64{8.5, 8.5, 8.5}, 10, 0.5, 2)
	if err != nil {
		t.Fatal(err)
	}
	near(t, "S_lo(3)", c.Points[2].Lower, -3, 1e-12)
	want := []spc.Signal{{Index: 3, Rule: "cusum_low"}}
	if !reflect.DeepEqual(c.Signals, want) {
		t.Errorf("signals %v, want %v", c.Signals, want)
	}
}

func TestEWMAByHand(t *testing.T) {
	// Series of this test's own, λ = 0.3, L = 3, target 10, σ = 1. Hand-worked
	// from the e-Handbook §6.3.2.4 formulas z_t = λx_t + (1−λ)z_{t−1} and
	// half-width L·σ·√(λ/(2−λ)·[1−(1−λ)^{2t}]):
	//   t=1 x=10.5 z = 3.15 + 7       = 10.15     half = 3·√(0.3/1.7·0.51)      = 0.9 (= Lλσ at t = 1)
	//   t=2 x=9.8  z = 2.94 + 7.105   = 10.045    half = 3·√(0.3/1.7·0.7599)    = 1.09859
	//   t=3 x=11.2 z = 3.36 + 7.0315  = 10.3915   half = 3·√(0.3/1.7·0.882351)  = 1.18380
	//   t=4 x=12   z = 3.6 + 7.27405  = 10.87405  half = 3·√(0.3/1.7·0.94235199)= 1.22339
	//   t=5 x=13   z = 3.9 + 7.611835 = 11.511835 half = 3·√(0.3/1.7·0.97175249)= 1.24233
	// steady state 3·√(0.3/1.7) = 1.26025; z_5 = 11.5118 > 11.2423: signal at 5.
	xs := []float64{10.5, 9.8, 11.2, 12, 13}
	c, err := spc.EWMA(xs, spc.EWMAOptions{Lambda: 0.3, Target: ptr(10), Sigma: ptr(1)})
	if err != nil {
		t.Fatal(err)
	}
	z := []float64{10.15, 10.045, 10.3915, 10.87405, 11.511835}
	half := []float64{0.9, 1.09859, 1.18380, 1.22339, 1.24233}
	for i, p := range c.Points {
		near(t, "z", p.Statistic, z[i], 1e-12)
		near(t, "UCL", p.UCL, 10+half[i], 5e-6)
		near(t, "LCL", p.LCL, 10-half[i], 5e-6)
		near(t, "value", p.Value, xs[i], 0)
	}
	near(t, "steady UCL", c.UCL, 11.26025, 5e-6)
	near(t, "steady LCL", c.LCL, 8.73975, 5e-6)
	near(t, "center", c.Center, 10, 0)
	want := []spc.Signal{{Index: 5, Rule: "ewma_beyond_limit"}}
	if !reflect.DeepEqual(c.Signals, want) {
		t.Errorf("signals %v, want %v", c.Signals, want)
	}
}

func TestEWMALambdaOneIsTheIndividualsChart(t *testing.T) {
	// With λ = 1, z_t = x_t and the §6.3.2.4 half-width is L·σ for every t;
	// with the defaults (target x̄, σ = MR̄/1.128, L = 3) the limits are the
	// e-Handbook §6.3.2.2 individuals limits 55.8041 and 45.8159.
	c, err := spc.EWMA(ehandbookIMR, spc.EWMAOptions{Lambda: 1})
	if err != nil {
		t.Fatal(err)
	}
	near(t, "center", c.Center, 50.81, 5e-9)
	near(t, "UCL", c.UCL, 55.8041, 5e-5)
	near(t, "LCL", c.LCL, 45.8159, 5e-5)
	for i, p := range c.Points {
		near(t, "z", p.Statistic, ehandbookIMR[i], 0)
		near(t, "point UCL", p.UCL, 55.8041, 5e-5)
	}
	if len(c.Signals) != 0 {
		t.Errorf("signals %v, want none", c.Signals)
	}
}

func TestWesternElectricEachRule(t *testing.T) {
	// Each series triggers exactly one rule of e-Handbook §6.3.2 (center 0,
	// σ 1); the comments say why the others stay quiet.
	tests := []struct {
		name string
		xs   []float64
		want []spc.Signal
	}{
		// Rule 1 at 3; only one point beyond 2σ; too short for rules 3 and 4.
		{"rule 1", []float64{0.5, -0.5, 3.5, 0.5, -0.5}, []spc.Signal{{3, "beyond_3_sigma"}}},
		// Rule 2 at 5 (2.5, 0.5, 2.5); only two of five beyond 1σ.
		{"rule 2", []float64{0.5, -0.5, 2.5, 0.5, 2.5, -0.5}, []spc.Signal{{5, "2_of_3_beyond_2_sigma"}}},
		// At the start of a series a shorter window counts: two of the first two.
		{"rule 2 below", []float64{-2.5, -2.5}, []spc.Signal{{2, "2_of_3_beyond_2_sigma"}}},
		// Rule 3 at 5 (points 1, 2, 4, 5 beyond +1σ); none beyond 2σ.
		{"rule 3", []float64{1.5, 1.5, 0.5, 1.5, 1.5, -0.5}, []spc.Signal{{5, "4_of_5_beyond_1_sigma"}}},
		// Rule 4 at 8; none beyond 1σ.
		{"rule 4", []float64{0.5, 0.2, 0.8, 0.1, 0.5, 0.9, 0.3, 0.6, -0.2}, []spc.Signal{{8, "8_on_one_side"}}},
		// A run of ten below signals at its 8th, 9th and 10th point.
		{"rule 4 run", []float64{-0.1, -0.1, -0.1, -0.1, -0.1, -0.1, -0.1, -0.1, -0.1, -0.1},
			[]spc.Signal{{8, "8_on_one_side"}, {9, "8_on_one_side"}, {10, "8_on_one_side"}}},
		// Two beyond 2σ on opposite sides are no pattern; 3.0 is not beyond 3σ.
		{"opposite sides", []float64{2.5, -2.5, 0.5, 3.0 - 1e-9}, nil},
		// A point on the center line breaks a run.
		{"center breaks run", []float64{0.1, 0.1, 0.1, 0.1, 0, 0.1, 0.1, 0.1, 0.1}, nil},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got := spc.WesternElectric(tt.xs, 0, 1)
			if !reflect.DeepEqual(got, tt.want) {
				t.Errorf("got %v, want %v", got, tt.want)
			}
			// The same pattern shifted and scaled gives the same signals.
			ys := make([]float64, len(tt.xs))
			for i, x := range tt.xs {
				ys[i] = 100 + 0.5*x
			}
			if got := spc.WesternElectric(ys, 100, 0.5); !reflect.DeepEqual(got, tt.want) {
				t.Errorf("shifted: got %v, want %v", got, tt.want)
			}
		})
	}
	if got := spc.WesternElectric([]float64{5, 5}, 0, 0); got != nil {
		t.Errorf("sigma 0: %v, want nil", got)
	}
}

// alternating returns n values mean ± a, alternating, starting above.
func alternating(n int, mean, a float64) []float64 {
	xs := make([]float64, n)
	for i := range xs {
		xs[i] = mean + a
		if i%2 == 1 {
			xs[i] = mean - a
		}
	}
	return xs
}

func TestCapabilityHandbookExample(t *testing.T) {
	// e-Handbook §6.1.6: USL 20, LSL 8, μ 16, σ 2 give Cp = 1.00,
	// Cpl = 1.3333, Cpu = 0.6667, Cpk = 0.6667. Ten values 16 ± 1.128
	// alternating have mean 16 and every moving range 2.256, so
	// σ_within = 2.256/1.128 = 2.
	c, err := spc.Capable(alternating(10, 16, 1.128), ptr(8), ptr(20), 0)
	if err != nil {
		t.Fatal(err)
	}
	near(t, "mean", c.Mean, 16, 1e-12)
	near(t, "SDWithin", c.SDWithin, 2, 1e-12)
	near(t, "Cp", c.Cp, 1.00, 1e-12)
	near(t, "Cpk", c.Cpk, 0.6667, 5e-5)
	lower, _ := spc.Capable(alternating(10, 16, 1.128), ptr(8), nil, 0)
	near(t, "Cpl (lower limit only)", lower.Cpk, 1.3333, 5e-5)
	upper, _ := spc.Capable(alternating(10, 16, 1.128), nil, ptr(20), 0)
	near(t, "Cpu (upper limit only)", upper.Cpk, 0.6667, 5e-5)
	if !math.IsNaN(lower.Cp) || !math.IsNaN(upper.Pp) || !math.IsNaN(lower.CpCI[0]) {
		t.Errorf("one-sided Cp %v, Pp %v, Cp CI %v: want NaN", lower.Cp, upper.Pp, lower.CpCI)
	}

	// Pp and Ppk use the sample SD (§6.1.6): ten values 16 ± 2·√0.9
	// alternating have sample SD √(10·4·0.9/9) = 2.
	p, err := spc.Capable(alternating(10, 16, 2*math.Sqrt(0.9)), ptr(8), ptr(20), 0)
	if err != nil {
		t.Fatal(err)
	}
	near(t, "SDOverall", p.SDOverall, 2, 1e-12)
	near(t, "Pp", p.Pp, 1.00, 1e-12)
	near(t, "Ppk", p.Ppk, 0.6667, 5e-5)
	// Expected fraction outside, normal model with μ 16, σ 2: the upper
	// limit is 2σ away, the lower 4σ; standard normal table (e-Handbook
	// §1.3.6.7.1, from memory): 1 − Φ(2) = 0.02275, Φ(−4) = 0.0000317.
	near(t, "FractionOutside", p.FractionOutside, 0.02275+0.0000317, 5e-6)
	if p.N != 10 {
		t.Errorf("N = %d", p.N)
	}
}

func TestCapabilityConfidenceIntervals(t *testing.T) {
	// n = 10, ν = 9. Table of the chi-square distribution (e-Handbook
	// §1.3.6.7.4, from memory): χ²(0.025; 9) = 2.700, χ²(0.975; 9) = 19.023,
	// χ²(0.05; 9) = 3.325, χ²(0.95; 9) = 16.919. Standard normal
	// (§1.3.6.7.1): z(0.975) = 1.960, z(0.95) = 1.645. Cp interval
	// Ĉp·√(χ²/ν) (§6.1.6); Cpk interval Bissell (1990):
	// Ĉpk·[1 ± z·√(1/(9nĈpk²) + 1/(2(n−1)))].
	xs := alternating(10, 16, 1.128) // Cp = 1, Cpk = 2/3, as above
	tests := []struct {
		confidence     float64
		chiLo, chiHi   float64
		z              float64
		tolCp, tolBiss float64
	}{
		{0.95, 2.700, 19.023, 1.960, 5e-4, 5e-4},
		{0, 2.700, 19.023, 1.960, 5e-4, 5e-4}, // 0 means 95 %
		{0.90, 3.325, 16.919, 1.645, 5e-4, 5e-4},
	}
	for _, tt := range tests {
		c, err := spc.Capable(xs, ptr(8), ptr(20), tt.confidence)
		if err != nil {
			t.Fatal(err)
		}
		near(t, "Cp low", c.CpCI[0], 1*math.Sqrt(tt.chiLo/9), tt.tolCp)
		near(t, "Cp high", c.CpCI[1], 1*math.Sqrt(tt.chiHi/9), tt.tolCp)
		cpk := 2.0 / 3
		half := tt.z * math.Sqrt(1/(9*10*cpk*cpk)+1/(2*9.0))
		near(t, "Cpk low", c.CpkCI[0], cpk*(1-half), tt.tolBiss)
		near(t, "Cpk high", c.CpkCI[1], cpk*(1+half), tt.tolBiss)
	}
	// More units, a narrower interval about the same estimate.
	small, _ := spc.Capable(alternating(10, 16, 1.128), ptr(8), ptr(20), 0.95)
	large, _ := spc.Capable(alternating(200, 16, 1.128), ptr(8), ptr(20), 0.95)
	if !(large.CpkCI[1]-large.CpkCI[0] < small.CpkCI[1]-small.CpkCI[0]) ||
		!(large.CpCI[1]-large.CpCI[0] < small.CpCI[1]-small.CpCI[0]) {
		t.Errorf("n = 200 intervals %v %v not narrower than n = 10 %v %v",
			large.CpCI, large.CpkCI, small.CpCI, small.CpkCI)
	}
	if !(large.CpkCI[0] < large.Cpk && large.Cpk < large.CpkCI[1]) {
		t.Errorf("Cpk %v outside its interval %v", large.Cpk, large.CpkCI)
	}

	// A mean outside the tolerance: Ĉpk = (20 − 21)/(3·2) = −1/6 (§6.1.6
	// formula); the Bissell interval stays [low, high] about it.
	out, err := spc.Capable(alternating(10, 21, 1.128), ptr(8), ptr(20), 0.95)
	if err != nil {
		t.Fatal(err)
	}
	near(t, "Cpk outside", out.Cpk, -1.0/6, 1e-12)
	if !(out.CpkCI[0] < out.Cpk && out.Cpk < out.CpkCI[1]) {
		t.Errorf("Cpk %v outside its interval %v", out.Cpk, out.CpkCI)
	}
}

func TestBin(t *testing.T) {
	// Four bins of width 2.5 over [0, 10]; a bin holds its lower edge, the
	// last also the upper limit.
	xs := []float64{-5, 0, 0.5, 1, 2.49, 2.5, 9.99, 10, 10.01, 100, math.NaN()}
	h := spc.Bin(xs, 0, 10, 4)
	want := spc.Histogram{Lo: 0, Hi: 10, Counts: []int{4, 1, 0, 2}, Under: 1, Over: 2}
	if !reflect.DeepEqual(h, want) {
		t.Errorf("got %+v, want %+v", h, want)
	}

	// 197 values spread over the band and one far outlier: the outlier is
	// counted as overflow and every bin still holds values.
	var ys []float64
	for i := 0; i < 197; i++ {
		ys = append(ys, 0.05+float64(i)*9.9/196)
	}
	ys = append(ys, 1e6)
	h = spc.Bin(ys, 0, 10, 10)
	if h.Over != 1 || h.Under != 0 {
		t.Errorf("under %d, over %d, want 0 and 1", h.Under, h.Over)
	}
	total := 0
	for i, n := range h.Counts {
		if n < 15 || n > 25 {
			t.Errorf("bin %d holds %d of 197 evenly spread values", i, n)
		}
		total += n
	}
	if total != 197 {
		t.Errorf("bins hold %d, want 197", total)
	}

	// No bins: a value below the midpoint is Under, any other Over.
	h = spc.Bin([]float64{1, 5, 9}, 0, 10, 0)
	if len(h.Counts) != 0 || h.Under != 1 || h.Over != 2 {
		t.Errorf("no bins: %+v", h)
	}
}

func TestErrors(t *testing.T) {
	good := []float64{1, 2, 3}
	tests := []struct {
		name string
		err  error
		want error
		text string
	}{
		{"IMR one value", second(spc.IMR([]float64{1})), spc.ErrTooFewPoints, "want at least 2"},
		{"IMR NaN", second(spc.IMR([]float64{1, math.NaN()})), spc.ErrInvalidInput, "value 2 is NaN"},
		{"IMR Inf", second(spc.IMR([]float64{math.Inf(1), 1})), spc.ErrInvalidInput, "value 1 is +Inf"},
		{"EWMA lambda 0", errOf(spc.EWMA(good, spc.EWMAOptions{})), spc.ErrInvalidInput, "0 < lambda <= 1"},
		{"EWMA lambda 1.5", errOf(spc.EWMA(good, spc.EWMAOptions{Lambda: 1.5})), spc.ErrInvalidInput, "0 < lambda <= 1"},
		{"EWMA width", errOf(spc.EWMA(good, spc.EWMAOptions{Lambda: 0.2, Width: -1})), spc.ErrInvalidInput, "width > 0"},
		{"EWMA sigma", errOf(spc.EWMA(good, spc.EWMAOptions{Lambda: 0.2, Sigma: ptr(0)})), spc.ErrInvalidInput, "sigma > 0"},
		{"EWMA flat", errOf(spc.EWMA([]float64{4, 4}, spc.EWMAOptions{Lambda: 0.2})), spc.ErrInvalidInput, "give Sigma"},
		{"EWMA one value", errOf(spc.EWMA([]float64{4}, spc.EWMAOptions{Lambda: 0.2})), spc.ErrTooFewPoints, "want at least 2"},
		{"CUSUM k", errOf(spc.CUSUM(good, 2, -0.1, 1)), spc.ErrInvalidInput, "k >= 0"},
		{"CUSUM h", errOf(spc.CUSUM(good, 2, 0.1, 0)), spc.ErrInvalidInput, "h > 0"},
		{"CUSUM empty", errOf(spc.CUSUM(nil, 2, 0.1, 1)), spc.ErrTooFewPoints, "want at least 1"},
		{"capability no limits", errOf(spc.Capable(good, nil, nil, 0)), spc.ErrInvalidInput, "lower or an upper"},
		{"capability order", errOf(spc.Capable(good, ptr(5), ptr(5), 0)), spc.ErrInvalidInput, "lower limit below the upper"},
		{"capability confidence", errOf(spc.Capable(good, ptr(0), ptr(5), 1)), spc.ErrInvalidInput, "0 < confidence < 1"},
		{"capability one value", errOf(spc.Capable([]float64{1}, ptr(0), ptr(5), 0)), spc.ErrTooFewPoints, "want at least 2"},
	}
	for _, tt := range tests {
		if !errors.Is(tt.err, tt.want) || !strings.Contains(tt.err.Error(), tt.text) {
			t.Errorf("%s: error %v, want %v saying %q", tt.name, tt.err, tt.want, tt.text)
		}
	}
	// With Sigma given, one value makes an EWMA chart.
	if _, err := spc.EWMA([]float64{4}, spc.EWMAOptions{Lambda: 0.2, Sigma: ptr(1)}); err != nil {
		t.Errorf("EWMA of one value with sigma: %v", err)
	}
}

func second(_, _ spc.Chart, err error) error { return err }

func errOf[T any](_ T, err error) error { return err }

// TestC4 checks c4 against the e-Handbook's table of control-chart constants
// (§6.3.2, "Control chart constants"; values as tabulated there, from memory:
// 0.7979 for n = 2, 0.9400 for n = 5, 0.9727 for n = 10, 0.9896 for n = 25).
func TestC4(t *testing.T) {
	for _, c := range []struct {
		n    int
		want float64
	}{{2, 0.7979}, {3, 0.8862}, {5, 0.9400}, {10, 0.9727}, {25, 0.9896}} {
		near(t, fmt.Sprintf("c4(%d)", c.n), spc.C4(c.n), c.want, 5e-5)
	}
	if !math.IsNaN(spc.C4(1)) {
		t.Errorf("c4(1) = %v, want NaN", spc.C4(1))
	}
}

// TestSubgroupsByHand checks the X̄ and s charts of groups of unequal size
// against limits worked by hand from e-Handbook §6.3.2.1 (known sigma): center
// 10, sigma 2; group sizes 4, 1, 9.
func TestSubgroupsByHand(t *testing.T) {
	groups := [][]float64{{9, 11, 10, 12}, {25}, {10, 10, 10, 10, 10, 10, 10, 10, 10}}
	means, spreads, err := spc.Subgroups(groups, 10, 2)
	if err != nil {
		t.Fatal(err)
	}
	// n = 4: 10 ± 3·2/2 = 7 … 13; n = 1: 10 ± 6 = 4 … 16; n = 9: 10 ± 2 = 8 … 12.
	for i, want := range [][2]float64{{7, 13}, {4, 16}, {8, 12}} {
		near(t, fmt.Sprintf("mean LCL %d", i+1), means.Points[i].LCL, want[0], 1e-12)
		near(t, fmt.Sprintf("mean UCL %d", i+1), means.Points[i].UCL, want[1], 1e-12)
	}
	near(t, "mean of group 1", means.Points[0].Statistic, 10.5, 1e-12)
	// Group 2's mean 25 is beyond 16: the only signal of the means chart.
	if len(means.Signals) != 1 || means.Signals[0] != (spc.Signal{Index: 2, Rule: spc.RuleBeyond3Sigma}) {
		t.Errorf("means signals = %v, want group 2 beyond 3 sigma", means.Signals)
	}
	// s of group 1: deviations −1.5, 0.5, −0.5, 1.5 → Σ = 5, s = √(5/3).
	near(t, "s of group 1", spreads.Points[0].Statistic, math.Sqrt(5.0/3), 1e-12)
	// n = 4: c4 = 0.9213 (e-Handbook table, from memory); UCL = 2·(c4 + 3√(1−c4²)).
	c4 := spc.C4(4)
	near(t, "c4(4)", c4, 0.9213, 5e-5)
	near(t, "s UCL n=4", spreads.Points[0].UCL, 2*(c4+3*math.Sqrt(1-c4*c4)), 1e-12)
	near(t, "s LCL n=4", spreads.Points[0].LCL, 0, 0) // c4 − 3√(1−c4²) < 0
	if !math.IsNaN(spreads.Points[1].Statistic) || !math.IsNaN(spreads.Points[1].UCL) {
		t.Errorf("a group of one value has an s point %+v, want NaN", spreads.Points[1])
	}
	// Group 3 has s = 0, below its LCL (n = 9: 2·(c4 − 3√(1−c4²)) = 2·(0.9693 − 0.7377) > 0): a signal.
	c9 := spc.C4(9)
	near(t, "s LCL n=9", spreads.Points[2].LCL, 2*(c9-3*math.Sqrt(1-c9*c9)), 1e-12)
	if len(spreads.Signals) != 1 || spreads.Signals[0].Index != 3 {
		t.Errorf("spreads signals = %v, want group 3 (s = 0 below its LCL)", spreads.Signals)
	}
	if _, _, err := spc.Subgroups(nil, 0, 1); !errors.Is(err, spc.ErrTooFewPoints) {
		t.Errorf("no groups: err = %v", err)
	}
	if _, _, err := spc.Subgroups(groups, 10, 0); !errors.Is(err, spc.ErrInvalidInput) {
		t.Errorf("sigma 0: err = %v", err)
	}
}
