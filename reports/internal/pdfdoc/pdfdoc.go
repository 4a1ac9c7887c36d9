// Package pdfdoc holds what trimline's PDF documents share: a reproducible A4
// document with the Go fonts embedded (so µ, ±, °, Ω render), and round axis ticks
// for plots.
package pdfdoc

import (
	"bytes"
	"math"
	"time"

	"github.com/jung-kurt/gofpdf"
	"golang.org/x/image/font/gofont/gobold"
	"golang.org/x/image/font/gofont/gomono"
	"golang.org/x/image/font/gofont/goregular"
)

// Font family names registered by New: Sans in regular ("") and bold ("B"), Mono
// in regular.
const (
	Sans = "gosans"
	Mono = "gomono"
)

// Pristine copies of the Go fonts, taken before anything can touch them.
// gofpdf v1.16.2 writes into the byte slice given to AddUTF8FontFromBytes (its
// hmtx reader appends to a sub-slice of the font), so every document gets a fresh
// clone: handing it goregular.TTF itself would corrupt that shared slice and make
// the next document differ.
var (
	ttfRegular = bytes.Clone(goregular.TTF)
	ttfBold    = bytes.Clone(gobold.TTF)
	ttfMono    = bytes.Clone(gomono.TTF)
)

// New returns an A4 portrait document in millimetres dated stamp (the Unix epoch
// for a zero time: gofpdf would otherwise use the wall clock), with sorted catalog
// and compression so that the same content gives the same bytes, no automatic page
// breaks, the given margins, no cell margin, and the fonts registered. Safe for
// concurrent use: each call makes its own document.
func New(stamp time.Time, left, top, right float64) *gofpdf.Fpdf {
	stamp = stamp.UTC()
	if stamp.IsZero() {
		stamp = time.Unix(0, 0).UTC()
	}
	pdf := gofpdf.New("P", "mm", "A4", "")
	pdf.SetCreationDate(stamp)
	pdf.SetModificationDate(stamp)
	pdf.SetCatalogSort(true)
	pdf.SetCompression(true)
	pdf.SetAutoPageBreak(false, 0)
	pdf.SetMargins(left, top, right)
	pdf.SetCellMargin(0)
	pdf.AddUTF8FontFromBytes(Sans, "", bytes.Clone(ttfRegular))
	pdf.AddUTF8FontFromBytes(Sans, "B", bytes.Clone(ttfBold))
	pdf.AddUTF8FontFromBytes(Mono, "", bytes.Clone(ttfMono))
	return pdf
}

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
