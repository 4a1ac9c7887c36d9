// Package budget is a product's error budget: its nominal transfer, the sources of
// error that make a unit differ from it before trim (each with where it acts, its
// size and distribution, and correlations between them), the trim design to
// evaluate and the limit file the units will be judged against. It reads the
// budget file (*budget*.yaml) strictly, draws units from it (Draw), gives a unit's
// transfer and the pre-trim offset and gain error the station would measure
// (Unit.Output, Unit.PreTrim), and propagates the budget by the law of propagation
// (JCGM 100, Propagate). The Monte Carlo evaluation with the adaptive stopping
// rule of JCGM 101:2008 §7.9 is a higher layer's (sequencer/plan.Simulate, on
// sequencer/uncertainty.MonteCarloModel): this package draws the units it uses.
//
// The file has five sections (testdata/example-budget.yaml shows every key):
//
//	budget:      product (required), revision, limits (a limit file, relative to this
//	             one), temperature {low, high, reference} (for drift sources)
//	transfer:    gain (a plain number or e.g. 200 V/V), output_at_zero, input {low,
//	             high}, points (default 11), rails {low, high, knee} (optional)
//	sources:     each a name, acts (input_offset, output_offset, gain, crossover_step
//	             with at:, rail_compression) and exactly one of normal: σ, uniform:
//	             ±a, triangular: ±a, arcsine: ±a, tolerance: ±a (rectangular, as a data
//	             sheet writes it), drift: ±a per °C, ratio: {r1, r2, correlation},
//	             open_loop: {gain} or {low, high}; an optional mean: for the first five
//	correlations: between: [source, source], coefficient (of their values, −1…1)
//	trim:        dacs (name, adjusts, bits, lsb, no_correction, placement, dnl,
//	             coding) or coefficients (each name, adjusts, format Q<m>.<n> or
//	             float32, unit for an offset), as a sequence writes them; optional
//
// Offsets are in the input's or the output's unit by where they act (V or A);
// gain, compression and tolerances are ratios written with ppm or %.
//
// The package sits at the bottom of the flow, beside the engineering units, so the
// simulator can draw its units from a budget without importing upward. Every
// number past the file boundary is SI: volts (or amperes), ohms, °C, and ratios as
// plain fractions (10 ppm is 1e-5).
package budget

import (
	"math"

	"trimline/instruments/numfmt"
)

// Where a source acts (the values of Source.Acts).
const (
	ActsInputOffset     = "input_offset"     // input-referred offset, in the input's unit (V or A)
	ActsOutputOffset    = "output_offset"    // output-referred offset, in the output's unit
	ActsGain            = "gain"             // relative gain error, a fraction
	ActsCrossoverStep   = "crossover_step"   // a step in input-referred offset above Source.At
	ActsRailCompression = "rail_compression" // gain loss at a rail, a fraction (needs transfer.rails)
)

// Distribution kinds (Dist.Kind). The first four are drawn as written; the last
// three are derived by formula from what the file gives (Source.Drift,
// Source.Ratio, Source.OpenLoop).
const (
	KindNormal     = "normal"     // Sigma; the worst case takes ±3σ
	KindUniform    = "uniform"    // rectangular over Mean ± HalfWidth, σ = a/√3 (also tolerance:)
	KindTriangular = "triangular" // symmetric triangular, σ = a/√6
	KindArcsine    = "arcsine"    // U-shaped, a sinusoid's value at a random phase, σ = a/√2
	KindDrift      = "drift"      // coefficient rectangular ± a per °C times (T − reference), T uniform
	KindRatio      = "ratio"      // G = 1 + r2/r1 with toleranced resistors: G/G_nominal − 1
	KindOpenLoop   = "open_loop"  // closed-loop A/(1 + A·β), β = 1/|Gain|: its ratio to |Gain|, minus 1
)

// Names of the two pre-trim quantities (Propagation.Name; Unit.PreTrim returns
// them in this order).
const (
	PreOffset    = "pre_offset"     // output-referred offset at zero input, in the output's unit
	PreGainError = "pre_gain_error" // slope/Gain − 1, a fraction
)

// Budget is a loaded budget file. It is not changed after Load or Parse and is safe
// for concurrent use.
type Budget struct {
	Product, Revision string
	// LimitsFile is the limit file units are judged against, resolved relative to
	// the budget file ("" when the file names none).
	LimitsFile string
	// Path is the name the budget was loaded under.
	Path        string
	Transfer    Transfer
	Sources     []Source
	Trim        Trim
	Temperature *TempRange // the operating range for drift sources; nil when not given
	// Correlations between sources as the file states them: the correlation
	// coefficient of the two sources' values (JCGM 100 §5.2.2 r(xᵢ, xⱼ)).
	Correlations []Correlation

	latent latentModel // the normal scores behind Draw
}

// Transfer is the nominal transfer y = Gain·x + OutputAtZero and the sweep the
// station fits.
type Transfer struct {
	Gain         float64 // output per input unit (V/V, or A/V …); may be negative
	OutputAtZero float64 // output at zero input, in OutputUnit
	// InputLow and InputHigh bound the stimulus the station sweeps, in InputUnit.
	InputLow, InputHigh float64
	Points              int    // sweep points, equally spaced over the input range (default 11)
	InputUnit           string // "V" or "A"
	OutputUnit          string // "V" or "A"
	Rails               *Rails // nil: no rails
}

// Rails bound the output (OutputUnit); within Knee of a rail the output
// compresses softly (see Unit.Output).
type Rails struct{ Low, High, Knee float64 }

// TempRange is the operating temperature range and the reference temperature
// where drift is zero, in °C.
type TempRange struct{ Low, High, Reference float64 }

// Source is one source of error.
type Source struct {
	Name string
	Acts string // one of the Acts constants
	// Dist is the distribution of the source's value (SI: V, A or a fraction). For
	// a derived source (drift, ratio, open_loop) Kind names it and Mean and Sigma
	// are the value's mean and standard deviation (by formula; first order for a
	// ratio), HalfWidth half the width of [Low, High].
	Dist Dist
	// At is the input level above which a crossover step applies (InputUnit).
	At float64
	// Low and High bound the value for the worst case: Mean ± HalfWidth for a
	// bounded distribution, Mean ± 3σ for a normal one, the extremes of the
	// formula over its inputs' bounds for a derived one.
	Low, High float64
	Drift     *Drift    // KindDrift only
	Ratio     *Ratio    // KindRatio only
	OpenLoop  *OpenLoop // KindOpenLoop only
	Line, Col int       // where the source begins in the file
}

// Dist is a distribution by its kind, mean, half-width and standard deviation.
type Dist struct {
	Kind      string
	Mean      float64
	HalfWidth float64 // a of a bounded distribution; 0 for a normal one
	Sigma     float64
}

// Drift is a temperature coefficient, rectangular over ±Coefficient per °C, times
// the temperature's distance from the reference, the temperature uniform over the
// budget's range.
type Drift struct {
	Coefficient float64 // half-width per °C (V/°C, A/°C or fraction/°C)
	Temp        TempRange
}

// Ratio is the gain of a non-inverting stage G = 1 + r2/r1 from two toleranced
// resistors, each rectangular over its tolerance; Correlation is the correlation
// coefficient of their values (a matched pair).
type Ratio struct {
	R1, R2      Resistor
	Correlation float64
}

// Resistor is a nominal value in ohms and a rectangular tolerance (half-width, a
// fraction).
type Resistor struct{ Value, Tolerance float64 }

// OpenLoop is an amplifier's finite open-loop gain A, in V/V: fixed (Low = High)
// or uniform in decibels between Low and High. The gain error it gives is
// A/(1 + A·β)·β − 1 = −1/(1 + A·β), with β = 1/|Transfer.Gain|.
type OpenLoop struct{ Low, High, Beta float64 }

// Correlation is the correlation coefficient of the values of two sources (by
// index into Budget.Sources).
type Correlation struct {
	A, B        int
	Coefficient float64
}

// DAC is one trim DAC of the design to evaluate (the keys of a sequence's dacs:).
// Its codes run MinCode … MaxCode: 0 … 2^Bits − 1 in binary-offset coding,
// −2^(Bits−1) … 2^(Bits−1) − 1 in two's complement.
type DAC struct {
	Name, Adjusts  string // adjusts: offset or gain
	Placement      string // after_gain (output-referred) or before_gain (input-referred); "" for a gain DAC
	Bits           int
	LSB            float64 // per code: the output's or input's unit by placement, a fraction for gain
	NoCorrection   int     // the code that applies no correction
	DNL            float64 // σ of each code's step error, in LSB (0 when not given)
	TwosComplement bool    // coding: twos_complement (signed codes)
}

// MinCode is the DAC's lowest code.
func (d DAC) MinCode() int { lo, _, _ := numfmt.Codes(d.Bits, d.TwosComplement); return lo }

// MaxCode is the DAC's highest code.
func (d DAC) MaxCode() int { _, hi, _ := numfmt.Codes(d.Bits, d.TwosComplement); return hi }

// MidCode is the code in the middle of the DAC's codes, the usual no-correction
// code: 2^(Bits−1) in binary-offset coding, 0 in two's complement.
func (d DAC) MidCode() int { _, _, mid := numfmt.Codes(d.Bits, d.TwosComplement); return mid }

// Trim is the trim design: DACs, or correction coefficients computed by firmware;
// empty when the file has no trim: section (a budget only drawn from, by the
// simulator).
type Trim struct {
	DACs         []DAC
	Coefficients []Coefficient
}

// Coefficient is one firmware correction coefficient of the design (the keys
// of a sequence's coefficients:): the unit computes corrected = k·raw + m with
// k the gain coefficient and m the offset, each held in its own number format.
type Coefficient struct {
	Name, Adjusts string        // adjusts: gain or offset
	FormatName    string        // as the file writes it: "Q2.14", "float32"
	Format        numfmt.Format // the number the firmware holds, in Unit
	// Unit is the unit of an offset's number as the file writes it ("mA", or
	// the value of one of its units such as "312.5 uV"; "" for the output's SI
	// unit or a gain); UnitSI the SI value of one (1e-3 for mA), 1 for a gain.
	Unit   string
	UnitSI float64
}

// Hold is v (SI: the output's unit for an offset, a plain factor for a gain) as
// the firmware holds it: Round, or the end of the format's range nearest v
// when v lies beyond it, saturated then true.
func (c Coefficient) Hold(v float64) (held float64, saturated bool) {
	x := v / c.UnitSI
	lo, hi := c.Format.Range()
	switch {
	case x < lo:
		return lo * c.UnitSI, true
	case x > hi:
		return hi * c.UnitSI, true
	case math.IsNaN(x):
		return v, true
	}
	return c.Round(v), false
}

// Round is v (SI) rounded to the format in the coefficient's unit, as the
// station's encoding rounds (half away from zero for Q<m>.<n>, to nearest
// float32), whatever the format's range.
func (c Coefficient) Round(v float64) float64 {
	x := v / c.UnitSI
	if c.Format.Kind == numfmt.Float32 {
		return float64(float32(x)) * c.UnitSI
	}
	s := c.Format.Resolution(x)
	return math.Round(x/s) * s * c.UnitSI
}

// Step is the coefficient's rounding step near v (SI), in SI.
func (c Coefficient) Step(v float64) float64 {
	return c.Format.Resolution(v/c.UnitSI) * c.UnitSI
}
