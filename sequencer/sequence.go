package sequencer

import (
	"fmt"
	"math"
	"path/filepath"
	"regexp"
	"strings"
	"time"

	"trimline/instruments/files"
	"trimline/instruments/units"
	"trimline/limits"
)

// Sequence is a loaded sequence file: how one product is trimmed.
type Sequence struct {
	Product     string
	Revision    string
	Maker       string
	Description string
	Requires    []string // roles the sequence needs on the station

	IdealGain   float64 // V/V
	IdealOffset float64 // output at zero input, V
	FullScale   float64 // output span for "% of full scale", V

	PreTrim SweepPlan
	Verify  SweepPlan
	Meter   MeterPlan
	Trim    TrimPlan
	DUT     DUTPlan

	// SerialPattern is the sequence file's serial_pattern as written, matched
	// against the whole serial ("" = DefaultSerialPattern); CheckSerial applies it.
	SerialPattern string
	serialRE      *regexp.Regexp

	// Uncertainty selects how the fits' uncertainties are evaluated: "gum" (the law
	// of propagation, JCGM 100) or "monte_carlo" (JCGM 101, MCTrials trials).
	Uncertainty string
	MCTrials    int

	Limits *limits.Set
	File   FileRef
	// LimitsFile names the limit file in force, with the variant that applies.
	LimitsFile FileRef
	// Raw and LimitsRaw are the exact bytes of the sequence and limit files, for
	// the ledger's content-addressed store.
	Raw, LimitsRaw []byte
}

// SweepPlan is one pass across the input range.
type SweepPlan struct {
	From, To float64 // stimulus, volts
	// Points is the number of levels, evenly spaced, From first: at least 3 (the
	// loader refuses fewer; a line through 2 points has no residual to judge).
	Points   int
	Settle   time.Duration // wait after each level change before reading
	Readings int           // readings per level
	Where    string        // "file:line:col" of the sweep in the sequence file, for messages
}

// Levels returns the stimulus levels in volts, From to To inclusive: the first is
// exactly From and the last exactly To, and none lies outside them, so a cap that
// holds at both ends holds at every level. It is the one computation of the levels:
// the sweep programs them, and CheckCaps, the TUR prediction and the physical
// ranges read them.
func (p SweepPlan) Levels() []float64 {
	if p.Points < 1 {
		return nil
	}
	out := make([]float64, p.Points)
	lo, hi := min(p.From, p.To), max(p.From, p.To)
	for i := range out {
		// (1−t)·From + t·To is From at t = 0 and To at t = 1 exactly, and
		// symmetric sweeps land on 0 exactly; the clamp keeps a rounding of the
		// products from stepping a hair past either end.
		t := float64(i) / float64(p.Points-1)
		out[i] = min(max((1-t)*p.From+t*p.To, lo), hi)
	}
	if p.Points == 1 {
		out[0] = p.From
	}
	return out
}

// MeterPlan configures the meter for the sweeps.
type MeterPlan struct {
	Range float64 // volts; 0 = auto
	NPLC  float64 // integration time in power-line cycles
}

// TrimPlan says how the unit's trim DACs work and how to program them.
type TrimPlan struct {
	Offset DAC
	Gain   DAC
	// OffsetBeforeGain is true when the offset DAC adds its voltage at the input of
	// the gain stage (its LSB is then input-referred and its output effect scales
	// with the gain); false when it adds at the output.
	OffsetBeforeGain bool
	// GainPivot is the output voltage about which the gain trim scales the signal.
	GainPivot float64
	Store     string // command that commits the codes to non-volatile memory; "" = none
}

// Trim DAC names, as the record and messages call them.
const (
	DACGain   = "gain"
	DACOffset = "offset"
)

// DACs lists the plan's trim DACs, each with its Name, in the order the engine
// programs them and the record lists them: gain first, then offset.
func (p TrimPlan) DACs() []DAC {
	g, o := p.Gain, p.Offset
	g.Name, o.Name = DACGain, DACOffset
	return []DAC{g, o}
}

// DAC is one trim DAC: codes 0..2^Bits−1, LSB per code (volts for offset, a
// fraction for gain), and the code that applies no correction.
type DAC struct {
	Name         string // DACGain or DACOffset, as TrimPlan.DACs sets it
	Bits         int
	LSB          float64
	NoCorrection int
	Write        string // command template; {code} is replaced by the decimal code
	Read         string // query that returns the code
}

// MaxCode is the largest code the DAC accepts.
func (d DAC) MaxCode() int { return 1<<d.Bits - 1 }

// DUTPlan holds the DUT queries that identify the unit.
type DUTPlan struct {
	SerialQuery   string // returns the unit's own serial number; "" = not checked
	FirmwareQuery string // returns the firmware id; "" = not recorded
}

type sweepDecl struct {
	From     *units.Voltage  `yaml:"from"`
	To       *units.Voltage  `yaml:"to"`
	Points   int             `yaml:"points"`
	Settle   *units.Duration `yaml:"settle"`
	Readings int             `yaml:"readings"`
}

type dacDecl struct {
	Bits         int    `yaml:"bits"`
	LSB          string `yaml:"lsb"`
	NoCorrection *int   `yaml:"no_correction"`
	Placement    string `yaml:"placement"`
	Write        string `yaml:"write"`
	Read         string `yaml:"read"`
}

type sequenceFile struct {
	Sequence struct {
		Product     string `yaml:"product"`
		Revision    string `yaml:"revision"`
		Maker       string `yaml:"maker"`
		Description string `yaml:"description"`
	} `yaml:"sequence"`
	Requires      []string `yaml:"requires"`
	Limits        string   `yaml:"limits"`
	LimitsVariant string   `yaml:"limits_variant"`
	SerialPattern *string  `yaml:"serial_pattern"`
	Ideal         struct {
		Gain      *float64       `yaml:"gain"`
		Offset    *units.Voltage `yaml:"offset"`
		FullScale *units.Voltage `yaml:"full_scale"`
	} `yaml:"ideal"`
	Meter struct {
		Range *units.Voltage `yaml:"range"`
		NPLC  *float64       `yaml:"nplc"`
	} `yaml:"meter"`
	PreTrim *sweepDecl `yaml:"pre_trim"`
	Verify  *sweepDecl `yaml:"verify"`
	Trim    struct {
		Offset    *dacDecl       `yaml:"offset"`
		Gain      *dacDecl       `yaml:"gain"`
		GainPivot *units.Voltage `yaml:"gain_pivot"`
		Store     string         `yaml:"store"`
	} `yaml:"trim"`
	DUT struct {
		SerialQuery   string `yaml:"serial_query"`
		FirmwareQuery string `yaml:"firmware_query"`
	} `yaml:"dut"`
	Uncertainty struct {
		Method string `yaml:"method"`
		Trials int    `yaml:"trials"`
	} `yaml:"uncertainty"`
}

// LoadSequence reads and checks a sequence file and the limit file it names
// (resolved relative to the sequence file). All problems come back as a files.List.
func LoadSequence(path string) (*Sequence, error) {
	data, err := files.ReadFile(path)
	if err != nil {
		return nil, err
	}
	return ParseSequence(path, data, files.ReadFile)
}

// ParseSequence is LoadSequence on bytes already read; read loads the limit file.
func ParseSequence(name string, data []byte, read func(path string) ([]byte, error)) (*Sequence, error) {
	doc, err := files.Parse(name, data)
	if err != nil {
		return nil, err
	}
	if err := wrongKind(doc, data, FileSequence); err != nil {
		return nil, err
	}
	var f sequenceFile
	decodeErrs := decodeAll(doc, &f)
	var errs files.List
	bad := func(path, format string, args ...any) { errs = append(errs, doc.Errorf(path, format, args...)) }
	req := func(path, v string) {
		if strings.TrimSpace(v) == "" {
			bad(path, "missing required key %q", lastPart(path))
		}
	}
	req("$.sequence.product", f.Sequence.Product)
	req("$.sequence.revision", f.Sequence.Revision)
	req("$.limits", f.Limits)
	s := &Sequence{
		Product: f.Sequence.Product, Revision: f.Sequence.Revision, Maker: f.Sequence.Maker,
		Description: f.Sequence.Description, Requires: f.Requires, Raw: data,
		File: FileRef{Kind: FileSequence, Name: filepath.Base(name), Title: strings.TrimSpace(f.Sequence.Product + " rev " + f.Sequence.Revision), SHA256: hashHex(data)},
	}
	if len(s.Requires) == 0 {
		s.Requires = append([]string(nil), Roles...)
	}
	for i, r := range s.Requires {
		if !isRole(r) {
			bad(fmt.Sprintf("$.requires[%d]", i), "unknown role %q (expected one of %s)", r, strings.Join(Roles, ", "))
		}
	}
	for _, r := range []string{"source", "meter", "dut"} {
		if !contains(s.Requires, r) {
			bad("$.requires", "a trim sequence needs the %q role", r)
		}
	}

	if f.Ideal.Gain == nil {
		bad("$.ideal", "missing required key \"gain\" (V/V)")
	} else if s.IdealGain = *f.Ideal.Gain; s.IdealGain == 0 || math.IsNaN(s.IdealGain) || math.IsInf(s.IdealGain, 0) {
		bad("$.ideal.gain", "expected a finite non-zero gain in V/V")
	}
	if f.Ideal.Offset == nil {
		bad("$.ideal", "missing required key \"offset\" (the output at zero input, e.g. 2.5V)")
	} else {
		s.IdealOffset = float64(*f.Ideal.Offset)
	}

	if f.Meter.Range != nil {
		s.Meter.Range = float64(*f.Meter.Range)
	}
	s.Meter.NPLC = 1
	if f.Meter.NPLC != nil {
		s.Meter.NPLC = *f.Meter.NPLC
		if !(s.Meter.NPLC > 0 && s.Meter.NPLC <= MaxNPLC) {
			bad("$.meter.nplc", "expected an integration time above 0 and at most %d power-line cycles, found %g", MaxNPLC, s.Meter.NPLC)
		}
	}

	s.PreTrim = sweepPlan(doc, "$.pre_trim", f.PreTrim, &errs)
	s.Verify = sweepPlan(doc, "$.verify", f.Verify, &errs)
	for _, sw := range []struct {
		path string
		p    SweepPlan
	}{{"$.pre_trim", s.PreTrim}, {"$.verify", s.Verify}} {
		p := sw.p
		if p.Points < MinPoints || p.Points > MaxPoints || p.Readings < 1 || p.Readings > MaxReadings ||
			p.Settle < 0 || p.Settle > MaxSettle || !(s.Meter.NPLC > 0 && s.Meter.NPLC <= MaxNPLC) {
			continue // already refused
		}
		if n := p.Points * p.Readings; n > MaxSweepReadings {
			bad(sw.path, "expected at most %d readings in a sweep: %d points × %d readings is %d", MaxSweepReadings, p.Points, p.Readings, n)
		} else if t := sweepTime(p, s.Meter.NPLC); t > MaxSweepTime {
			bad(sw.path, "expected a sweep of at most %s: %d points × (settle %s + %d readings × %g PLC at 50 Hz) is %s",
				MaxSweepTime, p.Points, p.Settle, p.Readings, s.Meter.NPLC, t.Round(time.Second))
		}
	}
	if f.Ideal.FullScale != nil {
		s.FullScale = float64(*f.Ideal.FullScale)
		if s.FullScale <= 0 {
			bad("$.ideal.full_scale", "expected a positive full-scale output span")
		}
	} else {
		s.FullScale = math.Abs(s.IdealGain * (s.PreTrim.To - s.PreTrim.From))
	}

	s.Trim.Offset = dac(doc, "$.trim.offset", f.Trim.Offset, units.Volt, &errs)
	s.Trim.Gain = dac(doc, "$.trim.gain", f.Trim.Gain, units.Ratio, &errs)
	if f.Trim.Offset != nil {
		switch f.Trim.Offset.Placement {
		case "", "after_gain":
		case "before_gain":
			s.Trim.OffsetBeforeGain = true
		default:
			bad("$.trim.offset.placement", "expected before_gain or after_gain, found %q", f.Trim.Offset.Placement)
		}
	}
	if f.Trim.Gain != nil && f.Trim.Gain.Placement != "" {
		bad("$.trim.gain.placement", "placement applies to the offset DAC only")
	}
	s.Trim.GainPivot = s.IdealOffset
	if f.Trim.GainPivot != nil {
		s.Trim.GainPivot = float64(*f.Trim.GainPivot)
	}
	s.Trim.Store = f.Trim.Store
	s.DUT = DUTPlan{SerialQuery: f.DUT.SerialQuery, FirmwareQuery: f.DUT.FirmwareQuery}
	serialPattern(doc, s, f.SerialPattern, &errs)
	switch s.Uncertainty, s.MCTrials = f.Uncertainty.Method, f.Uncertainty.Trials; s.Uncertainty {
	case "":
		s.Uncertainty = "gum"
	case "gum":
	case "monte_carlo":
		if s.MCTrials == 0 {
			s.MCTrials = 20000
		}
		if s.MCTrials < MinMCTrials {
			bad("$.uncertainty.trials", "expected at least %d Monte Carlo trials, found %d", MinMCTrials, s.MCTrials)
		} else if s.MCTrials > MaxMCTrials {
			bad("$.uncertainty.trials", "expected at most %d Monte Carlo trials, found %d", MaxMCTrials, s.MCTrials)
		}
	default:
		bad("$.uncertainty.method", "expected gum or monte_carlo, found %q", s.Uncertainty)
	}

	if f.Limits != "" {
		lp := f.Limits
		if !filepath.IsAbs(lp) {
			lp = filepath.Join(filepath.Dir(name), lp)
		}
		ldata, err := read(lp)
		if err != nil {
			bad("$.limits", "cannot read limit file: %v", err)
		} else if set, err := limits.Load(lp, ldata, ResultCatalog); err != nil {
			if fe := files.Errs(err); fe != nil {
				errs = append(errs, fe...)
			} else {
				bad("$.limits", "%v", err)
			}
		} else {
			s.Limits, s.LimitsRaw = set, ldata
			if s.Product != "" && strings.TrimSpace(set.Product) != strings.TrimSpace(s.Product) {
				bad("$.limits", "the limit file %s is for product %q (its limit_set.product), this sequence is for %q: name the limit file for %s",
					f.Limits, set.Product, s.Product, s.Product)
			}
			// The variant for this product: named in the sequence file, else the one
			// whose revisions list the sequence's revision, else the base limits.
			if v := f.LimitsVariant; v != "" {
				if vs, err := set.Variant(v); err != nil {
					bad("$.limits_variant", "%v", err)
				} else {
					s.Limits = vs
				}
			} else {
				s.Limits = set.VariantFor(s.Revision)
			}
		}
	}
	if errs = withDecodeErrs(decodeErrs, errs); len(errs) > 0 {
		errs.Sort()
		return nil, errs
	}
	s.LimitsFile = limitsFileRef(s.Limits)
	return s, nil
}

func limitsFileRef(s *limits.Set) FileRef {
	if s == nil {
		return FileRef{Kind: FileLimits}
	}
	title := strings.TrimSpace(s.Name + " rev " + s.Revision)
	if s.VariantName != "" {
		title += ", variant " + s.VariantName
	}
	return FileRef{Kind: FileLimits, Name: baseName(s.File), Title: title, SHA256: s.SHA256}
}

// Bounds on the counts and durations a sequence file sets, so that no file can
// make a run that never ends (100 000 000 points were once accepted). Each is
// far beyond any product's need and well inside what a station finishes.
const (
	// MinPoints is the fewest levels of a sweep: a line through 2 points has
	// no residual to judge.
	MinPoints = 3
	// MaxPoints is the most levels of a sweep: one per 0.1 % of the range.
	MaxPoints = 1001
	// MaxReadings is the most meter readings at one level.
	MaxReadings = 1000
	// MaxSettle is the longest wait after a level change before reading.
	MaxSettle = time.Minute
	// MaxSweepReadings bounds points × readings of one sweep: it keeps a run's
	// record (about 100 bytes of JSON a reading) near 20 MB.
	MaxSweepReadings = 100_000
	// MaxSweepTime bounds the time a sweep can take, estimated as points ×
	// (settle + readings × NPLC at 50 Hz, the slower line frequency).
	MaxSweepTime = time.Hour
	// MaxNPLC is the longest meter integration time, in power-line cycles (the
	// longest of common DMMs).
	MaxNPLC = 1000
	// MinMCTrials and MaxMCTrials bound the Monte Carlo trials; JCGM 101:2008
	// §7.2.1 suggests 10⁶ for a 95 % interval good to two significant digits.
	MinMCTrials = 1000
	MaxMCTrials = 1_000_000
	// MaxDACBits is the widest trim DAC.
	MaxDACBits = 24
)

// sweepTime estimates how long a sweep of p takes with the meter at nplc.
func sweepTime(p SweepPlan, nplc float64) time.Duration {
	perReading := time.Duration(nplc / 50 * float64(time.Second))
	return time.Duration(p.Points) * (p.Settle + time.Duration(p.Readings)*perReading)
}

func sweepPlan(doc *files.Doc, path string, d *sweepDecl, errs *files.List) SweepPlan {
	bad := func(p, format string, args ...any) { *errs = append(*errs, doc.Errorf(p, format, args...)) }
	if d == nil {
		bad(path, "missing required key %q (from, to, points, settle, readings)", lastPart(path))
		return SweepPlan{}
	}
	var p SweepPlan
	line, col := doc.Pos(path)
	p.Where = fmt.Sprintf("%s:%d:%d", doc.Name, line, col)
	if d.From == nil {
		bad(path, "missing required key \"from\"")
	} else {
		p.From = float64(*d.From)
	}
	if d.To == nil {
		bad(path, "missing required key \"to\"")
	} else {
		p.To = float64(*d.To)
	}
	if d.From != nil && d.To != nil && p.From == p.To {
		bad(path+".to", "expected \"to\" to differ from \"from\"")
	}
	p.Points = d.Points
	if p.Points < MinPoints {
		bad(path+".points", "expected at least %d points, found %d (a line through 2 points has no residual to judge)", MinPoints, d.Points)
	} else if p.Points > MaxPoints {
		bad(path+".points", "expected at most %d points, found %d", MaxPoints, d.Points)
	}
	if d.Settle == nil {
		bad(path, "missing required key \"settle\" (e.g. 20ms)")
	} else if p.Settle = d.Settle.D(); p.Settle < 0 {
		bad(path+".settle", "expected a settle time ≥ 0")
	} else if p.Settle > MaxSettle {
		bad(path+".settle", "expected a settle time of at most %s, found %s", MaxSettle, p.Settle)
	}
	p.Readings = d.Readings
	if p.Readings < 1 {
		bad(path+".readings", "expected at least 1 reading per point, found %d", d.Readings)
	} else if p.Readings > MaxReadings {
		bad(path+".readings", "expected at most %d readings per point, found %d", MaxReadings, d.Readings)
	}
	return p
}

func dac(doc *files.Doc, path string, d *dacDecl, dim units.Dim, errs *files.List) DAC {
	bad := func(p, format string, args ...any) { *errs = append(*errs, doc.Errorf(p, format, args...)) }
	if d == nil {
		bad(parentPath(path), "missing required key %q", lastPart(path))
		return DAC{}
	}
	out := DAC{Bits: d.Bits, Write: d.Write, Read: d.Read}
	if d.Bits < 1 || d.Bits > MaxDACBits {
		bad(path+".bits", "expected 1 to %d bits, found %d", MaxDACBits, d.Bits)
		out.Bits = 1
	}
	if d.LSB == "" {
		bad(path, "missing required key \"lsb\"")
	} else if v, err := parseLSB(d.LSB, dim); err != nil {
		bad(path+".lsb", "%v", err)
	} else if out.LSB = v; v <= 0 {
		bad(path+".lsb", "expected a positive LSB size")
	}
	if d.NoCorrection == nil {
		bad(path, "missing required key \"no_correction\" (the code that applies no correction, often mid-scale)")
	} else {
		out.NoCorrection = *d.NoCorrection
		if out.NoCorrection < 0 || out.NoCorrection > out.MaxCode() {
			bad(path+".no_correction", "expected a code in 0..%d", out.MaxCode())
		}
	}
	if !strings.Contains(d.Write, "{code}") {
		bad(path+".write", "expected a command template containing {code}, e.g. \"TRIM OFS {code}\"")
	}
	if d.Read == "" {
		bad(path, "missing required key \"read\" (the query that reads the code back)")
	}
	return out
}

// parseLSB reads a DAC's LSB: a voltage, or for a gain DAC a ratio with its unit
// (a bare "10" could be 10 ppm or 10 %).
func parseLSB(s string, dim units.Dim) (float64, error) {
	if dim == units.Ratio {
		return units.ParseRatio(s)
	}
	return units.ParseAs(s, dim)
}

func parentPath(p string) string { return p[:strings.LastIndex(p, ".")] }

func contains(list []string, s string) bool {
	for _, x := range list {
		if x == s {
			return true
		}
	}
	return false
}
