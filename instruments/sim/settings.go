package sim

import (
	"fmt"
	"maps"
	"math"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"time"
	"unicode"

	"trimline/instruments"
	"trimline/instruments/budget"
	"trimline/instruments/units"
)

// DUTSettings are the parsed settings of sim://dut that shape the units Params
// derives. DefaultDUTSettings gives the defaults; ParseDUTSettings reads a spec's
// settings map.
type DUTSettings struct {
	OffsetSigma      float64 // V, σ of the total output-referred offset at zero input; 3 mV
	InputOffsetShare float64 // fraction of the offset variance that is input-referred; 0.3
	GainSigma        float64 // fraction, σ of the per-unit gain error; 0.4 %
	OpenLoopGain     float64 // V/V; 1e7 (140 dB); 0 = ideal
	CrossoverAt      float64 // V, input level of the input-pair hand-over; +3 mV
	CrossoverStep    float64 // V, input-referred magnitude of the hand-over step (random sign per unit); 1.5 µV
	DNL              float64 // LSB, σ of each trim-DAC bit weight's absolute error; 0.05
	OffsetLSB        float64 // V per offset code at the injection point; 12.2 µV after, 12.2 µV/200 = 61 nV before
	GainLSB          float64 // fraction per gain code; 10 ppm
	OffsetTrimBefore bool    // offset DAC adds at the gain-stage input; false (after)
	Noise            float64 // V rms at the output per meter reading; 20 µV
	Tau              float64 // s, settling time constant; 1 ms
	DefectRate       float64 // fraction of units that carry a defect; 0.02
	Defect           Defect  // "" = drawn at DefectRate; otherwise forced on every unit

	Offset    *float64 // V, override: total output-referred offset, all output-referred; nil = drawn
	GainError *float64 // fraction, override: per-unit gain error; nil = drawn

	// Budget is the error budget the units are drawn from (the budget setting), or
	// nil. With a budget a unit's gain error, input- and output-referred offsets and
	// input-pair step come from Budget.Draw on the unit's own random stream, after
	// every other draw, in place of OffsetSigma, InputOffsetShare, GainSigma,
	// OpenLoopGain, CrossoverAt and CrossoverStep; the card's design, its DACs (and
	// DNL), noise, defects and drift stay as the other settings say. Offset and
	// GainError still override what it draws.
	Budget *budget.Budget

	// The card's design and trim port. Every zero value means the demo card's, so a
	// DUTSettings that leaves these out describes the BRX-200. With Output
	// OutputCurrent the output-referred values (Gain per volt, OutputAtZero,
	// GainPivot, the rails, and above Offset, OffsetSigma, Noise and OffsetLSB after
	// the gain stage) are in A and the zero values mean the Current* constants;
	// ParseDUTSettings also sets OffsetSigma, Noise and OffsetLSB to those.
	Gain         float64    // V/V, nominal closed-loop gain, non-zero, negative if inverting; 0 = NominalGain (200)
	OutputAtZero *float64   // V, output at zero input with no trim correction; nil = Vmid (2.5 V)
	GainPivot    *float64   // V, output the gain trim scales about; nil = the output at zero input
	RailLow      *float64   // V, lowest output; nil = 0 V
	RailHigh     *float64   // V, highest output; nil = Supply (5 V)
	RailKnee     float64    // V, width of the soft compression next to each rail; 0 = RailKnee (0.2 V)
	Trim         Trim       // which trim DACs the card has; "" = TrimBoth
	OffsetBits   int        // bits of the offset DAC, 1..MaxDACBits; 0 = DACBits (12)
	GainBits     int        // bits of the gain DAC, 1..MaxDACBits; 0 = DACBits (12)
	OffsetCoding Coding     // "" = CodingBinaryOffset
	GainCoding   Coding     // "" = CodingBinaryOffset
	CodeFormat   CodeFormat // how the port writes and reads codes; "" = CodeDecimal
	Protocol     Protocol   // the port's command templates; empty fields = the demo card's
	Firmware     string     // the reply to Protocol.Firmware; "" = Firmware

	// Output is what the card's output is: OutputVoltage ("" too), OutputCurrent (a
	// loop current: gain in A/V, output_at_zero, rails, offsets and noise in A) or
	// OutputReported (a voltage digitised and answered on the port).
	Output   Output
	ADCLSB   float64 // V per count at the converter of a reported card; 0 = DefaultADCLSB (312.5 µV)
	ADCBits  int     // bits of the converter (signed counts); 0 = DefaultADCBits (16)
	Channels int     // channels of the card, 1..MaxChannels; 0 = 1

	// Input is what the card's input takes: InputVoltage ("" too: a
	// high-impedance voltage input) or InputCurrent (a loop current sensed
	// across a shunt of InputResistance ohms, so the amplifier's input is I·R;
	// every input-referred value and the gain per volt apply to that voltage).
	Input           Input
	InputResistance float64 // Ω, the shunt of a current input; 0 = DefaultInputResistance (250 Ω)

	SupplyCurrent      float64 // A, nominal supply current of a unit; 0 = DefaultSupplyCurrent (1.2 mA)
	SupplyCurrentSigma float64 // fraction, σ of a unit's supply current; 3 %

	Coef Coefficients // firmware correction coefficients; zero = none

	// Temperature (see Chamber): the unit's temperature follows the chamber's
	// through a first-order lag ThermalTau, or sits at Ambient on a bench without
	// a chamber.
	Ambient    float64 // °C, the unit's temperature without a chamber; 25 °C
	ThermalTau float64 // s, the unit's lag behind the chamber (dut_tau); 60 s

	// Temperature coefficients about TCRef (25 °C), drawn per unit (per channel)
	// after every older draw: the input-referred offset drifts by OffsetTC V/°C and
	// the gain by GainTC per °C.
	TCOffsetSigma float64  // V/°C, σ of the input-referred offset TC; 2 µV/°C
	TCGainSigma   float64  // 1/°C, σ of the gain TC; 25 ppm/°C
	SensorSigma   float64  // °C, σ of the offset of the unit's own temperature sensor; 0.3 °C
	TCOffset      *float64 // V/°C, override of the offset TC; nil = drawn
	TCGain        *float64 // 1/°C, override of the gain TC; nil = drawn
	SensorOffset  *float64 // °C, override of the sensor offset; nil = drawn
}

// Output is the kind of a card's output.
type Output string

const (
	OutputVoltage  Output = "voltage"  // a voltage the meter reads (the demo card)
	OutputCurrent  Output = "current"  // a loop current (4–20 mA) the meter reads in FuncCurrent
	OutputReported Output = "reported" // digitised by the card and answered by cmd_read in counts
)

// Input is the kind of a card's input.
type Input string

const (
	InputVoltage Input = "voltage" // a high-impedance voltage input (the demo card)
	InputCurrent Input = "current" // a loop current into a shunt: the amplifier sees I·R
)

// DefaultInputResistance is the shunt of a current-input card, in ohms: 4–20 mA
// across it is 1–5 V.
const DefaultInputResistance = 250.0

// Defaults of a reported card's converter and of a unit's supply.
const (
	DefaultADCLSB        = 312.5e-6 // V per count
	DefaultADCBits       = 16
	DefaultSupplyCurrent = 1.2e-3 // A
	DefaultSupplySigma   = 0.03   // fraction
	MaxChannels          = 16
)

// Defaults of a current-output card (output: current), where a voltage card's
// defaults make no sense: a 4–20 mA loop for 0..20 mV in, output-referred values
// scaled by 4 mA/V (the 16 mA span over the voltage card's 4 V).
const (
	CurrentGain         = 0.8     // A/V
	CurrentAtZero       = 4e-3    // A
	CurrentRailLow      = 3.8e-3  // A
	CurrentRailHigh     = 21e-3   // A
	CurrentRailKnee     = 0.1e-3  // A
	CurrentOffsetSigma  = 12e-6   // A
	CurrentNoise        = 80e-9   // A rms
	CurrentOffsetLSB    = 48.8e-9 // A per offset code (after the gain stage)
	currentPerVoltShare = 4e-3    // A/V: how the voltage defaults scale
)

// Coefficients describe a card's firmware correction: corrected = Gain·raw + Offset,
// applied to each channel's output before the rails (voltage, current) or before
// digitisation (reported).
type Coefficients struct {
	Use          Trim    // which coefficients the card has; "" = none
	GainFormat   string  // numfmt name of the gain; "" = Q2.14
	OffsetFormat string  // numfmt name of the offset; "" = float32
	GainScale    float64 // int<bits> gain: value of one count; 0 = 1e-4
	OffsetScale  float64 // int<bits> offset: value of one count in OffsetUnit's numbers; 0 = 1
	// OffsetUnit is the unit the offset number is in ("mA", "count", "V"); "" = the
	// output's SI unit (V, A, or count for a reported card).
	OffsetUnit    string
	OffsetScaleSI bool // OffsetScale was written as a voltage or current
	Hex           bool // coef_text: hex; decimal otherwise

	// Temperature coefficients the firmware corrects with, T its own sensor's
	// reading: y' = y − TCO·(T − TCRef) − TCG·(T − TCRef)·(y − output_at_zero).
	TC             Trim     // which TCs the card has (offset: TCO, gain: TCG); "" = none
	TCOffsetFormat string   // numfmt name of TCO; "" = float32
	TCOffsetUnit   string   // TCO's unit per °C ("uV", "count"); "" = the output's SI unit
	TCGainFormat   string   // numfmt name of TCG; "" = float32
	TCGainUnit     string   // TCG's unit per °C: "ppm", "%" or "1"; "" = ppm
	TCRef          *float64 // °C, the reference temperature; nil = 25 °C
}

// card is the resolved design of DUTSettings: every default filled in.
type card struct {
	gain, outputAtZero, gainPivot, railLow, railHigh, railKnee float64 // V/V, V
	trim                                                       Trim
	offsetDAC, gainDAC                                         DAC // widths and codings, ideal
	format                                                     CodeFormat
	proto                                                      Protocol
	firmware                                                   string
	output                                                     Output
	adcLSB                                                     float64 // V per count
	adcBits                                                    int
	channels                                                   int
	coef                                                       coefs // resolved correction; coef.use "" = none
	input                                                      Input
	inputOhms                                                  float64 // Ω, the shunt of a current input; 0 for a voltage input
}

// card resolves the design settings to the values the model uses.
func (s DUTSettings) card() card {
	orDefault := func(p *float64, def float64) float64 {
		if p == nil {
			return def
		}
		return *p
	}
	cur := s.Output == OutputCurrent
	pick := func(v, i float64) float64 {
		if cur {
			return i
		}
		return v
	}
	c := card{
		gain:         s.Gain,
		outputAtZero: orDefault(s.OutputAtZero, pick(Vmid, CurrentAtZero)),
		railLow:      orDefault(s.RailLow, pick(0, CurrentRailLow)),
		railHigh:     orDefault(s.RailHigh, pick(Supply, CurrentRailHigh)),
		railKnee:     s.RailKnee,
		trim:         s.Trim,
		offsetDAC:    DAC{Bits: s.OffsetBits, TwosComplement: s.OffsetCoding == CodingTwosComplement},
		gainDAC:      DAC{Bits: s.GainBits, TwosComplement: s.GainCoding == CodingTwosComplement},
		format:       s.CodeFormat,
		proto:        s.Protocol.withDefaults(),
		firmware:     s.Firmware,
	}
	c.gainPivot = orDefault(s.GainPivot, c.outputAtZero)
	if c.gain == 0 {
		c.gain = pick(NominalGain, CurrentGain)
	}
	if c.railKnee == 0 {
		c.railKnee = pick(RailKnee, CurrentRailKnee)
	}
	c.output = s.Output
	if c.output == "" {
		c.output = OutputVoltage
	}
	c.adcLSB, c.adcBits, c.channels = s.ADCLSB, s.ADCBits, s.Channels
	if c.adcLSB == 0 {
		c.adcLSB = DefaultADCLSB
	}
	if c.adcBits == 0 {
		c.adcBits = DefaultADCBits
	}
	if c.channels == 0 {
		c.channels = 1
	}
	c.coef, _ = s.Coef.resolve(c.output) // checked by checkCard
	c.input = s.Input
	if c.input == "" {
		c.input = InputVoltage
	}
	if c.input == InputCurrent {
		c.inputOhms = s.InputResistance
		if c.inputOhms == 0 {
			c.inputOhms = DefaultInputResistance
		}
	}
	if c.trim == "" {
		c.trim = TrimBoth
	}
	if c.format == "" {
		c.format = CodeDecimal
	}
	if c.firmware == "" {
		c.firmware = Firmware
	}
	return c
}

// DefaultDUTSettings returns the DUT settings used when a spec sets nothing.
func DefaultDUTSettings() DUTSettings {
	return DUTSettings{
		OffsetSigma:      3e-3,
		InputOffsetShare: 0.3,
		GainSigma:        0.004,
		OpenLoopGain:     1e7,
		CrossoverAt:      3e-3,
		CrossoverStep:    1.5e-6,
		DNL:              0.05,
		OffsetLSB:        DefaultOffsetLSB,
		GainLSB:          DefaultGainLSB,
		Noise:            20e-6,
		Tau:              1e-3,
		DefectRate:       0.02,

		SupplyCurrent:      DefaultSupplyCurrent,
		SupplyCurrentSigma: DefaultSupplySigma,

		Ambient:    25,
		ThermalTau: 60,

		TCOffsetSigma: 2e-6,
		TCGainSigma:   25e-6,
		SensorSigma:   0.3,
	}
}

// ParseDUTSettings parses the settings map of a sim://dut spec (bench-wide keys and
// latency are accepted and ignored here). A bad key or value gives a
// *instruments.SettingError.
func ParseDUTSettings(settings map[string]string) (DUTSettings, error) {
	c, err := parseSettings(modelDUT, settings, "")
	if err != nil {
		return DUTSettings{}, err
	}
	return c.dut, nil
}

// Instrument models, named by the host of the address.
const (
	modelSource  = "source"
	modelMeter   = "meter"
	modelDUT     = "dut"
	modelSwitch  = "switch"
	modelChamber = "chamber"
)

// benchKeys are the bench-wide settings, allowed in any spec of a group.
type benchKeys struct {
	seed     uint64
	real     bool
	start    time.Time
	seedSet  bool
	timeSet  bool
	startSet bool
}

type sourceConfig struct {
	specReading float64  // fraction of reading
	specRange   float64  // fraction of range
	rng         float64  // V, range the offset spec refers to
	noise       float64  // V rms
	gainError   *float64 // fraction
	offset      *float64 // V
	// Thermal EMF of the wiring to the DUT input: drawn inside ±60 % of
	// emfSpan (500 nV, a few hundred nV as copper–brass junctions at a few
	// kelvin give, common practice), unless emf sets it.
	emfSpan float64  // V
	emf     *float64 // V

	// Current mode (instruments.CurrentSource).
	iRng    float64  // A, current range; 25 mA
	iNoise  float64  // A rms; 2 nA
	iOffset *float64 // A
}

type meterConfig struct {
	specReading float64  // fraction of reading
	specRange   float64  // fraction of range
	rng         float64  // V, power-on range
	nplc        float64  // power-line cycles, power-on
	lineFreq    float64  // Hz
	resolution  float64  // V on the 10 V range; scales with range; 0 = none
	noise       float64  // V rms at 1 PLC
	gainError   *float64 // fraction
	offset      *float64 // V
	force       instruments.Flag
	supply      bool // probe: supply (the unit's supply current) rather than output

	// The current function (FuncCurrent), like the voltage one.
	iSpecReading float64  // fraction of reading; 200 ppm
	iSpecRange   float64  // fraction of range; 20 ppm
	iRng         float64  // A, power-on current range; 100 mA
	iResolution  float64  // A on the 100 mA range; scales with range; 10 nA
	iNoise       float64  // A rms at 1 PLC; 5 nA
	iGainError   *float64 // fraction
	iOffset      *float64 // A
}

// config is one spec's parsed settings.
type config struct {
	model        string
	bench        benchKeys
	latency      time.Duration
	source       sourceConfig
	meter        meterConfig
	dut          DUTSettings
	chamber      chamberConfig
	lidOpen      bool   // dut: the fixture lid starts open
	offsetLSBSet bool   // dut: offset_lsb was given, so offset_trim does not change it
	dir          string // folder a relative path in a setting is resolved against; "" = working directory
}

func defaultConfig(model string) config {
	return config{
		model: model,
		source: sourceConfig{
			specReading: 20e-6, specRange: 5e-6, rng: 0.1, noise: 50e-9, emfSpan: 500e-9,
			iRng: 25e-3, iNoise: 2e-9,
		},
		meter: meterConfig{
			specReading: 30e-6, specRange: 4e-6, rng: 10, nplc: 1, lineFreq: 50,
			resolution: 1e-6, noise: 1.5e-6,
			iSpecReading: 200e-6, iSpecRange: 20e-6, iRng: 0.1, iResolution: 10e-9, iNoise: 5e-9,
		},
		dut:     DefaultDUTSettings(),
		chamber: defaultChamber(),
	}
}

func settingErr(key, format string, args ...any) error {
	return &instruments.SettingError{Key: key, Msg: fmt.Sprintf(format, args...)}
}

// quantity parses val with dimension dim; a failure names key. A ratio needs its
// unit (units.ParseRatio: "-2500 ppm", "0.4 %"; only 0 may stand alone).
func quantity(key, val string, dim units.Dim) (float64, error) {
	parse := func(s string) (float64, error) { return units.ParseAs(s, dim) }
	if dim == units.Ratio {
		parse = units.ParseRatio
	}
	v, err := parse(val)
	if err != nil {
		return 0, settingErr(key, "%v", err)
	}
	return v, nil
}

// plain parses a plain number that is not a ratio (a count of power-line cycles,
// a gain in V/V); a failure names key.
func plain(key, val string) (float64, error) {
	v, err := units.ParseAs(val, units.Ratio)
	if err != nil {
		return 0, settingErr(key, "%v", err)
	}
	return v, nil
}

func nonNegative(key, val string, dim units.Dim) (float64, error) {
	v, err := quantity(key, val, dim)
	if err == nil && v < 0 {
		err = settingErr(key, "%q must not be negative", val)
	}
	return v, err
}

func positive(key, val string, dim units.Dim) (float64, error) {
	v, err := quantity(key, val, dim)
	if err == nil && v <= 0 {
		err = settingErr(key, "%q must be positive", val)
	}
	return v, err
}

// ppm parses a spec_ppm_* value: a bare number is in ppm (as the key says), a value
// with a unit ("20 ppm", "0.002 %") is taken as written.
func ppm(key, val string) (float64, error) {
	if f, err := strconv.ParseFloat(strings.TrimSpace(val), 64); err == nil {
		if f < 0 || math.IsNaN(f) || math.IsInf(f, 0) {
			return 0, settingErr(key, "%q must be a finite, non-negative number of ppm", val)
		}
		return f * 1e-6, nil
	}
	return nonNegative(key, val, units.Ratio)
}

func choice(key, val string, allowed ...string) (string, error) {
	v := strings.ToLower(strings.TrimSpace(val))
	for _, a := range allowed {
		if v == a {
			return v, nil
		}
	}
	return "", settingErr(key, "%q is not one of %s", val, strings.Join(allowed, ", "))
}

// maxLatency bounds the simulated time per command: with time: real the bench
// waits it out.
const maxLatency = 10 * time.Second

// A setter parses the value of one settings key into its field; key names the
// setting in errors. On error the field may hold a partial value: the caller drops
// the whole config.
type setter func(key, val string) error

func quantityOf(p *float64, dim units.Dim) setter {
	return func(k, val string) (err error) { *p, err = quantity(k, val, dim); return err }
}

func nonNegativeOf(p *float64, dim units.Dim) setter {
	return func(k, val string) (err error) { *p, err = nonNegative(k, val, dim); return err }
}

func positiveOf(p *float64, dim units.Dim) setter {
	return func(k, val string) (err error) { *p, err = positive(k, val, dim); return err }
}

func ppmOf(p *float64) setter {
	return func(k, val string) (err error) { *p, err = ppm(k, val); return err }
}

// overrideOf sets an optional override: nil until the key is given.
func overrideOf(p **float64, dim units.Dim) setter {
	return func(k, val string) error {
		v, err := quantity(k, val, dim)
		*p = &v
		return err
	}
}

// choiceOf sets *p to whether the value is the second of two allowed words.
func choiceOf(p *bool, no, yes string) setter {
	return func(k, val string) error {
		v, err := choice(k, val, no, yes)
		*p = v == yes
		return err
	}
}

// setters returns the setter of every key a spec of c's model may hold: the
// bench-wide keys, latency and the model's own.
func (c *config) setters() map[string]setter {
	s := map[string]setter{
		"seed": func(k, val string) (err error) {
			c.bench.seed, err = strconv.ParseUint(strings.TrimSpace(val), 10, 64)
			if err != nil {
				err = settingErr(k, "%q is not a non-negative integer", val)
			}
			c.bench.seedSet = true
			return err
		},
		"time": func(k, val string) error {
			c.bench.timeSet = true
			return choiceOf(&c.bench.real, "simulated", "real")(k, val)
		},
		"start": func(k, val string) (err error) {
			c.bench.start, err = time.Parse(time.RFC3339Nano, strings.TrimSpace(val))
			if err != nil {
				err = settingErr(k, "%q is not an RFC 3339 time such as 2030-01-02T15:04:05Z", val)
			}
			c.bench.startSet = true
			return err
		},
		"latency": func(k, val string) error {
			v, err := nonNegative(k, val, units.Second)
			if err == nil && v > maxLatency.Seconds() {
				err = settingErr(k, "%q: expected a latency of at most %s", val, maxLatency)
			}
			c.latency = time.Duration(math.Round(min(v, maxLatency.Seconds()) * 1e9))
			return err
		},
	}
	var own map[string]setter
	switch c.model {
	case modelSource:
		own = c.source.setters()
	case modelMeter:
		own = c.meter.setters()
	case modelDUT:
		own = c.dut.setters(&c.offsetLSBSet, c.dir)
		own["lid"] = choiceOf(&c.lidOpen, "closed", "open")
	case modelChamber:
		own = c.chamber.setters()
	}
	maps.Copy(s, own)
	return s
}

// parseSettings parses one spec's settings for model. Keys are visited in sorted
// order so the first error reported is stable. dir is the folder a relative path
// in a setting is resolved against (instruments.Spec.Dir; "" = the working
// directory).
func parseSettings(model string, settings map[string]string, dir string) (config, error) {
	c := defaultConfig(model)
	c.dir = dir
	set := c.setters()
	// The output kind and offset_trim decide the dimension of other keys: parse
	// them first.
	first := []string{"output", "offset_trim"}
	for _, k := range first {
		if v, ok := settings[k]; ok && model == modelDUT {
			if err := set[k](k, v); err != nil {
				return c, err
			}
		}
	}
	if model == modelDUT && c.dut.Output == OutputCurrent {
		c.dut.OffsetSigma, c.dut.Noise, c.dut.OffsetLSB = CurrentOffsetSigma, CurrentNoise, CurrentOffsetLSB
	}
	for _, k := range slices.Sorted(maps.Keys(settings)) {
		if model == modelDUT && slices.Contains(first, k) {
			continue
		}
		f, ok := set[k]
		if !ok {
			return c, unknownKey(model, k)
		}
		if err := f(k, settings[k]); err != nil {
			return c, err
		}
	}
	if c.bench.startSet && c.bench.timeSet && c.bench.real {
		return c, settingErr("start", "applies only to time: simulated")
	}
	if model == modelChamber {
		if err := c.chamber.check(); err != nil {
			return c, err
		}
	}
	if model == modelDUT {
		if c.dut.OffsetTrimBefore && !c.offsetLSBSet {
			c.dut.OffsetLSB = DefaultOffsetLSB / NominalGain
			if g := c.dut.card().gain; g != NominalGain {
				c.dut.OffsetLSB = DefaultOffsetLSB / math.Abs(g)
			}
			if c.dut.Output == OutputCurrent {
				c.dut.OffsetLSB = CurrentOffsetLSB / math.Abs(c.dut.card().gain)
			}
		}
		if err := checkCard(c.dut, settings); err != nil {
			return c, err
		}
		if err := checkBudget(c.dut, settings); err != nil {
			return c, err
		}
	}
	return c, nil
}

// budgetOf sets the budget the units are drawn from: the budget file at the path
// given, relative to dir when not absolute.
func budgetOf(p **budget.Budget, dir string) setter {
	return func(k, val string) error {
		path := strings.TrimSpace(val)
		if path == "" {
			return settingErr(k, "expected the path of a budget file (relative to the station file)")
		}
		if !filepath.IsAbs(path) && dir != "" {
			path = filepath.Join(dir, path)
		}
		b, err := budget.Load(path)
		if err != nil {
			return settingErr(k, "%v", err)
		}
		*p = b
		return nil
	}
}

// budgetReplaces are the settings a budget decides instead.
var budgetReplaces = []string{"offset_sigma", "gain_sigma", "open_loop_gain", "crossover_step", "crossover_at"}

// checkBudget checks that the budget of s, if any, describes the card the other
// settings describe: the same nominal gain, output at zero input and output unit,
// an input-referred budget in volts, no rail compression (the rails are the
// card's), and none of the settings the budget replaces given beside it. given is
// the settings map.
func checkBudget(s DUTSettings, given map[string]string) error {
	b := s.Budget
	if b == nil {
		return nil
	}
	for _, k := range budgetReplaces {
		if _, ok := given[k]; ok {
			return settingErr(k, "the budget file %s decides the units' spread: remove %s or budget", b.Path, k)
		}
	}
	c := s.card()
	u := "V"
	if c.output == OutputCurrent {
		u = "A"
	}
	same := func(a, b float64) bool { return math.Abs(a-b) <= 1e-9*math.Max(math.Abs(a), math.Abs(b)) }
	t := b.Transfer
	switch {
	case t.OutputUnit != u:
		return settingErr("budget", "%s: the budget's output is in %s, the card's in %s", b.Path, t.OutputUnit, u)
	case t.InputUnit != "V":
		return settingErr("budget", "%s: the budget's input is in %s; the simulator draws input-referred offsets in V at the amplifier's input", b.Path, t.InputUnit)
	case !same(t.Gain, c.gain):
		return settingErr("budget", "%s: the budget's gain is %g, the card's %g (gain)", b.Path, t.Gain, c.gain)
	case !same(t.OutputAtZero, c.outputAtZero):
		return settingErr("budget", "%s: the budget's output at zero input is %s, the card's %s (output_at_zero)",
			b.Path, units.Format(t.OutputAtZero, u, 4), units.Format(c.outputAtZero, u, 4))
	}
	for _, src := range b.Sources {
		if src.Acts == budget.ActsRailCompression {
			return settingErr("budget", "%s:%d:%d: source %q: the simulator has no per-unit rail compression (its rails are the card's)", b.Path, src.Line, src.Col, src.Name)
		}
	}
	return nil
}

// checkCard checks what no single key can: the rails leave room for both knees, and
// the command set compiles. given is the settings map, to name a key that was set.
func checkCard(s DUTSettings, given map[string]string) error {
	c := s.card()
	if c.railHigh-c.railLow <= 2*c.railKnee {
		key := "rail_high"
		for _, k := range []string{"rail_high", "rail_low", "rail_knee"} {
			if _, ok := given[k]; ok {
				key = k
				break
			}
		}
		u := "V"
		if c.output == OutputCurrent {
			u = "A"
		}
		return settingErr(key, "rails %s..%s leave no room inside two knees of %s",
			units.Format(c.railLow, u, 4), units.Format(c.railHigh, u, 4), units.Format(c.railKnee, u, 4))
	}
	if _, err := s.Coef.resolve(c.output); err != nil {
		return err
	}
	_, err := compilePort(c)
	return err
}

// wordOf sets a one-word setting (a format or unit name).
// coefUseOf sets which coefficients of a kind the card has: none (""), gain,
// offset or both.
func coefUseOf(p *Trim) setter {
	return func(k, val string) error {
		v, err := choice(k, val, "none", string(TrimGain), string(TrimOffset), string(TrimBoth))
		*p = Trim(v)
		if v == "none" {
			*p = ""
		}
		return err
	}
}

func wordOf(p *string) setter {
	return func(k, val string) error {
		*p = strings.TrimSpace(val)
		if *p == "" || strings.ContainsAny(*p, " \t") {
			return settingErr(k, "%q: expected one word", val)
		}
		return nil
	}
}

func unknownKey(model, key string) error {
	c := defaultConfig(model)
	known := slices.Sorted(maps.Keys(c.setters()))
	return settingErr(key, "unknown setting for sim://%s (known: %s)", model, strings.Join(known, ", "))
}

func (c *sourceConfig) setters() map[string]setter {
	return map[string]setter{
		"spec_ppm_reading": ppmOf(&c.specReading),
		"spec_ppm_range":   ppmOf(&c.specRange),
		"range":            positiveOf(&c.rng, units.Volt),
		"noise":            nonNegativeOf(&c.noise, units.Volt),
		"gain_error":       overrideOf(&c.gainError, units.Ratio),
		"offset":           overrideOf(&c.offset, units.Volt),
		"thermal_emf":      overrideOf(&c.emf, units.Volt),
		"current_range":    positiveOf(&c.iRng, units.Ampere),
		"current_noise":    nonNegativeOf(&c.iNoise, units.Ampere),
		"current_offset":   overrideOf(&c.iOffset, units.Ampere),
	}
}

// rangeOf sets a meter's power-on range of dimension d to the range pick
// chooses for the value written (0 = auto).
func rangeOf(p *float64, d units.Dim, pick func(float64) (float64, error)) setter {
	return func(k, val string) error {
		v, err := nonNegative(k, val, d)
		if err == nil {
			if *p, err = pick(v); err != nil {
				err = settingErr(k, "%v", err)
			}
		}
		return err
	}
}

func (c *meterConfig) setters() map[string]setter {
	return map[string]setter{
		"spec_ppm_reading": ppmOf(&c.specReading),
		"spec_ppm_range":   ppmOf(&c.specRange),
		"range":            rangeOf(&c.rng, units.Volt, meterRange),
		"nplc": func(k, val string) error {
			v, err := plain(k, val)
			if err == nil {
				if err = checkNPLC(v); err != nil {
					err = settingErr(k, "%v", err)
				}
				c.nplc = v
			}
			return err
		},
		"line_frequency":           positiveOf(&c.lineFreq, units.Hertz),
		"resolution":               nonNegativeOf(&c.resolution, units.Volt),
		"noise":                    nonNegativeOf(&c.noise, units.Volt),
		"gain_error":               overrideOf(&c.gainError, units.Ratio),
		"offset":                   overrideOf(&c.offset, units.Volt),
		"probe":                    choiceOf(&c.supply, "output", "supply"),
		"current_spec_ppm_reading": ppmOf(&c.iSpecReading),
		"current_spec_ppm_range":   ppmOf(&c.iSpecRange),
		"current_range":            rangeOf(&c.iRng, units.Ampere, currentRange),
		"current_resolution":       nonNegativeOf(&c.iResolution, units.Ampere),
		"current_noise":            nonNegativeOf(&c.iNoise, units.Ampere),
		"current_gain_error":       overrideOf(&c.iGainError, units.Ratio),
		"current_offset":           overrideOf(&c.iOffset, units.Ampere),
		"force_flag": func(k, val string) error {
			v, err := choice(k, val, "none", "overload", "nan")
			c.force = map[string]instruments.Flag{"none": instruments.FlagNone,
				"overload": instruments.FlagOverload, "nan": instruments.FlagNaN}[v]
			return err
		},
	}
}

// bitsOf sets a trim DAC's width: an integer 1..MaxDACBits.
func bitsOf(p *int) setter {
	return func(k, val string) (err error) {
		*p, err = strconv.Atoi(strings.TrimSpace(val))
		if err != nil || *p < 1 || *p > MaxDACBits {
			err = settingErr(k, "%q: expected a whole number of bits, 1 to %d", val, MaxDACBits)
		}
		return err
	}
}

// codingOf sets a trim DAC's register coding.
func codingOf(p *Coding) setter {
	return func(k, val string) error {
		v, err := choice(k, val, string(CodingBinaryOffset), string(CodingTwosComplement))
		*p = Coding(v)
		return err
	}
}

// commandOf sets a command template; its shape is checked with the whole command set
// (checkCard), since which placeholder it needs depends on the key.
func commandOf(p *string) setter {
	return func(k, val string) error {
		if strings.IndexFunc(val, unicode.IsControl) >= 0 {
			return settingErr(k, "%q: a command is one line without control characters", val)
		}
		*p = normLine(val)
		if *p == "" {
			return settingErr(k, "%q: expected a command", val)
		}
		return nil
	}
}

// setters returns the setters of the DUT's own keys; offset_lsb also sets
// *offsetLSBSet, and budget resolves a relative path against dir.
func (s *DUTSettings) setters(offsetLSBSet *bool, dir string) map[string]setter {
	// out is the dimension of the card's output-referred values: A for a current
	// output, V otherwise. parseSettings sets output (and offset_trim) before the
	// other keys, so it is known when they are parsed.
	out := func() units.Dim {
		if s.Output == OutputCurrent {
			return units.Ampere
		}
		return units.Volt
	}
	outSetter := func(mk func(units.Dim) setter) setter {
		return func(k, val string) error { return mk(out())(k, val) }
	}
	return map[string]setter{
		"offset":         outSetter(func(d units.Dim) setter { return overrideOf(&s.Offset, d) }),
		"gain_error":     overrideOf(&s.GainError, units.Ratio),
		"offset_sigma":   outSetter(func(d units.Dim) setter { return nonNegativeOf(&s.OffsetSigma, d) }),
		"budget":         budgetOf(&s.Budget, dir),
		"gain_sigma":     nonNegativeOf(&s.GainSigma, units.Ratio),
		"noise":          outSetter(func(d units.Dim) setter { return nonNegativeOf(&s.Noise, d) }),
		"tau":            nonNegativeOf(&s.Tau, units.Second),
		"crossover_step": nonNegativeOf(&s.CrossoverStep, units.Volt),
		"crossover_at":   quantityOf(&s.CrossoverAt, units.Volt),
		"dnl": func(k, val string) (err error) {
			q, perr := units.Parse(val)
			switch {
			case perr != nil:
				err = settingErr(k, "%v", perr)
			case q.Dim != units.Ratio && q.Dim != units.Count:
				err = settingErr(k, "%q is a %s: expected LSB, e.g. 0.05 or 0.05 LSB", val, q.Dim)
			case q.Value < 0:
				err = settingErr(k, "%q must not be negative", val)
			}
			s.DNL = q.Value
			return err
		},
		"open_loop_gain": func(k, val string) (err error) {
			if s.OpenLoopGain, err = plain(k, val); err == nil && s.OpenLoopGain < 0 {
				err = settingErr(k, "%q must not be negative", val)
			}
			return err
		},
		"offset_lsb": func(k, val string) error {
			*offsetLSBSet = true
			d := out()
			if s.OffsetTrimBefore {
				d = units.Volt
			}
			return positiveOf(&s.OffsetLSB, d)(k, val)
		},
		"gain_lsb":    positiveOf(&s.GainLSB, units.Ratio),
		"offset_trim": choiceOf(&s.OffsetTrimBefore, "after", "before"),
		"defect": func(k, val string) error {
			v, err := choice(k, val, string(DefectNone), string(DefectStuckBit), string(DefectNoisy), string(DefectOpen))
			s.Defect = Defect(v)
			return err
		},
		"gain": func(k, val string) (err error) {
			if s.Gain, err = plain(k, val); err == nil && (s.Gain == 0 || math.IsInf(s.Gain, 0) || math.IsNaN(s.Gain)) {
				err = settingErr(k, "%q: expected a finite, non-zero gain in V/V (A/V for a current output)", val)
			}
			return err
		},
		"output_at_zero": outSetter(func(d units.Dim) setter { return overrideOf(&s.OutputAtZero, d) }),
		"gain_pivot":     outSetter(func(d units.Dim) setter { return overrideOf(&s.GainPivot, d) }),
		"rail_low":       outSetter(func(d units.Dim) setter { return overrideOf(&s.RailLow, d) }),
		"rail_high":      outSetter(func(d units.Dim) setter { return overrideOf(&s.RailHigh, d) }),
		"rail_knee":      outSetter(func(d units.Dim) setter { return positiveOf(&s.RailKnee, d) }),
		"output": func(k, val string) error {
			v, err := choice(k, val, string(OutputVoltage), string(OutputCurrent), string(OutputReported))
			s.Output = Output(v)
			return err
		},
		"adc_lsb": positiveOf(&s.ADCLSB, units.Volt),
		"adc_bits": func(k, val string) (err error) {
			s.ADCBits, err = strconv.Atoi(strings.TrimSpace(val))
			if err != nil || s.ADCBits < 2 || s.ADCBits > 32 {
				err = settingErr(k, "%q: expected a whole number of bits, 2 to 32", val)
			}
			return err
		},
		"channels": func(k, val string) (err error) {
			s.Channels, err = strconv.Atoi(strings.TrimSpace(val))
			if err != nil || s.Channels < 1 || s.Channels > MaxChannels {
				err = settingErr(k, "%q: expected a whole number of channels, 1 to %d", val, MaxChannels)
			}
			return err
		},
		"input": func(k, val string) error {
			v, err := choice(k, val, string(InputVoltage), string(InputCurrent))
			s.Input = Input(v)
			return err
		},
		"input_resistance":      positiveOf(&s.InputResistance, units.Ohm),
		"supply_current":        positiveOf(&s.SupplyCurrent, units.Ampere),
		"supply_current_sigma":  nonNegativeOf(&s.SupplyCurrentSigma, units.Ratio),
		"ambient":               quantityOf(&s.Ambient, units.Celsius),
		"dut_tau":               nonNegativeOf(&s.ThermalTau, units.Second),
		"tc_offset_sigma":       nonNegativeOf(&s.TCOffsetSigma, units.Volt),
		"tc_gain_sigma":         nonNegativeOf(&s.TCGainSigma, units.Ratio),
		"temp_sensor_sigma":     nonNegativeOf(&s.SensorSigma, units.Celsius),
		"tc_offset":             overrideOf(&s.TCOffset, units.Volt),
		"tc_gain":               overrideOf(&s.TCGain, units.Ratio),
		"temp_sensor_offset":    overrideOf(&s.SensorOffset, units.Celsius),
		"cmd_temp":              commandOf(&s.Protocol.Temp),
		"coef":                  coefUseOf(&s.Coef.Use),
		"coef_gain_format":      wordOf(&s.Coef.GainFormat),
		"coef_offset_format":    wordOf(&s.Coef.OffsetFormat),
		"coef_gain_scale":       coefScaleOf(&s.Coef.GainScale, nil),
		"coef_offset_scale":     coefScaleOf(&s.Coef.OffsetScale, &s.Coef.OffsetScaleSI),
		"coef_offset_unit":      wordOf(&s.Coef.OffsetUnit),
		"coef_text":             choiceOf(&s.Coef.Hex, "decimal", "hex"),
		"cmd_read":              commandOf(&s.Protocol.Read),
		"cmd_coef_gain_write":   commandOf(&s.Protocol.CoefGainWrite),
		"cmd_coef_gain_read":    commandOf(&s.Protocol.CoefGainRead),
		"cmd_coef_offset_write": commandOf(&s.Protocol.CoefOffsetWrite),
		"cmd_coef_offset_read":  commandOf(&s.Protocol.CoefOffsetRead),
		"coef_tc":               coefUseOf(&s.Coef.TC),
		"coef_tc_offset_format": wordOf(&s.Coef.TCOffsetFormat),
		"coef_tc_offset_unit":   wordOf(&s.Coef.TCOffsetUnit),
		"coef_tc_gain_format":   wordOf(&s.Coef.TCGainFormat),
		"coef_tc_gain_unit":     wordOf(&s.Coef.TCGainUnit),
		"coef_tc_ref":           overrideOf(&s.Coef.TCRef, units.Celsius),
		"cmd_tc_offset_write":   commandOf(&s.Protocol.TCOffsetWrite),
		"cmd_tc_offset_read":    commandOf(&s.Protocol.TCOffsetRead),
		"cmd_tc_gain_write":     commandOf(&s.Protocol.TCGainWrite),
		"cmd_tc_gain_read":      commandOf(&s.Protocol.TCGainRead),
		"trim": func(k, val string) error {
			v, err := choice(k, val, string(TrimBoth), string(TrimOffset), string(TrimGain))
			s.Trim = Trim(v)
			return err
		},
		"offset_bits":   bitsOf(&s.OffsetBits),
		"gain_bits":     bitsOf(&s.GainBits),
		"offset_coding": codingOf(&s.OffsetCoding),
		"gain_coding":   codingOf(&s.GainCoding),
		"code_format": func(k, val string) error {
			v, err := choice(k, val, string(CodeDecimal), string(CodeHex))
			s.CodeFormat = CodeFormat(v)
			return err
		},
		"cmd_serial":       commandOf(&s.Protocol.Serial),
		"cmd_firmware":     commandOf(&s.Protocol.Firmware),
		"cmd_offset_write": commandOf(&s.Protocol.OffsetWrite),
		"cmd_offset_read":  commandOf(&s.Protocol.OffsetRead),
		"cmd_gain_write":   commandOf(&s.Protocol.GainWrite),
		"cmd_gain_read":    commandOf(&s.Protocol.GainRead),
		"cmd_store":        commandOf(&s.Protocol.Store),
		"cmd_unlock": func(k, val string) error {
			if strings.TrimSpace(val) == "" {
				s.Protocol.Unlock = ""
				return nil
			}
			return commandOf(&s.Protocol.Unlock)(k, val)
		},
		"firmware": func(k, val string) error {
			v := strings.TrimSpace(val)
			if v == "" || strings.IndexFunc(v, unicode.IsControl) >= 0 || strings.HasPrefix(v, "ERR") {
				return settingErr(k, "%q: expected a non-empty one-line reply not starting ERR", val)
			}
			s.Firmware = v
			return nil
		},
		"defect_rate": func(k, val string) error {
			err := nonNegativeOf(&s.DefectRate, units.Ratio)(k, val)
			if err == nil && s.DefectRate > 1 {
				err = settingErr(k, "%q is more than 100 %%", val)
			}
			return err
		},
	}
}
