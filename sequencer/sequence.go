package sequencer

import (
	"fmt"
	"maps"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strings"
	"time"

	"trimline/instruments"
	"trimline/instruments/files"
	"trimline/instruments/units"
	"trimline/limits"
	"trimline/sequencer/uncertainty"
)

// Sequence is a loaded sequence file: how one product is trimmed, as an ordered
// list of steps.
type Sequence struct {
	Product     string
	Revision    string
	Maker       string
	Description string
	// Requires lists the instrument roles the steps use (and any more the file
	// names under requires:), sources first, then meters, then DUT ports.
	Requires []string

	IdealGain   float64 // response per stimulus: ResponseDim per StimulusDim (V/V, A/V, count/V, V/A, A/A, count/A)
	IdealOffset float64 // response at zero input, in the response's SI unit
	FullScale   float64 // response span for "% of full scale", in the response's SI unit
	// ResponseDim is what the unit's response is, as the ideal gain's unit pair
	// says: units.Volt (the default, and a bare gain), units.Ampere (a current
	// output a meter reads in FuncCurrent) or units.Count (a number the unit
	// reports about itself).
	ResponseDim units.Dim
	// StimulusDim is what the stimulus is, as the ideal gain's denominator says:
	// units.Volt (the default, and a bare gain), programmed on a voltage_source
	// role, or units.Ampere (a gain per ampere, e.g. 250 V/A or 1600 count/mA),
	// programmed on a current_source role. Every level a step writes (from, to,
	// levels, level) is in it.
	StimulusDim units.Dim

	Meter MeterPlan // the meter settings every sweep uses unless it sets its own
	// DACs are the unit's trim DACs as the file declares them, in file order.
	DACs []DAC
	// Coefficients are the unit's firmware correction coefficients as the file
	// declares them (coefficients:), in file order; at most one adjusts gain and
	// one offset.
	Coefficients []Coefficient
	// Steps are the file's steps in order, a step that runs per channel once
	// per channel (StepDecl.Channel).
	Steps []*StepDecl

	// Channels are the unit's channel names in the file's order (channels:),
	// nil for a one-channel unit. Switch is the role of the switch that routes
	// the bench to one channel ("" when the fixture needs none), SwitchWhere
	// "file:line:col" of its key.
	Channels    []string
	Switch      string
	SwitchWhere string

	// SerialPattern is the sequence file's serial_pattern as written, matched
	// against the whole serial ("" = DefaultSerialPattern); CheckSerial applies it.
	SerialPattern string
	serialRE      *regexp.Regexp
	// MaxAttempts is how many measured runs (PASS, FAIL or REVIEW) a serial gets
	// before it must go to rework (retest.max_attempts); 0 = no limit.
	MaxAttempts int

	// Uncertainty selects how the fits' uncertainties are evaluated: "gum" (the law
	// of propagation, JCGM 100) or "monte_carlo" (JCGM 101). MCTrials is the
	// file's trials: 0 means the adaptive procedure of JCGM 101 §7.9 (records of
	// metrology revision 0 made 20 000, LegacyMCTrials); MCInterval is the
	// coverage interval, "symmetric" (JCGM 101 §7.7, the default) or "shortest"
	// (§7.8).
	Uncertainty string
	MCTrials    int
	MCInterval  string
	// Warnings are problems of the file that do not stop it loading (trimline
	// check prints them): a fixed number of Monte Carlo trials below
	// 10⁴/(1 − p) (JCGM 101 §7.2.2).
	Warnings files.List

	// FirstLayout marks a file of the first sequence layout (one fixed flow:
	// pre_trim, trim, verify), read as the step list it stands for so that the
	// records made with it still replay.
	FirstLayout bool

	Limits *limits.Set
	File   FileRef
	// LimitsFile names the limit file in force, with the variant that applies.
	LimitsFile FileRef
	// Raw and LimitsRaw are the exact bytes of the sequence and limit files, for
	// the ledger's content-addressed store.
	Raw, LimitsRaw []byte

	limitsName string // the limit file as the sequence names it
}

// Results returns every result the steps declare, in the record's order.
func (s *Sequence) Results() []ResultDef {
	var out []ResultDef
	for _, d := range s.Steps {
		out = append(out, d.Results...)
	}
	return out
}

// Catalog is every result name the steps declare with its dimension: what the
// limit file may judge. A per-channel result is listed also once per channel,
// as name@channel (limits.ChannelKey), so that a limit file knows the channels.
func (s *Sequence) Catalog() limits.Catalog {
	c := limits.Catalog{}
	for _, d := range s.Results() {
		c[d.Name] = d.Dim
	}
	channelKeys(c, s.Results())
	return c
}

// LookupResult returns the declaration of the named result.
func (s *Sequence) LookupResult(name string) (ResultDef, bool) {
	for _, d := range s.Steps {
		for _, r := range d.Results {
			if r.Name == name {
				return r, true
			}
		}
	}
	return ResultDef{}, false
}

// Step returns the step called name, or nil.
func (s *Sequence) Step(name string) *StepDecl {
	for _, d := range s.Steps {
		if d.Name == name {
			return d
		}
	}
	return nil
}

// DAC returns the trim DAC called name.
func (s *Sequence) DAC(name string) (DAC, bool) {
	for _, d := range s.DACs {
		if d.Name == name {
			return d, true
		}
	}
	return DAC{}, false
}

// Stimuli lists every level every step will program, in step order.
func (s *Sequence) Stimuli() []Stimulus {
	var out []Stimulus
	for _, d := range s.Steps {
		if st, ok := d.Step.(Stimulator); ok {
			for _, x := range st.Stimuli() {
				x.Where, x.Step = d.Where, d.Name
				out = append(out, x)
			}
		}
	}
	return out
}

// MeterPlan configures a meter for a sweep.
type MeterPlan struct {
	// Function is what the meter measures; "" is FuncVoltage (a meter without
	// instruments.FunctionSetter measures nothing else).
	Function instruments.Function
	Range    float64 // in the function's unit: volts or amperes; 0 = auto
	NPLC     float64 // integration time in power-line cycles
}

// dim is the dimension of the readings under p: units.Volt or units.Ampere.
func (p MeterPlan) dim() units.Dim {
	if p.Function == instruments.FuncCurrent {
		return units.Ampere
	}
	return units.Volt
}

// recordResponseUnit is the response unit as the record writes it: "A" or
// "count"; "" for volts, so that records of voltage products stay as they were.
func (s *Sequence) recordResponseUnit() string {
	switch s.ResponseDim {
	case units.Ampere, units.Count:
		return unitOf(s.ResponseDim)
	}
	return ""
}

// recordStimulusUnit is the stimulus unit as the record writes it: "" for
// volts, so that records of voltage-driven products stay as they were.
func (s *Sequence) recordStimulusUnit() string {
	if s.StimulusDim == units.Ampere {
		return "A"
	}
	return ""
}

// sourceKind is the kind of source role the steps program the stimulus on.
func (s *Sequence) sourceKind() RoleKind {
	if s.StimulusDim == units.Ampere {
		return CurrentSource
	}
	return VoltageSource
}

// stimDim is the stimulus dimension, units.Volt unless the sequence says
// units.Ampere (a zero Sequence is voltage-driven).
func (s *Sequence) stimDim() units.Dim {
	if s.StimulusDim == units.Ampere {
		return units.Ampere
	}
	return units.Volt
}

// idealGain sets the sequence's ideal gain, response and stimulus from the
// gain's unit pair: the numerator says the response (V, A or count; a bare
// number is V/V), the denominator the stimulus (V, or A for a current source).
func idealGain(doc *files.Doc, s *Sequence, g units.Per, errs *files.List) {
	bad := func(format string, args ...any) { *errs = append(*errs, doc.Errorf("$.ideal.gain", format, args...)) }
	per := "volt"
	switch g.Den {
	case units.Ratio, units.Volt:
	case units.Ampere:
		s.StimulusDim, per = units.Ampere, "ampere"
	default:
		bad("expected a gain per volt or per ampere of stimulus (e.g. 200 V/V, 800 mA/V, 3200 count/V, 250 V/A), found one per %s", g.Den)
		return
	}
	switch g.Num {
	case units.Ratio, units.Volt:
		if g.Num == units.Ratio && s.StimulusDim == units.Ampere {
			bad("a gain per ampere needs the response's unit, e.g. 250 V/A, 1 A/A or 1600 count/mA")
			return
		}
	case units.Ampere:
		s.ResponseDim = units.Ampere
	case units.Count:
		s.ResponseDim = units.Count
	default:
		bad("expected a response in V, A or count per %s (e.g. 200 V/V, 800 mA/V, 3200 count/V, 250 V/A), found a %s", per, g.Num)
		return
	}
	if s.IdealGain = g.Value; s.IdealGain == 0 || !finite(s.IdealGain) {
		bad("expected a finite non-zero gain, e.g. 200 V/V")
	}
}

// inResponse checks that q is in the response's dimension and returns its value.
func inResponse(doc *files.Doc, s *Sequence, path string, q units.Quantity, errs *files.List) (float64, bool) {
	if q.Dim != s.ResponseDim {
		*errs = append(*errs, doc.Errorf(path, "expected a %s, as the ideal gain's unit makes the response (e.g. %s), found a %s",
			s.ResponseDim, responseExample(s.ResponseDim), q.Dim))
		return 0, false
	}
	return q.Value, true
}

// whereIn is "file:line:col" of the value at path in doc, as a Where field
// keeps it for messages.
func whereIn(doc *files.Doc, path string) string {
	line, col := doc.Pos(path)
	return fmt.Sprintf("%s:%d:%d", doc.Name, line, col)
}

func responseExample(d units.Dim) string {
	switch d {
	case units.Ampere:
		return "4 mA"
	case units.Count:
		return "100 count"
	}
	return "2.5 V"
}

type stepHead struct {
	Kind     string      `yaml:"kind"`
	Name     string      `yaml:"name"`
	SkipIf   string      `yaml:"skip_if"`
	Channels *channelSel `yaml:"channels"`
}

var headKeys = map[string]bool{"kind": true, "name": true, "skip_if": true, "channels": true}

// anyNode takes any YAML value: the steps list, decoded step by step.
type anyNode struct{ set bool }

func (a *anyNode) UnmarshalYAML([]byte) error { a.set = true; return nil }

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
	Retest        *struct {
		MaxAttempts *int `yaml:"max_attempts"`
	} `yaml:"retest"`
	Ideal struct {
		Gain      *units.Per      `yaml:"gain"`
		Offset    *units.Quantity `yaml:"offset"`
		FullScale *units.Quantity `yaml:"full_scale"`
	} `yaml:"ideal"`
	Meter struct {
		Range *units.Quantity `yaml:"range"`
		NPLC  *float64        `yaml:"nplc"`
	} `yaml:"meter"`
	DACs         []*dacDecl    `yaml:"dacs"`
	Coefficients []*coefDecl   `yaml:"coefficients"`
	Channels     *channelsDecl `yaml:"channels"`
	Steps        anyNode       `yaml:"steps"`
	Uncertainty  struct {
		Method   string `yaml:"method"`
		Trials   int    `yaml:"trials"`
		Interval string `yaml:"interval"`
	} `yaml:"uncertainty"`

	// The first layout: one fixed flow.
	PreTrim *sweepStep     `yaml:"pre_trim"`
	Verify  *sweepStep     `yaml:"verify"`
	Trim    *firstTrimDecl `yaml:"trim"`
	DUT     *struct {
		SerialQuery   string `yaml:"serial_query"`
		FirmwareQuery string `yaml:"firmware_query"`
	} `yaml:"dut"`
}

// firstTrimDecl is the trim: section of the first layout.
type firstTrimDecl struct {
	Offset    *dacDecl       `yaml:"offset"`
	Gain      *dacDecl       `yaml:"gain"`
	GainPivot *units.Voltage `yaml:"gain_pivot"`
	Store     string         `yaml:"store"`
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
// Every problem of the file (in any step) comes back in one files.List, sorted by
// position.
func ParseSequence(name string, data []byte, read func(path string) ([]byte, error)) (*Sequence, error) {
	return parseSequence(name, data, read)
}

// parseSequence is ParseSequence; a nil read leaves the limit file unread.
func parseSequence(name string, data []byte, read func(path string) ([]byte, error)) (*Sequence, error) {
	doc, err := files.Parse(name, data)
	if err != nil {
		return nil, err
	}
	if err := wrongKind(doc, data, FileSequence); err != nil {
		return nil, err
	}
	if line, col, shared := doc.Shared(); shared {
		// One value standing in several places would be decoded by the YAML
		// library alone, first problem only; a step list reads better written out.
		return nil, files.List{doc.At(line, col, "anchors, aliases, merge keys and tags are not allowed in a sequence file: write each value where it is used")}
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
		Description: f.Sequence.Description, Raw: data,
		File: FileRef{Kind: FileSequence, Name: filepath.Base(name), Title: strings.TrimSpace(f.Sequence.Product + " rev " + f.Sequence.Revision), SHA256: hashHex(data)},
	}

	s.ResponseDim, s.StimulusDim = units.Volt, units.Volt
	if f.Ideal.Gain == nil {
		bad("$.ideal", "missing required key \"gain\" (response per volt of input: 200 or 200 V/V, 800 mA/V, 3200 count/V)")
	} else {
		idealGain(doc, s, *f.Ideal.Gain, &errs)
	}
	if f.Ideal.Offset == nil {
		bad("$.ideal", "missing required key \"offset\" (the output at zero input, e.g. 2.5V)")
	} else if v, ok := inResponse(doc, s, "$.ideal.offset", *f.Ideal.Offset, &errs); ok {
		s.IdealOffset = v
	}

	if q := f.Meter.Range; q != nil {
		switch q.Dim {
		case units.Volt:
			s.Meter.Function = instruments.FuncVoltage
		case units.Ampere:
			s.Meter.Function = instruments.FuncCurrent
		default:
			bad("$.meter.range", "expected a meter range in volts or amperes, e.g. 10 V or 100 mA, found a %s", q.Dim)
		}
		s.Meter.Range = q.Value
	}
	s.Meter.NPLC = 1
	if f.Meter.NPLC != nil {
		s.Meter.NPLC = *f.Meter.NPLC
		if !(s.Meter.NPLC > 0 && s.Meter.NPLC <= MaxNPLC) {
			bad("$.meter.nplc", "expected an integration time above 0 and at most %d power-line cycles, found %g", MaxNPLC, s.Meter.NPLC)
		}
	}
	serialPattern(doc, s, f.SerialPattern, &errs)
	if f.Retest != nil {
		switch n := f.Retest.MaxAttempts; {
		case n == nil:
			bad("$.retest", "missing required key \"max_attempts\" (how many measured runs a unit gets before it must go to rework, e.g. 3)")
		case *n < 1 || *n > MaxAttempts:
			bad("$.retest.max_attempts", "expected 1 to %d measured runs a unit gets before it must go to rework, found %d", MaxAttempts, *n)
		default:
			s.MaxAttempts = *n
		}
	}
	switch s.Uncertainty, s.MCTrials, s.MCInterval = f.Uncertainty.Method, f.Uncertainty.Trials, f.Uncertainty.Interval; s.Uncertainty {
	case "":
		s.Uncertainty = "gum"
	case "gum":
	case "monte_carlo":
		switch {
		case !doc.Has("$.uncertainty.trials"): // adaptive (JCGM 101 §7.9)
		case s.MCTrials < MinMCTrials:
			bad("$.uncertainty.trials", "expected at least %d Monte Carlo trials, found %d (leave trials out for the adaptive procedure of JCGM 101 §7.9)", MinMCTrials, s.MCTrials)
		case s.MCTrials > MaxMCTrials:
			bad("$.uncertainty.trials", "expected at most %d Monte Carlo trials, found %d", MaxMCTrials, s.MCTrials)
		}
		switch s.MCInterval {
		case "":
			s.MCInterval = uncertainty.IntervalSymmetric
		case uncertainty.IntervalSymmetric, uncertainty.IntervalShortest:
		default:
			bad("$.uncertainty.interval", "expected %s or %s, found %q", uncertainty.IntervalSymmetric, uncertainty.IntervalShortest, s.MCInterval)
		}
	default:
		bad("$.uncertainty.method", "expected gum or monte_carlo, found %q", s.Uncertainty)
	}
	if s.Uncertainty != "monte_carlo" {
		for _, k := range []string{"trials", "interval"} {
			if doc.Has("$.uncertainty." + k) {
				bad("$.uncertainty."+k, "%s applies to method monte_carlo only", k)
			}
		}
	}

	first := f.PreTrim != nil || f.Verify != nil || f.Trim != nil || f.DUT != nil
	var paths []string // YAML path of each step
	switch {
	case first && (f.Steps.set || f.DACs != nil):
		for _, k := range []string{"pre_trim", "verify", "trim", "dut"} {
			if doc.Has("$." + k) {
				errs = append(errs, doc.KeyErrorf("$."+k, "%s belongs to the first sequence layout, which has no steps: list the sweeps, the trim and the DUT commands under steps: (see README, Writing a sequence)", k))
			}
		}
	case first:
		s.FirstLayout = true
		if doc.Has("$.channels") {
			errs = append(errs, doc.KeyErrorf("$.channels", "channels need a step list: the first sequence layout (pre_trim, trim, verify) trims one channel"))
		}
		paths = firstLayout(doc, s, &f, &errs)
		if doc.Has("$.coefficients") {
			errs = append(errs, doc.KeyErrorf("$.coefficients", "coefficients: needs a step list (steps:) with a coefficients step: the first sequence layout has none"))
		}
	default:
		s.DACs = dacList(doc, f.DACs, s.ResponseDim, s.stimDim(), &errs)
		s.Coefficients = coefList(doc, s, f.Coefficients, &errs)
		parseChannels(doc, s, f.Channels, &errs)
		paths = stepList(doc, s, &errs, &decodeErrs)
	}
	checkSteps(doc, s, paths, &errs)
	checkSwitch(doc, s, &errs)
	expandChannels(s)
	runBounds(doc, s, len(paths), &errs)
	requires(doc, s, f.Requires, &errs)
	if f.Ideal.FullScale != nil {
		s.FullScale, _ = inResponse(doc, s, "$.ideal.full_scale", *f.Ideal.FullScale, &errs)
		if s.FullScale <= 0 {
			bad("$.ideal.full_scale", "expected a positive full-scale output span")
		}
	} else if st := s.Stimuli(); len(st) > 0 {
		lo, hi := st[0].Level, st[0].Level
		for _, x := range st {
			if x.Step != st[0].Step {
				break
			}
			lo, hi = min(lo, x.Level), max(hi, x.Level)
		}
		s.FullScale = math.Abs(s.IdealGain * (hi - lo))
	}

	s.limitsName = f.Limits
	if f.Limits != "" && read != nil {
		lp := f.Limits
		if !filepath.IsAbs(lp) {
			lp = filepath.Join(filepath.Dir(name), lp)
		}
		ldata, err := read(lp)
		if err != nil {
			bad("$.limits", "cannot read limit file: %v", err)
		} else if set, err := limits.Load(lp, ldata, s.Catalog()); err != nil {
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
	if s.Uncertainty == "monte_carlo" && s.MCTrials > 0 {
		// JCGM 101 §7.2.2: without the adaptive procedure, M ≥ 10⁴/(1 − p).
		if p := coverage(s); float64(s.MCTrials) < 1e4/(1-p) {
			w := doc.Errorf("$.uncertainty.trials", "%d Monte Carlo trials are fewer than 10⁴/(1 − p) = %.0f for the coverage probability %g (JCGM 101 §7.2.2); leave trials out for the adaptive procedure (§7.9)",
				s.MCTrials, math.Ceil(1e4/(1-p)), p)
			w.Warning = true
			s.Warnings = append(s.Warnings, w)
		}
	}
	return s, nil
}

// stepList decodes the steps: list, each step's own keys into the value its kind
// makes. It returns each step's YAML path.
// Problems of decoding go to decodeErrs, so that the checks' follow-on complaints
// about values that did not decode are left out.
func stepList(doc *files.Doc, s *Sequence, errs, decodeErrs *files.List) []string {
	n := doc.Len("$.steps")
	if n == 0 {
		if doc.Has("$.steps") {
			*errs = append(*errs, doc.Errorf("$.steps", "expected a list of steps, each a mapping with kind: (one of %s)", kindNamesText()))
		} else {
			*errs = append(*errs, doc.Errorf("$.steps", "missing required key \"steps\": the list of steps the unit goes through (kinds: %s)", kindNamesText()))
		}
		return nil
	}
	var paths []string
	for i := range n {
		path := fmt.Sprintf("$.steps[%d]", i)
		var h stepHead
		if err := doc.DecodeAt(path, &h, func(k string) bool { return !headKeys[k] }); err != nil {
			*decodeErrs = append(*decodeErrs, files.Errs(err)...)
		}
		line, col := doc.StartPos(path)
		d := &StepDecl{Name: strings.TrimSpace(h.Name), Kind: h.Kind, SkipIf: h.SkipIf, Where: fmt.Sprintf("%s:%d:%d", doc.Name, line, col)}
		k, ok := lookupKind(h.Kind)
		switch {
		case h.Kind == "":
			*errs = append(*errs, doc.Errorf(path, "missing required key \"kind\" (one of %s)", kindNamesText()))
			continue
		case !ok:
			*errs = append(*errs, doc.Errorf(path+".kind", "unknown step kind %q (expected one of %s)", h.Kind, kindNamesText()))
			continue
		}
		d.chans = stepChannels(doc, s, d, path, h.Channels, errs)
		d.Step = k.New()
		if err := doc.DecodeAt(path, d.Step, func(k string) bool { return headKeys[k] }); err != nil {
			*decodeErrs = append(*decodeErrs, files.Errs(err)...)
		}
		s.Steps = append(s.Steps, d)
		paths = append(paths, path)
	}
	return paths
}

// runBounds refuses a sequence whose steps together would make a run that never
// ends, though each is within its own bounds: too many steps, too long an estimated
// run, too many readings for one record.
func runBounds(doc *files.Doc, s *Sequence, fileSteps int, errs *files.List) {
	if n := fileSteps; n > MaxSteps {
		*errs = append(*errs, doc.Errorf("$.steps", "expected at most %d steps, found %d", MaxSteps, n))
		return
	}
	var total time.Duration
	readings := 0
	for _, d := range s.Steps {
		if t, ok := d.Step.(Timed); ok {
			dt, n := t.Budget()
			total += dt
			readings += n
		}
	}
	if total > MaxRunTime {
		*errs = append(*errs, doc.Errorf("$.steps", "expected a run of at most %s: the steps' estimated time adds up to %s", MaxRunTime, total.Round(time.Minute)))
	}
	if readings > MaxRunReadings {
		*errs = append(*errs, doc.Errorf("$.steps", "expected at most %d meter readings in a run (the record keeps every one): the steps take %d", MaxRunReadings, readings))
	}
}

// MaxStepName is the longest step name.
const MaxStepName = 40

// checkSteps names, checks and compiles every step in order.
func checkSteps(doc *files.Doc, s *Sequence, paths []string, errs *files.List) {
	names := map[string]string{}
	declared := map[string]string{} // result → step
	for i, d := range s.Steps {
		path := paths[i]
		switch {
		case d.Name == "" && !doc.Has(path+".name"):
			d.Name = d.Kind
			if _, dup := names[d.Name]; dup {
				d.Name = fmt.Sprintf("%s %d", d.Kind, i+1)
			}
		case d.Name == "":
			*errs = append(*errs, doc.Errorf(path+".name", "expected a step name"))
		case len(d.Name) > MaxStepName || strings.IndexFunc(d.Name, func(r rune) bool { return r < ' ' || r == 0x7f }) >= 0:
			*errs = append(*errs, doc.Errorf(path+".name", "expected a name of at most %d characters without control characters", MaxStepName))
		}
		if where, dup := names[d.Name]; dup {
			*errs = append(*errs, doc.Errorf(path+".name", "step name %q is already used by the step at %s: every step needs its own name", d.Name, where))
		}
		names[d.Name] = d.Where
		d.Stage = AsFound
		for _, e := range s.Steps[:i] {
			if e.Stage == Adjustment {
				d.Stage = AsLeft
			}
		}
		c := &Checker{doc: doc, path: path, seq: s, decl: d, earlier: s.Steps[:i], errs: errs, names: declared}
		d.Step.Check(c)
		if d.SkipIf != "" {
			// A step of the whole unit reads results of the whole unit; a step
			// that runs per channel reads its own channel's by their plain names.
			var earlier []ResultDef
			for _, e := range s.Steps[:i] {
				if d.chans != nil || e.chans == nil {
					earlier = append(earlier, e.Results...)
				}
			}
			cond, err := compileCondition(d.SkipIf, earlier)
			if err != nil {
				*errs = append(*errs, doc.Errorf(path+".skip_if", "%v", err))
			}
			d.skip = cond
		}
	}
}

// requires sets s.Requires: the roles the steps use, checked against the file's
// own requires list when it has one (which may add roles, and sets their order).
func requires(doc *files.Doc, s *Sequence, listed []string, errs *files.List) {
	used := map[string]RoleKind{}
	var order []RoleUse
	for _, d := range s.Steps {
		for _, r := range d.Roles {
			if k, seen := used[r.Role]; seen {
				if k != r.Kind {
					*errs = append(*errs, doc.Errorf("$.steps", "role %q is used as a %s by one step and as a %s by another", r.Role, k, r.Kind))
				}
				continue
			}
			used[r.Role] = r.Kind
			order = append(order, r)
		}
	}
	if s.Switch != "" {
		if _, seen := used[s.Switch]; !seen {
			used[s.Switch] = SwitchRole
			order = append(order, RoleUse{Role: s.Switch, Kind: SwitchRole})
		}
	}
	if len(listed) > 0 {
		for i, r := range listed {
			if !validRoleName(r) {
				*errs = append(*errs, doc.Errorf(fmt.Sprintf("$.requires[%d]", i), "role %q: expected a name of lowercase letters, digits and _", r))
			}
		}
		for _, r := range order {
			if !slices.Contains(listed, r.Role) {
				*errs = append(*errs, doc.Errorf("$.requires", "the steps use the %q role, which requires does not list", r.Role))
			}
		}
		s.Requires = append([]string(nil), listed...)
		return
	}
	slices.SortStableFunc(order, func(a, b RoleUse) int { return int(a.Kind.order()) - int(b.Kind.order()) })
	for _, r := range order {
		s.Requires = append(s.Requires, r.Role)
	}
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
	// MinMCTrials and MaxMCTrials bound a fixed number of Monte Carlo trials;
	// JCGM 101:2008 §7.2.1 suggests 10⁶ for a 95 % interval good to two
	// significant digits. MaxMCTrials also caps the adaptive procedure.
	MinMCTrials = 1000
	MaxMCTrials = 1_000_000
	// LegacyMCTrials is the number of trials records of metrology revision 0
	// made when the sequence file set none.
	LegacyMCTrials = 20000
	// MaxSteps is the most steps of a sequence.
	MaxSteps = 200
	// MaxRunTime bounds the estimated time of all a sequence's steps together,
	// soaks counted at their timeouts: three soaks of MaxSoakTimeout (cold,
	// room, hot) fill it.
	MaxRunTime = 24 * time.Hour
	// MaxRunReadings bounds the meter readings of one run: about 40 MB of record.
	MaxRunReadings = 400_000
	// MaxAttempts bounds retest.max_attempts: a unit measured this often is
	// being tested into a pass, not tested.
	MaxAttempts = 20
	// MaxDACBits is the widest trim DAC.
	MaxDACBits = 24
)

// sweepTime estimates how long a sweep of p takes: its points, each pointTime.
func sweepTime(p SweepPlan) time.Duration {
	return time.Duration(p.Points) * p.pointTime()
}

// pointTime is one level's shortest time: the settle and the readings at the
// meter's integration time on the slower, 50 Hz, line. A sweep, a measure step
// and one level of a re-trim pass take it.
func (p SweepPlan) pointTime() time.Duration {
	perReading := time.Duration(p.MeterSet.NPLC / 50 * float64(time.Second))
	return p.Settle + time.Duration(p.Readings)*perReading
}

// parseLSB reads a DAC's LSB: a voltage, or for a gain DAC a ratio with its unit
// (a bare "10" could be 10 ppm or 10 %).
func parseLSB(s string, dim units.Dim) (float64, error) {
	if dim == units.Ratio {
		return units.ParseRatio(s)
	}
	return units.ParseAs(s, dim)
}

// LoadSequenceSteps reads a sequence file without the limit file it names: for
// tools that judge a limit file against the product's results (lint, release)
// even while that limit file does not load. The returned sequence has no Limits.
func LoadSequenceSteps(path string) (*Sequence, error) {
	data, err := files.ReadFile(path)
	if err != nil {
		return nil, err
	}
	return parseSequence(path, data, nil)
}

// FirstLayoutCatalog is the catalogue of every first-layout sequence: the ten
// results of its fixed flow. A limit file that no sequence names is checked
// against it.
func FirstLayoutCatalog() limits.Catalog {
	c := limits.Catalog{}
	for n, st := range firstLayoutStages {
		c[n] = units.Volt
		switch {
		case st == Adjustment:
			c[n] = units.Count
		case n == ResPreGainError || n == ResPostGainError || n == ResPreNonlinearity || n == ResPostNonlinearity:
			c[n] = units.Ratio
		}
	}
	return c
}

// CatalogFor returns the results a limit file may judge: those of the sequence
// files beside it that name it under limits: (their union, with the first one
// found); when none does, those of the sequence files beside it for the product
// the limit file names (limit_set.product): a draft revision of a product's
// limits is judged against that product's steps, with a note saying so; when
// none is for that product either, FirstLayoutCatalog with seq nil and a note
// saying so. Sequence files that do not load are passed over.
func CatalogFor(limitsPath string) (cat limits.Catalog, seq *Sequence, note string) {
	dir := filepath.Dir(limitsPath)
	want, _ := filepath.Abs(limitsPath)
	entries, _ := os.ReadDir(dir)
	var others []*Sequence // sequences beside it that name another limit file
	for _, en := range entries {
		if en.IsDir() || !(strings.HasSuffix(en.Name(), ".yaml") || strings.HasSuffix(en.Name(), ".yml")) {
			continue
		}
		p := filepath.Join(dir, en.Name())
		data, err := files.ReadFile(p)
		if err != nil || FileKind(data) != FileSequence {
			continue
		}
		s, err := parseSequence(p, data, nil)
		if err != nil {
			continue
		}
		lp := s.limitsName
		if !filepath.IsAbs(lp) {
			lp = filepath.Join(dir, lp)
		}
		if abs, _ := filepath.Abs(lp); abs != want {
			others = append(others, s)
			continue
		}
		if cat == nil {
			cat, seq = limits.Catalog{}, s
		}
		maps.Copy(cat, s.Catalog())
	}
	if cat != nil {
		return cat, seq, ""
	}
	if data, err := files.ReadFile(limitsPath); err == nil {
		if product := LimitsProduct(data); product != "" {
			for _, s := range others {
				if strings.TrimSpace(s.Product) != product {
					continue
				}
				if cat == nil {
					cat, seq = limits.Catalog{}, s
				}
				maps.Copy(cat, s.Catalog())
			}
			if cat != nil {
				return cat, seq, fmt.Sprintf("no sequence file beside %s names it: its result names are checked against the steps of %s, a sequence for its product %s", filepath.Base(limitsPath), seq.File.Name, product)
			}
		}
	}
	return FirstLayoutCatalog(), nil, fmt.Sprintf("no sequence file beside %s names it or is for its product: its result names are checked against the first layout's (give --sequence to check them against a product's steps)", filepath.Base(limitsPath))
}

// RecordCatalog is the catalogue of the results a record holds, with the
// dimension each was recorded in: what the limit file in force at the time judged.
func RecordCatalog(rec *Record) limits.Catalog {
	c := limits.Catalog{}
	for _, r := range rec.Results {
		dim := units.Ratio
		switch r.Unit {
		case "V":
			dim = units.Volt
		case "A":
			dim = units.Ampere
		case "code", "count":
			dim = units.Count
		case "number":
			dim = units.Number
		}
		c[r.Name] = dim
		if r.Channel != "" {
			c[limits.ChannelKey(r.Name, r.Channel)] = dim
		}
	}
	return c
}

// Sweep returns the plan of the sweep step called name.
func (s *Sequence) Sweep(name string) (SweepPlan, bool) {
	if d := s.Step(name); d != nil {
		if sw, ok := d.Step.(*sweepStep); ok {
			return sw.Plan, true
		}
	}
	return SweepPlan{}, false
}
