package plan

import (
	"fmt"
	"math"
	"slices"

	"trimline/instruments/units"
	"trimline/limits"
	"trimline/sequencer"
)

// Predicted names the post-trim results the planner predicts, the only ones it
// judges: the offset (output unit) and the gain error (fraction) of the line the
// station fits after trim.
var Predicted = []string{sequencer.ResPostOffset, sequencer.ResPostGainError}

// Band is what the limit file accepts of one predicted result, in SI: Lo is −Inf
// or Hi +Inf when unbounded on that side.
type Band struct {
	Lo, Hi float64
	Limits []string // the limits that bound it, by name, in file order
	Unit   string   // the unit the first of them is written in ("uV", "ppm"), for display
}

// Bounded reports whether the band bounds its result at all.
func (b Band) Bounded() bool { return !math.IsInf(b.Lo, -1) || !math.IsInf(b.Hi, 1) }

// Pass reports whether v is inside the band (its ends included).
func (b Band) Pass(v float64) bool { return v >= b.Lo && v <= b.Hi }

// Width is Hi − Lo (+Inf when one side is unbounded).
func (b Band) Width() float64 { return b.Hi - b.Lo }

// Tolerances are the limit file's bounds on the predicted results, and the
// limits it judges that the planner does not predict.
type Tolerances struct {
	File           string
	Offset, Gain   Band     // post_offset, post_gain_error
	NotPredicted   []string // limits on other results, by name, in file order
	ExpressionOnly []string // limits on a predicted result that cannot be read as bounds
	// OffsetDim is the dimension the product's steps give post_offset (volts,
	// amperes or counts); 0 when not known.
	OffsetDim units.Dim
}

// Judge reports whether a unit with post-trim offset and gain error passes both
// bands.
func (t *Tolerances) Judge(offset, gainError float64) bool {
	return t.Offset.Pass(offset) && t.Gain.Pass(gainError)
}

// TolerancesOf reads the bounds set gives the predicted results: every limit
// that can be read as bounds on post_offset or post_gain_error alone (a
// tolerance, or an expression that is a conjunction of comparisons), several
// on one result intersected. Limits are judged as simple acceptance against
// the tolerance itself: the decision rule's guard band and the station's
// measurement uncertainty are not applied. A limit on one channel bounds the
// result of every channel alike.
func TolerancesOf(set *limits.Set) *Tolerances {
	t := &Tolerances{File: set.File, Offset: unbounded(), Gain: unbounded()}
	bounded := map[string]bool{}
	for _, b := range set.Bounds() {
		var band *Band
		switch b.Result {
		case sequencer.ResPostOffset:
			band = &t.Offset
		case sequencer.ResPostGainError:
			band = &t.Gain
		default:
			continue
		}
		if b.Lower != nil {
			band.Lo = math.Max(band.Lo, *b.Lower)
		}
		if b.Upper != nil {
			band.Hi = math.Min(band.Hi, *b.Upper)
		}
		if !slices.Contains(band.Limits, b.Limit) {
			band.Limits = append(band.Limits, b.Limit)
		}
		if band.Unit == "" {
			band.Unit = b.Unit
		}
		bounded[b.Limit] = true
	}
	for _, l := range set.Limits {
		if bounded[l.Name] || slices.Contains(t.NotPredicted, l.Name) || slices.Contains(t.ExpressionOnly, l.Name) {
			continue
		}
		if slices.ContainsFunc(l.Uses, func(u string) bool { return slices.Contains(Predicted, u) }) {
			t.ExpressionOnly = append(t.ExpressionOnly, l.Name)
		} else {
			t.NotPredicted = append(t.NotPredicted, l.Name)
		}
	}
	return t
}

func unbounded() Band { return Band{Lo: math.Inf(-1), Hi: math.Inf(1)} }

// LoadTolerances loads the limit file at path, its result names checked against
// the steps of the product's sequence beside it (sequencer.CatalogFor), and
// reads its tolerances with TolerancesOf. A limit file that does not load comes
// back as its error (a files.List for problems in the file).
func LoadTolerances(path string) (*Tolerances, error) {
	cat, _, _ := sequencer.CatalogFor(path)
	set, err := limits.LoadFile(path, cat)
	if err != nil {
		return nil, fmt.Errorf("limit file %s: %w", path, err)
	}
	t := TolerancesOf(set)
	t.OffsetDim = cat[sequencer.ResPostOffset]
	return t, nil
}

// YieldSE is the standard error of a yield p estimated from m independent
// trials: √(p(1 − p)/m) (binomial proportion; NIST/SEMATECH e-Handbook
// §7.2.4, the normal approximation to a proportion's sampling distribution).
func YieldSE(p float64, m int) float64 {
	if m <= 0 {
		return math.NaN()
	}
	return math.Sqrt(p * (1 - p) / float64(m))
}
