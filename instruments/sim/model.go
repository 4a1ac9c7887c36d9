package sim

import (
	"hash/fnv"
	"math"
	"math/rand/v2"
)

// Fixed design values of the demo product, the BRX-200 bridge amplifier card.
const (
	NominalGain = 200.0 // V/V, nominal closed-loop gain
	Vmid        = 2.5   // V, output at zero input and the gain-trim pivot
	Supply      = 5.0   // V, supply rail; the output stays inside 0..Supply
	RailKnee    = 0.2   // V, width of the soft compression next to each rail

	DACBits  = 12   // bits of each trim DAC
	MidScale = 2048 // code that applies no correction
	MaxCode  = 4095 // largest trim code

	DefaultOffsetLSB = 12.2e-6 // V per code at the output (offset trim after the gain stage)
	DefaultGainLSB   = 10e-6   // fraction per code (10 ppm)
)

// Defect is the one manufacturing defect a simulated unit may carry.
type Defect string

const (
	DefectNone     Defect = "none"      // a good unit
	DefectStuckBit Defect = "stuck_bit" // one high bit of a trim DAC stuck at 0 or 1 in the analog path
	DefectNoisy    Defect = "noisy"     // output noise ×40
	DefectOpen     Defect = "open"      // output open: the meter sees ≈ 0 V + noise whatever the input
)

// NoisyFactor multiplies the output noise of a unit with DefectNoisy.
const NoisyFactor = 40.0

// ClosedLoopGain returns the closed-loop gain A/(1 + A·β) in V/V of an amplifier with
// open-loop gain openLoop (V/V) and feedback factor beta (V/V). An infinite open-loop
// gain gives the ideal 1/β. The gain error relative to 1/β is ≈ −1/(A·β).
func ClosedLoopGain(openLoop, beta float64) float64 {
	if math.IsInf(openLoop, 1) {
		return 1 / beta
	}
	return openLoop / (1 + openLoop*beta)
}

// DAC is the analog behaviour of one 12-bit trim DAC of one unit.
type DAC struct {
	// BitError is the absolute error of each bit's weight in LSB: bit i weighs
	// 2^i + BitError[i]. All zero is an ideal DAC.
	BitError [DACBits]float64
	// Stuck says one bit is stuck in the analog path (the register still reads back
	// what was written): bit StuckBit (0..11) is forced to 1 if StuckHigh, else 0.
	Stuck     bool
	StuckBit  int
	StuckHigh bool
}

// Value returns the DAC's analog value in LSB for a register code (0..4095):
// Σ bit_i·(2^i + BitError[i]) with a stuck bit forced. Mid-scale 2048 on an ideal DAC
// gives 2048, which the transfer treats as no correction.
func (d DAC) Value(code int) float64 {
	v := 0.0
	for i := range DACBits {
		bit := code>>i&1 == 1
		if d.Stuck && i == d.StuckBit {
			bit = d.StuckHigh
		}
		if bit {
			v += float64(int(1)<<i) + d.BitError[i]
		}
	}
	return v
}

// UnitParams is everything the analog model of one unit needs. Params derives it
// from the serial number, the bench seed and the DUT settings; tests can also build
// one by hand.
type UnitParams struct {
	Serial string

	OpenLoopGain float64 // V/V of the amplifier; 0 or +Inf = ideal (infinite)
	GainError    float64 // fraction, per-unit gain error ge on top of the open-loop error
	InputOffset  float64 // V, input-referred offset vin_os
	OutputOffset float64 // V, output-referred offset vout_os

	CrossoverAt   float64 // V, input level above which the input-pair step applies
	CrossoverStep float64 // V, input-referred, signed; 0 = none

	OffsetLSB        float64 // V per code at the injection point (output if after, input if before)
	GainLSB          float64 // fraction per code
	OffsetTrimBefore bool    // the offset DAC adds at the input of the gain stage
	OffsetDAC        DAC
	GainDAC          DAC

	Noise float64 // V rms at the output per meter reading (already ×40 for DefectNoisy)
	Tau   float64 // s, first-order settling time constant after a source step; 0 = instant

	Defect Defect // DefectNone, or the one defect this unit carries
}

// Gain returns the closed-loop gain before trim in V/V:
// ClosedLoopGain(OpenLoopGain, 1/NominalGain)·(1 + GainError).
func (p UnitParams) Gain() float64 {
	a := p.OpenLoopGain
	if a == 0 {
		a = math.Inf(1)
	}
	return ClosedLoopGain(a, 1/NominalGain) * (1 + p.GainError)
}

// TotalOffset returns the output-referred offset in V at zero input with ideal
// mid-scale trim: Gain()·InputOffset + OutputOffset.
func (p UnitParams) TotalOffset() float64 {
	return p.Gain()*p.InputOffset + p.OutputOffset
}

// linear is the transfer in V before the rail compression, settled and noiseless,
// for input x (V) and trim register codes.
func (p UnitParams) linear(x float64, offsetCode, gainCode int) float64 {
	xin := x + p.InputOffset
	if x > p.CrossoverAt {
		xin += p.CrossoverStep
	}
	ofs := (p.OffsetDAC.Value(offsetCode) - MidScale) * p.OffsetLSB
	if p.OffsetTrimBefore {
		xin += ofs
	}
	y0 := Vmid + p.Gain()*xin + p.OutputOffset
	gtrim := (p.GainDAC.Value(gainCode) - MidScale) * p.GainLSB
	y := Vmid + (1+gtrim)*(y0-Vmid)
	if !p.OffsetTrimBefore {
		y += ofs
	}
	return y
}

// Output returns the settled, noiseless output in V for input x (V) and the trim
// register codes: the linear transfer through the soft rail compression, or 0 V for
// a unit with DefectOpen.
func (p UnitParams) Output(x float64, offsetCode, gainCode int) float64 {
	if p.Defect == DefectOpen {
		return 0
	}
	return rail(p.linear(x, offsetCode, gainCode))
}

// rail compresses y (V) softly into 0..Supply: identity between RailKnee and
// Supply−RailKnee, a tanh knee of width RailKnee beyond, so the result never leaves
// the rails and the curve and its slope are continuous.
func rail(y float64) float64 {
	hi, lo := Supply-RailKnee, RailKnee
	switch {
	case y > hi:
		return hi + RailKnee*math.Tanh((y-hi)/RailKnee)
	case y < lo:
		return lo + RailKnee*math.Tanh((y-lo)/RailKnee)
	}
	return y
}

// unitRand returns the deterministic random stream of one serial under a seed:
// FNV-1a 64 of the serial and the seed key a PCG.
func unitRand(serial string, seed uint64) *rand.Rand {
	h := fnv.New64a()
	h.Write([]byte("trimline/sim/unit\x00"))
	h.Write([]byte(serial))
	return rand.New(rand.NewPCG(h.Sum64(), seed^0x9e3779b97f4a7c15))
}

// streamRand returns a deterministic random stream named name under a seed, for the
// bench's instrument errors and noise.
func streamRand(name string, seed uint64) *rand.Rand {
	h := fnv.New64a()
	h.Write([]byte("trimline/sim/stream\x00"))
	h.Write([]byte(name))
	return rand.New(rand.NewPCG(h.Sum64(), seed^0xd1b54a32d192ed03))
}

// Params derives the parameters of unit serial under the bench seed and the DUT
// settings s, deterministically: the same serial, seed and settings always give the
// same UnitParams. Every random value is drawn in a fixed order whether or not a
// setting overrides it, so overriding one parameter leaves the others unchanged.
func Params(serial string, seed uint64, s DUTSettings) UnitParams {
	r := unitRand(serial, seed)

	// Draws, in a fixed order.
	zGain := r.NormFloat64()
	zIn, zOut := r.NormFloat64(), r.NormFloat64()
	stepNeg := r.IntN(2) == 1
	var ofsErr, gainErr [DACBits]float64
	for i := range DACBits {
		ofsErr[i] = r.NormFloat64()
	}
	for i := range DACBits {
		gainErr[i] = r.NormFloat64()
	}
	uDefect := r.Float64()
	kind := r.IntN(3)
	stuckGain := r.IntN(2) == 1
	stuckBit := DACBits - 4 + r.IntN(4) // a high bit: 8..11
	stuckHigh := r.IntN(2) == 1

	share := s.InputOffsetShare
	p := UnitParams{
		Serial:           serial,
		OpenLoopGain:     s.OpenLoopGain,
		GainError:        zGain * s.GainSigma,
		InputOffset:      zIn * s.OffsetSigma * math.Sqrt(share) / NominalGain,
		OutputOffset:     zOut * s.OffsetSigma * math.Sqrt(1-share),
		CrossoverAt:      s.CrossoverAt,
		CrossoverStep:    s.CrossoverStep,
		OffsetLSB:        s.OffsetLSB,
		GainLSB:          s.GainLSB,
		OffsetTrimBefore: s.OffsetTrimBefore,
		Noise:            s.Noise,
		Tau:              s.Tau,
		Defect:           DefectNone,
	}
	if stepNeg {
		p.CrossoverStep = -p.CrossoverStep
	}
	for i := range DACBits {
		p.OffsetDAC.BitError[i] = ofsErr[i] * s.DNL
		p.GainDAC.BitError[i] = gainErr[i] * s.DNL
	}
	if s.GainError != nil {
		p.GainError = *s.GainError
	}
	if s.Offset != nil {
		p.InputOffset, p.OutputOffset = 0, *s.Offset
	}

	switch {
	case s.Defect != "":
		p.Defect = s.Defect
	case uDefect < s.DefectRate:
		p.Defect = []Defect{DefectStuckBit, DefectNoisy, DefectOpen}[kind]
	}
	switch p.Defect {
	case DefectStuckBit:
		d := &p.OffsetDAC
		if stuckGain {
			d = &p.GainDAC
		}
		d.Stuck, d.StuckBit, d.StuckHigh = true, stuckBit, stuckHigh
	case DefectNoisy:
		p.Noise *= NoisyFactor
	}
	return p
}
