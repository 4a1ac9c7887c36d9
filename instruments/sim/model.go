package sim

import (
	"hash/fnv"
	"math"
	"math/rand/v2"
	"strconv"
)

// Design values of the demo product, the BRX-200 bridge amplifier card: the defaults
// of the DUT settings that describe the card (gain, output_at_zero, rail_low,
// rail_high, rail_knee, offset_bits, gain_bits).
const (
	NominalGain = 200.0 // V/V, nominal closed-loop gain
	Vmid        = 2.5   // V, output at zero input and the gain-trim pivot
	Supply      = 5.0   // V, supply rail; the output stays inside 0..Supply
	RailKnee    = 0.2   // V, width of the soft compression next to each rail

	DACBits  = 12   // bits of each trim DAC
	MidScale = 2048 // code that applies no correction (binary-offset coding)
	MaxCode  = 4095 // largest trim code

	DefaultOffsetLSB = 12.2e-6 // V per code at the output (offset trim after the gain stage)
	DefaultGainLSB   = 10e-6   // fraction per code (10 ppm)
)

// MaxDACBits is the widest trim DAC the model holds.
const MaxDACBits = 24

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

// DAC is the analog behaviour of one trim DAC of one unit: an R-2R DAC of Bits bits
// whose register holds a binary-offset code, or a two's-complement pattern whose top
// bit the card inverts before the analog DAC.
type DAC struct {
	// Bits is the DAC's width, 1..MaxDACBits; 0 means DACBits (12).
	Bits int
	// TwosComplement says the register holds an n-bit two's-complement pattern (no
	// correction at 0) rather than a binary-offset code (no correction at 2^(n−1)).
	TwosComplement bool
	// BitError is the absolute error of each bit's weight in LSB: bit i weighs
	// 2^i + BitError[i]. All zero is an ideal DAC. Entries from Bits on are unused.
	BitError [MaxDACBits]float64
	// Stuck says one bit is stuck in the analog path (the register still reads back
	// what was written): bit StuckBit (0..Bits−1) is forced to 1 if StuckHigh, else 0.
	Stuck     bool
	StuckBit  int
	StuckHigh bool
}

// Width returns the DAC's width in bits (Bits, or DACBits when Bits is 0).
func (d DAC) Width() int {
	if d.Bits == 0 {
		return DACBits
	}
	return d.Bits
}

// Value returns the analog value in LSB of the binary code at the analog DAC's input
// (0..2^Bits−1): Σ bit_i·(2^i + BitError[i]) with a stuck bit forced. Mid-scale
// 2^(Bits−1) on an ideal DAC gives 2^(Bits−1), which the transfer treats as no
// correction.
func (d DAC) Value(code int) float64 {
	v := 0.0
	for i := range d.Width() {
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

// Correction returns the correction in LSB the DAC applies for register code reg:
// Value of the analog code (reg, or reg with its top bit inverted for two's
// complement) minus mid-scale 2^(Bits−1).
func (d DAC) Correction(reg int) float64 {
	msb := 1 << (d.Width() - 1)
	if d.TwosComplement {
		reg ^= msb
	}
	return d.Value(reg) - float64(msb)
}

// NoCorrection returns the register code that applies no correction on an ideal DAC:
// 2^(Bits−1) in binary-offset coding, 0 in two's complement.
func (d DAC) NoCorrection() int {
	if d.TwosComplement {
		return 0
	}
	return 1 << (d.Width() - 1)
}

// MaxRegister returns the largest register code, 2^Bits − 1.
func (d DAC) MaxRegister() int { return 1<<d.Width() - 1 }

// Trim says which trim DACs a card has.
type Trim string

const (
	TrimBoth   Trim = "both"   // an offset and a gain DAC (the demo card)
	TrimOffset Trim = "offset" // an offset DAC only
	TrimGain   Trim = "gain"   // a gain DAC only
)

// HasOffset reports whether a card with trim t has an offset DAC ("" means both).
func (t Trim) HasOffset() bool { return t != TrimGain }

// HasGain reports whether a card with trim t has a gain DAC ("" means both).
func (t Trim) HasGain() bool { return t != TrimOffset }

// UnitParams is everything the analog model of one unit needs. Params derives it
// from the serial number, the bench seed and the DUT settings; tests can also build
// one by hand.
type UnitParams struct {
	Serial string

	NominalGain  float64 // V/V, nominal closed-loop gain, non-zero (negative: inverting)
	OutputAtZero float64 // V, nominal output at zero input with no trim correction
	GainPivot    float64 // V, the output the gain trim scales about
	RailLow      float64 // V, lowest output
	RailHigh     float64 // V, highest output
	RailKnee     float64 // V, width of the soft compression next to each rail

	OpenLoopGain float64 // V/V of the amplifier; 0 or +Inf = ideal (infinite)
	GainError    float64 // fraction, per-unit gain error ge on top of the open-loop error
	InputOffset  float64 // V, input-referred offset vin_os
	OutputOffset float64 // V, output-referred offset vout_os

	CrossoverAt   float64 // V, input level above which the input-pair step applies
	CrossoverStep float64 // V, input-referred, signed; 0 = none

	OffsetLSB        float64 // V per code at the injection point (output if after, input if before)
	GainLSB          float64 // fraction per code
	OffsetTrimBefore bool    // the offset DAC adds at the input of the gain stage
	Trim             Trim    // which DACs the card has; the other's codes are ignored
	OffsetDAC        DAC
	GainDAC          DAC

	Noise float64 // V rms at the output per meter reading (already ×40 for DefectNoisy)
	Tau   float64 // s, first-order settling time constant after a source step; 0 = instant

	Defect Defect // DefectNone, or the one defect this unit carries

	SupplyCurrent float64 // A, the unit's supply current (drawn per unit, 3 % σ by default)

	OffsetTC     float64 // V/°C, input-referred offset drift about TCRef
	GainTC       float64 // 1/°C, gain drift about TCRef
	SensorOffset float64 // °C, error of the unit's own temperature sensor (the unit's: channel 1's draw)
}

// TCRef is the temperature in °C at which a unit's drift is zero: its parameters
// are those at 25 °C.
const TCRef = 25.0

// Gain returns the closed-loop gain before trim in V/V:
// ±ClosedLoopGain(OpenLoopGain, 1/|NominalGain|)·(1 + GainError), negative for an
// inverting card (the open-loop gain shrinks the magnitude either way).
func (p UnitParams) Gain() float64 {
	a := p.OpenLoopGain
	if a == 0 {
		a = math.Inf(1)
	}
	g := ClosedLoopGain(a, 1/math.Abs(p.NominalGain))
	if p.NominalGain < 0 {
		g = -g
	}
	return g * (1 + p.GainError)
}

// TotalOffset returns the output-referred offset in V at zero input with ideal
// mid-scale trim: Gain()·InputOffset + OutputOffset.
func (p UnitParams) TotalOffset() float64 {
	return p.Gain()*p.InputOffset + p.OutputOffset
}

// linear is the transfer in V before the rail compression, settled and noiseless,
// for input x (V) and trim register codes (a code of a DAC the card lacks is ignored).
func (p UnitParams) linear(x float64, offsetCode, gainCode int) float64 {
	return p.linearAt(x, offsetCode, gainCode, 0)
}

// linearAt is linear at dT °C from TCRef: the input-referred offset drifts by
// OffsetTC·dT and the gain by the factor 1 + GainTC·dT.
func (p UnitParams) linearAt(x float64, offsetCode, gainCode int, dT float64) float64 {
	xin := x + p.InputOffset + p.OffsetTC*dT
	if x > p.CrossoverAt {
		xin += p.CrossoverStep
	}
	var ofs float64
	if p.Trim.HasOffset() {
		ofs = p.OffsetDAC.Correction(offsetCode) * p.OffsetLSB
		if p.OffsetTrimBefore {
			xin += ofs
		}
	}
	y := p.OutputAtZero + p.Gain()*(1+p.GainTC*dT)*xin + p.OutputOffset
	if p.Trim.HasGain() {
		gtrim := p.GainDAC.Correction(gainCode) * p.GainLSB
		y = p.GainPivot + (1+gtrim)*(y-p.GainPivot)
	}
	if p.Trim.HasOffset() && !p.OffsetTrimBefore {
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
	return p.rail(p.linear(x, offsetCode, gainCode))
}

// rail compresses y (V) softly into RailLow..RailHigh: identity between RailLow +
// RailKnee and RailHigh − RailKnee, a tanh knee of width RailKnee beyond, so the
// result never leaves the rails and the curve and its slope are continuous.
func (p UnitParams) rail(y float64) float64 {
	k := p.RailKnee
	hi, lo := p.RailHigh-k, p.RailLow+k
	switch {
	case y > hi:
		return hi + k*math.Tanh((y-hi)/k)
	case y < lo:
		return lo + k*math.Tanh((y-lo)/k)
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
// setting overrides it, so overriding one parameter leaves the others unchanged; the
// bit errors of DAC bits beyond the twelfth are drawn after all the others, so a
// 12-bit card's population does not depend on that order.
func Params(serial string, seed uint64, s DUTSettings) UnitParams {
	r := unitRand(serial, seed)
	c := s.card()

	// Draws, in a fixed order.
	zGain := r.NormFloat64()
	zIn, zOut := r.NormFloat64(), r.NormFloat64()
	stepNeg := r.IntN(2) == 1
	var ofsErr, gainErr [MaxDACBits]float64
	for i := range DACBits {
		ofsErr[i] = r.NormFloat64()
	}
	for i := range DACBits {
		gainErr[i] = r.NormFloat64()
	}
	uDefect := r.Float64()
	kind := r.IntN(3)
	stuckGain := r.IntN(2) == 1
	stuckTop := r.IntN(4) // which of the top four bits is stuck
	stuckHigh := r.IntN(2) == 1
	for i := DACBits; i < c.offsetDAC.Width(); i++ {
		ofsErr[i] = r.NormFloat64()
	}
	for i := DACBits; i < c.gainDAC.Width(); i++ {
		gainErr[i] = r.NormFloat64()
	}
	zSupply := r.NormFloat64()                                               // after every older draw, so those stay as they were
	zTCO, zTCG, zSensor := r.NormFloat64(), r.NormFloat64(), r.NormFloat64() // after the supply's

	share := s.InputOffsetShare
	p := UnitParams{
		Serial:           serial,
		NominalGain:      c.gain,
		OutputAtZero:     c.outputAtZero,
		GainPivot:        c.gainPivot,
		RailLow:          c.railLow,
		RailHigh:         c.railHigh,
		RailKnee:         c.railKnee,
		OpenLoopGain:     s.OpenLoopGain,
		GainError:        zGain * s.GainSigma,
		InputOffset:      zIn * s.OffsetSigma * math.Sqrt(share) / math.Abs(c.gain),
		OutputOffset:     zOut * s.OffsetSigma * math.Sqrt(1-share),
		CrossoverAt:      s.CrossoverAt,
		CrossoverStep:    s.CrossoverStep,
		OffsetLSB:        s.OffsetLSB,
		GainLSB:          s.GainLSB,
		OffsetTrimBefore: s.OffsetTrimBefore,
		Trim:             c.trim,
		OffsetDAC:        c.offsetDAC,
		GainDAC:          c.gainDAC,
		Noise:            s.Noise,
		Tau:              s.Tau,
		Defect:           DefectNone,
	}
	supply, sigma := s.SupplyCurrent, s.SupplyCurrentSigma
	if supply == 0 {
		supply = DefaultSupplyCurrent
	}
	p.SupplyCurrent = supply * (1 + sigma*zSupply)
	p.OffsetTC, p.GainTC, p.SensorOffset = zTCO*s.TCOffsetSigma, zTCG*s.TCGainSigma, zSensor*s.SensorSigma
	for _, o := range []struct{ dst, src *float64 }{{&p.OffsetTC, s.TCOffset}, {&p.GainTC, s.TCGain}, {&p.SensorOffset, s.SensorOffset}} {
		if o.src != nil {
			*o.dst = *o.src
		}
	}
	if stepNeg {
		p.CrossoverStep = -p.CrossoverStep
	}
	for i := range p.OffsetDAC.Width() {
		p.OffsetDAC.BitError[i] = ofsErr[i] * s.DNL
	}
	for i := range p.GainDAC.Width() {
		p.GainDAC.BitError[i] = gainErr[i] * s.DNL
	}
	if b := s.Budget; b != nil {
		// The budget's draws come after every other, so the rest of the unit (DNL,
		// defect, supply, drift) is the one the settings alone would make.
		u := b.Draw(r)
		p.OpenLoopGain = 0 // the budget's open-loop gain is in u.GainError
		p.GainError, p.InputOffset, p.OutputOffset = u.GainError, u.InputOffset, u.OutputOffset
		p.CrossoverAt, p.CrossoverStep = u.CrossoverAt, u.CrossoverStep
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
		if stuckGain && p.Trim.HasGain() || !p.Trim.HasOffset() {
			d = &p.GainDAC
		}
		// A high bit: one of the top four (8..11 of a 12-bit DAC).
		n := d.Width()
		d.Stuck, d.StuckBit, d.StuckHigh = true, max(n-4, 0)+stuckTop%min(n, 4), stuckHigh
	case DefectNoisy:
		p.Noise *= NoisyFactor
	}
	return p
}

// ChannelParams derives the parameters of channel k (1-based) of unit serial: channel
// 1 is Params(serial, seed, s) itself, so a one-channel card and channel 1 of a
// multi-channel card are the same population; channel k > 1 is drawn as
// Params(serial+"/"+k, seed, s), an independent analog chain. Serial is then
// serial+"/"+k; SupplyCurrent belongs to the unit and is that of channel 1.
func ChannelParams(serial string, k int, seed uint64, s DUTSettings) UnitParams {
	p := Params(serial, seed, s)
	if k <= 1 {
		return p
	}
	q := Params(serial+"/"+strconv.Itoa(k), seed, s)
	q.SupplyCurrent, q.SensorOffset = p.SupplyCurrent, p.SensorOffset
	return q
}
