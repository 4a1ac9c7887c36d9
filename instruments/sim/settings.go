package sim

import (
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"
	"time"

	"trimline/instruments"
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
	}
}

// ParseDUTSettings parses the settings map of a sim://dut spec (bench-wide keys and
// latency are accepted and ignored here). A bad key or value gives a
// *instruments.SettingError.
func ParseDUTSettings(settings map[string]string) (DUTSettings, error) {
	c, err := parseSettings(modelDUT, settings)
	if err != nil {
		return DUTSettings{}, err
	}
	return c.dut, nil
}

// Instrument models, named by the host of the address.
const (
	modelSource = "source"
	modelMeter  = "meter"
	modelDUT    = "dut"
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
}

// config is one spec's parsed settings.
type config struct {
	model   string
	bench   benchKeys
	latency time.Duration
	source  sourceConfig
	meter   meterConfig
	dut     DUTSettings
	lidOpen bool // dut: the fixture lid starts open
}

var commonKeys = []string{"seed", "time", "start", "latency"}

var modelKeys = map[string][]string{
	modelSource: {"spec_ppm_reading", "spec_ppm_range", "range", "noise", "gain_error", "offset"},
	modelMeter: {"spec_ppm_reading", "spec_ppm_range", "range", "nplc", "line_frequency", "resolution",
		"noise", "gain_error", "offset", "force_flag"},
	modelDUT: {"offset", "gain_error", "offset_sigma", "gain_sigma", "noise", "tau", "crossover_step",
		"crossover_at", "dnl", "open_loop_gain", "offset_lsb", "gain_lsb", "offset_trim", "defect", "defect_rate", "lid"},
}

func defaultConfig(model string) config {
	return config{
		model: model,
		source: sourceConfig{
			specReading: 20e-6, specRange: 5e-6, rng: 0.1, noise: 50e-9,
		},
		meter: meterConfig{
			specReading: 30e-6, specRange: 4e-6, rng: 10, nplc: 1, lineFreq: 50,
			resolution: 1e-6, noise: 1.5e-6,
		},
		dut: DefaultDUTSettings(),
	}
}

func settingErr(key, format string, args ...any) error {
	return &instruments.SettingError{Key: key, Msg: fmt.Sprintf(format, args...)}
}

// quantity parses val with dimension dim; a failure names key.
func quantity(key, val string, dim units.Dim) (float64, error) {
	v, err := units.ParseAs(val, dim)
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

func ptr(v float64, err error) (*float64, error) { return &v, err }

// parseSettings parses one spec's settings for model. Keys are visited in sorted
// order so the first error reported is stable.
func parseSettings(model string, settings map[string]string) (config, error) {
	c := defaultConfig(model)
	keys := make([]string, 0, len(settings))
	for k := range settings {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	ofsLSBSet := false
	for _, k := range keys {
		val := settings[k]
		var err error
		switch k {
		case "seed":
			c.bench.seed, err = strconv.ParseUint(strings.TrimSpace(val), 10, 64)
			if err != nil {
				err = settingErr(k, "%q is not a non-negative integer", val)
			}
			c.bench.seedSet = true
		case "time":
			var v string
			v, err = choice(k, val, "simulated", "real")
			c.bench.real, c.bench.timeSet = v == "real", true
		case "start":
			c.bench.start, err = time.Parse(time.RFC3339Nano, strings.TrimSpace(val))
			if err != nil {
				err = settingErr(k, "%q is not an RFC 3339 time such as 2030-01-02T15:04:05Z", val)
			}
			c.bench.startSet = true
		case "latency":
			var v float64
			v, err = nonNegative(k, val, units.Second)
			c.latency = time.Duration(math.Round(v * 1e9))
		case "lid":
			if model != modelDUT {
				err = unknownKey(model, k)
				break
			}
			var v string
			v, err = choice(k, val, "closed", "open")
			c.lidOpen = v == "open"
		default:
			switch model {
			case modelSource:
				err = c.source.set(k, val)
			case modelMeter:
				err = c.meter.set(k, val)
			case modelDUT:
				err = c.dut.set(k, val, &ofsLSBSet)
			}
		}
		if err != nil {
			return c, err
		}
	}
	if c.bench.startSet && c.bench.timeSet && c.bench.real {
		return c, settingErr("start", "applies only to time: simulated")
	}
	if model == modelDUT && c.dut.OffsetTrimBefore && !ofsLSBSet {
		c.dut.OffsetLSB = DefaultOffsetLSB / NominalGain
	}
	return c, nil
}

func unknownKey(model, key string) error {
	known := append(append([]string{}, modelKeys[model]...), commonKeys...)
	sort.Strings(known)
	return settingErr(key, "unknown setting for sim://%s (known: %s)", model, strings.Join(known, ", "))
}

func (c *sourceConfig) set(k, val string) (err error) {
	switch k {
	case "spec_ppm_reading":
		c.specReading, err = ppm(k, val)
	case "spec_ppm_range":
		c.specRange, err = ppm(k, val)
	case "range":
		c.rng, err = positive(k, val, units.Volt)
	case "noise":
		c.noise, err = nonNegative(k, val, units.Volt)
	case "gain_error":
		c.gainError, err = ptr(quantity(k, val, units.Ratio))
	case "offset":
		c.offset, err = ptr(quantity(k, val, units.Volt))
	default:
		return unknownKey(modelSource, k)
	}
	return err
}

func (c *meterConfig) set(k, val string) (err error) {
	switch k {
	case "spec_ppm_reading":
		c.specReading, err = ppm(k, val)
	case "spec_ppm_range":
		c.specRange, err = ppm(k, val)
	case "range":
		var v float64
		if v, err = nonNegative(k, val, units.Volt); err == nil {
			if c.rng, err = meterRange(v); err != nil {
				err = settingErr(k, "%v", err)
			}
		}
	case "nplc":
		var v float64
		if v, err = quantity(k, val, units.Ratio); err == nil {
			if err = checkNPLC(v); err != nil {
				err = settingErr(k, "%v", err)
			}
			c.nplc = v
		}
	case "line_frequency":
		c.lineFreq, err = positive(k, val, units.Hertz)
	case "resolution":
		c.resolution, err = nonNegative(k, val, units.Volt)
	case "noise":
		c.noise, err = nonNegative(k, val, units.Volt)
	case "gain_error":
		c.gainError, err = ptr(quantity(k, val, units.Ratio))
	case "offset":
		c.offset, err = ptr(quantity(k, val, units.Volt))
	case "force_flag":
		var v string
		v, err = choice(k, val, "none", "overload", "nan")
		c.force = map[string]instruments.Flag{"none": instruments.FlagNone,
			"overload": instruments.FlagOverload, "nan": instruments.FlagNaN}[v]
	default:
		return unknownKey(modelMeter, k)
	}
	return err
}

func (s *DUTSettings) set(k, val string, ofsLSBSet *bool) (err error) {
	switch k {
	case "offset":
		s.Offset, err = ptr(quantity(k, val, units.Volt))
	case "gain_error":
		s.GainError, err = ptr(quantity(k, val, units.Ratio))
	case "offset_sigma":
		s.OffsetSigma, err = nonNegative(k, val, units.Volt)
	case "gain_sigma":
		s.GainSigma, err = nonNegative(k, val, units.Ratio)
	case "noise":
		s.Noise, err = nonNegative(k, val, units.Volt)
	case "tau":
		s.Tau, err = nonNegative(k, val, units.Second)
	case "crossover_step":
		s.CrossoverStep, err = nonNegative(k, val, units.Volt)
	case "crossover_at":
		s.CrossoverAt, err = quantity(k, val, units.Volt)
	case "dnl":
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
	case "open_loop_gain":
		s.OpenLoopGain, err = nonNegative(k, val, units.Ratio)
	case "offset_lsb":
		s.OffsetLSB, err = positive(k, val, units.Volt)
		*ofsLSBSet = true
	case "gain_lsb":
		s.GainLSB, err = positive(k, val, units.Ratio)
	case "offset_trim":
		var v string
		v, err = choice(k, val, "after", "before")
		s.OffsetTrimBefore = v == "before"
	case "defect":
		var v string
		v, err = choice(k, val, string(DefectNone), string(DefectStuckBit), string(DefectNoisy), string(DefectOpen))
		s.Defect = Defect(v)
	case "defect_rate":
		s.DefectRate, err = nonNegative(k, val, units.Ratio)
		if err == nil && s.DefectRate > 1 {
			err = settingErr(k, "%q is more than 100 %%", val)
		}
	default:
		return unknownKey(modelDUT, k)
	}
	return err
}
