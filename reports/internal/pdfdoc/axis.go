package pdfdoc

import (
	"math"
	"strconv"
	"strings"
)

// NiceStep is the round step (1, 2, 2.5 or 5 times a power of ten) nearest to
// span/n; 1 for an empty or non-finite span.
func NiceStep(span float64, n int) float64 {
	raw := span / float64(n)
	if !(raw > 0) || math.IsInf(raw, 0) {
		return 1
	}
	mag := math.Pow(10, math.Floor(math.Log10(raw)))
	f := raw / mag
	switch {
	case f < 1.5:
		f = 1
	case f < 2.25:
		f = 2
	case f < 3.5:
		f = 2.5
	case f < 7.5:
		f = 5
	default:
		f = 10
	}
	return f * mag
}

// Axis is a linear axis over [Lo, Hi] with round ticks inside it, Dec being the
// decimals a tick label needs.
type Axis struct {
	Lo, Hi float64
	Step   float64
	Ticks  []float64
	Dec    int
}

// NewAxis makes an axis over [lo, hi] with about n ticks (at most 40). A span
// too small to show is widened around its value.
func NewAxis(lo, hi float64, n int) Axis {
	if hi < lo {
		lo, hi = hi, lo
	}
	if hi-lo < 1e-12*math.Max(1, math.Abs(hi)) {
		m := math.Max(math.Abs(hi)*0.5, 1)
		lo, hi = lo-m, hi+m
	}
	a := Axis{Lo: lo, Hi: hi, Step: NiceStep(hi-lo, n)}
	for k := math.Ceil(lo/a.Step - 1e-9); k*a.Step <= hi+1e-9*a.Step && len(a.Ticks) < 40; k++ {
		v := k * a.Step
		if math.Abs(v) < a.Step*1e-9 {
			v = 0
		}
		a.Ticks = append(a.Ticks, v)
	}
	for a.Dec = 0; a.Dec < 9; a.Dec++ {
		s := a.Step * math.Pow(10, float64(a.Dec))
		if math.Abs(s-math.Round(s)) < 1e-6*s {
			break
		}
	}
	return a
}

// Pos maps v onto a length w from the axis start.
func (a Axis) Pos(v, w float64) float64 { return (v - a.Lo) / (a.Hi - a.Lo) * w }

// Label is the tick label of v: its decimals are the axis's, and a negative value
// has a real minus sign (Minus).
func (a Axis) Label(v float64) string {
	return Minus(strconv.FormatFloat(v, 'f', a.Dec, 64))
}

// PaddedAxis is NewAxis over [lo, hi] (in either order) widened by pad, a fraction
// of the span, on each side.
func PaddedAxis(lo, hi, pad float64, n int) Axis {
	m := math.Abs(hi-lo) * pad
	return NewAxis(math.Min(lo, hi)-m, math.Max(lo, hi)+m, n)
}

// Minus writes a leading hyphen-minus as the minus sign U+2212, the way a number
// is set in print. "-0" (a negative value rounded to zero) loses its sign.
func Minus(s string) string {
	rest, ok := strings.CutPrefix(s, "-")
	if !ok {
		return s
	}
	if strings.Trim(rest, "0.") == "" {
		return rest
	}
	return "−" + rest
}
