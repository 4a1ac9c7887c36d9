package sequencer

import (
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"math"
	"path/filepath"
	"slices"
	"sort"
	"strings"
	"time"

	"trimline/instruments"
	"trimline/instruments/files"
	"trimline/instruments/units"
)

// RoleKind is what kind of instrument a role binds.
type RoleKind string

const (
	VoltageSource RoleKind = instruments.KindSource // a programmable DC voltage source (instruments.Source)
	// CurrentSource is a programmable DC current source: an instruments.Source
	// that is also an instruments.CurrentSource, driven in current mode. Steps
	// use it when the ideal gain is per ampere (Sequence.StimulusDim).
	CurrentSource RoleKind = instruments.KindCurrentSource
	VoltMeter     RoleKind = instruments.KindMeter // a DC voltmeter (instruments.Meter)
	DUTPort       RoleKind = instruments.KindPort  // the unit's command port (instruments.TrimPort)
	// SwitchRole routes the bench to one channel of a multi-channel unit
	// (instruments.Switch): the sequence's channels.switch.
	SwitchRole RoleKind = instruments.KindSwitch
	// ThermalRole holds the unit at a temperature (instruments.Thermal): a
	// chamber or hot plate a soak step sets.
	ThermalRole RoleKind = instruments.KindThermal
)

// The roles a station binds when its file does not say otherwise, each of the
// kind of the same name.
const (
	RoleSource = "source"
	RoleMeter  = "meter"
	RoleDUT    = "dut"
)

// roleKinds are the kinds in the order roles are listed: sources, meters, ports,
// switches, thermal.
var roleKinds = []RoleKind{VoltageSource, CurrentSource, VoltMeter, DUTPort, SwitchRole, ThermalRole}

func (k RoleKind) order() int {
	for i, x := range roleKinds {
		if x == k {
			return i
		}
	}
	return len(roleKinds)
}

// defaultKind is the kind of a role the station file names without kind:.
func defaultKind(role string) (RoleKind, bool) {
	switch role {
	case RoleSource:
		return VoltageSource, true
	case RoleMeter:
		return VoltMeter, true
	case RoleDUT:
		return DUTPort, true
	}
	return "", false
}

func kindsText() string {
	var out []string
	for _, k := range roleKinds {
		out = append(out, string(k))
	}
	return strings.Join(out, ", ")
}

// validRoleName reports whether s can name a role: lowercase letters, digits and
// _, beginning with a letter, at most 32 characters.
func validRoleName(s string) bool {
	if s == "" || len(s) > 32 || !(s[0] >= 'a' && s[0] <= 'z') {
		return false
	}
	for _, r := range s {
		if !(r >= 'a' && r <= 'z' || r >= '0' && r <= '9' || r == '_') {
			return false
		}
	}
	return true
}

// Roles returns the roles the station binds: sources first, then meters, then
// DUT ports, each group by name.
func (s *Station) Roles() []string {
	out := make([]string, 0, len(s.Instruments))
	for r := range s.Instruments {
		out = append(out, r)
	}
	sort.Slice(out, func(i, j int) bool {
		a, b := s.Instruments[out[i]].Kind.order(), s.Instruments[out[j]].Kind.order()
		if a != b {
			return a < b
		}
		return out[i] < out[j]
	})
	return out
}

// Station is a loaded station file: what is on this bench.
type Station struct {
	ID                string
	Name              string
	CertificatePrefix string
	// Site is the factory or hall the station stands in (station.site,
	// optional, "" when not given): recorded in every run (Record.Site) so a
	// store shared by several sites can be filtered by it.
	Site        string
	Instruments map[string]StationInstrument // keyed by role
	// SourceRating is the source's own output rating, from its data sheet.
	SourceRating Rating
	// MaxSourceVolts caps a voltage source's |level| and a current source's
	// compliance voltage, volts; MaxSourceAmps a current source's |level| and a
	// voltage source's compliance, amperes. Both finite, positive and no larger
	// than SourceRating.
	MaxSourceVolts float64
	MaxSourceAmps  float64
	// SafeTemperature is the set point the engine commands every thermal role
	// to on every exit path, °C (safety.safe_temperature, default DefaultSafeTemperature).
	// MinTemperature and MaxTemperature cap a soak's set point, °C, when
	// HasMinTemperature and HasMaxTemperature (safety.min_temperature and
	// max_temperature, optional).
	SafeTemperature float64
	// HandlingBand is how far from the safe temperature a chamber may read at
	// the end of a run for the unit to be taken out by hand, °C
	// (safety.handling_band, default DefaultHandlingBand). Beyond it the record
	// notes the chamber's temperature and the operator waits.
	HandlingBand                         float64
	MinTemperature, MaxTemperature       float64
	HasMinTemperature, HasMaxTemperature bool
	OutputFolder                         string // resolved relative to the station file
	// StepDeadline bounds one engine step (a sweep point, a trim write); 0 = none.
	StepDeadline time.Duration
	// Interlock, when set, must give its Closed reply before every sweep point,
	// so before any output is switched on.
	Interlock *Interlock
	// RequireRelease makes production runs refuse sequence and limit files whose
	// hash was never released in the ledger's audit trail.
	RequireRelease bool
	// ReleaseKeys names the approvers whose signed release decisions count: a
	// folder of their public keys (NAME.pub) or a trust file naming them
	// (resolved relative to the station file); required with RequireRelease.
	ReleaseKeys string
	// SigningKey is the station's Ed25519 private key file (resolved relative to
	// the station file); "" issues unsigned certificates.
	SigningKey string
	// People are who may work at the station and what they may do (people:);
	// nil when the file lists nobody (then anyone signed in may operate on a
	// loopback console, and nobody may review).
	People []Person
	File   FileRef
	Raw    []byte // the file's exact bytes, for the ledger's content-addressed store

	doc *files.Doc // the parsed file, for positions of checks made after loading
}

// Interlock is a fixture input read through one of the station's instruments.
type Interlock struct {
	Role   string // instrument that answers the query
	Query  string // e.g. "LID?"
	Closed string // the exact reply that means closed, e.g. "CLOSED"
}

// StationInstrument is one role's binding on the station.
type StationInstrument struct {
	Role    string
	Kind    RoleKind
	Address string
	Asset   string
	CalDue  time.Time // the last day the calibration is valid, UTC midnight
	// Accuracy is the instrument's one spec, or the first of its list.
	Accuracy Accuracy
	// Specs are every spec the file gives: one or more per dimension of range
	// (a meter that reads volts and amperes has at least one of each; a meter
	// with a spec per range has one per range), never two of the same range;
	// SpecAt picks the one a reading was taken with.
	Specs []Accuracy
	// CalDate is the day the instrument was last calibrated (UTC midnight;
	// zero = not stated), CalCertificate the number of that calibration's
	// certificate and CalLab the laboratory that issued it (calibration.date,
	// certificate and laboratory in the file).
	CalDate        time.Time
	CalCertificate string
	CalLab         string
	// Validity is when and where the accuracy specs hold (the file's spec:
	// block); the zero value says nothing, and the specs are then applied as
	// written.
	Validity  SpecValidity
	Model     string // expected model from *IDN?, empty = not pinned
	Serial    string // expected serial from *IDN?, empty = not pinned
	Settings  map[string]string
	Templates map[string]string // command template overrides for this model
	Timeout   time.Duration     // per command; 0 = the driver's default
	// Dir is the station file's folder, where a setting that names a file (the
	// simulated DUT's budget) is resolved (instruments.Spec.Dir).
	Dir string
}

// SpecValidity is when and where an instrument's accuracy specs hold, as its
// data sheet states them: for Period after calibration (the data sheet's
// column: "24 hours", "90 days", "1 year"), within LowC to HighC °C of ambient
// when HasBand, and outside that band worse by TempcoOfReading and
// TempcoOfRange (fractions, per °C) for every degree outside it.
type SpecValidity struct {
	Period                         string
	HasBand                        bool
	LowC, HighC                    float64
	TempcoOfReading, TempcoOfRange float64
}

// BandText is the band in words, "18 °C to 28 °C"; "" without one.
func (v SpecValidity) BandText() string {
	if !v.HasBand {
		return ""
	}
	return fmtC(v.LowC) + " to " + fmtC(v.HighC)
}

// TempcoText is the temperature coefficient in the usual written form,
// "±(3 ppm of reading + 0.5 ppm of range) per °C"; "" without a band.
func (v SpecValidity) TempcoText() string {
	if !v.HasBand {
		return ""
	}
	return fmt.Sprintf("±(%g ppm of reading + %g ppm of range) per °C", round6(v.TempcoOfReading*1e6), round6(v.TempcoOfRange*1e6))
}

// Outside is how far an ambient of c °C lies outside the band, °C (0 within
// it, and without a band).
func (v SpecValidity) Outside(c float64) float64 {
	switch {
	case !v.HasBand:
		return 0
	case c < v.LowC:
		return v.LowC - c
	case c > v.HighC:
		return c - v.HighC
	}
	return 0
}

// Widen is the spec a at an ambient outside the band by outside °C: each term
// grows by its temperature coefficient times the distance (the usual data-sheet
// rule, common practice; the widened spec is still a rectangular bound,
// JCGM 100 §4.3.7). The range, resolution and dimension are a's.
func (v SpecValidity) Widen(a Accuracy, outside float64) Accuracy {
	if outside <= 0 || a == (Accuracy{}) {
		return a
	}
	a.OfReading += v.TempcoOfReading * outside
	a.OfRange += v.TempcoOfRange * outside
	return a
}

// Accuracy is a ±(of reading + of range) specification, both as fractions, with the
// range it applies to, in volts or amperes as Dim says.
type Accuracy struct {
	OfReading  float64
	OfRange    float64
	Range      float64
	Resolution float64   // one count on that range, in the range's unit; 0 = not stated
	Dim        units.Dim // of Range and Resolution: units.Volt (0 is read as volts too) or units.Ampere
}

// unit is the spec's unit: "A" for a current range, else "V".
func (a Accuracy) unit() string {
	if a.Dim == units.Ampere {
		return "A"
	}
	return "V"
}

// String gives the spec in the usual written form.
func (a Accuracy) String() string {
	if a == (Accuracy{}) {
		return ""
	}
	s := fmt.Sprintf("±(%g ppm of reading + %g ppm of range), range %s",
		round6(a.OfReading*1e6), round6(a.OfRange*1e6), units.Format(a.Range, a.unit(), 4))
	if a.Resolution > 0 {
		s += ", resolution " + units.Format(a.Resolution, a.unit(), 3)
	}
	return s
}

// SpecFor is the instrument's spec for readings of dimension d (units.Volt or
// units.Ampere): the first whose range is of d, or the zero Accuracy when none
// is. A spec of no stated dimension counts as volts. SpecAt picks among
// several of one dimension.
func (si StationInstrument) SpecFor(d units.Dim) Accuracy {
	for _, a := range si.specsOf(d) {
		return a
	}
	return Accuracy{}
}

// OverRange is how far above its nominal range a range still reads: 1.2 ×
// (20 % over-range), common practice for bench DMMs and calibrators. A reading
// taken on auto range is held by the smallest range r with |value| ≤ OverRange·r.
const OverRange = 1.2

// SpecAt is the instrument's spec for one reading (or one programmed level) of
// dimension d and value v (volts or amperes), taken with the range set to rng
// (in d's unit; 0 = auto range):
//   - the spec whose range equals rng, when one does;
//   - else (auto range, or no spec for that range) the spec of the smallest
//     range that holds |v| with OverRange, as the instrument's auto range picks;
//   - else, |v| beyond every range, the spec of the largest range.
//
// An instrument with one spec of d always gives that spec, whatever rng and v.
// The zero Accuracy comes back when no spec is of d.
func (si StationInstrument) SpecAt(d units.Dim, rng, v float64) Accuracy {
	specs := si.specsOf(d)
	if len(specs) <= 1 {
		return si.SpecFor(d)
	}
	if rng > 0 {
		for _, a := range specs {
			if sameRange(a.Range, rng) {
				return a
			}
		}
	}
	var best, largest Accuracy
	for _, a := range specs {
		if math.Abs(v) <= OverRange*a.Range && (best == (Accuracy{}) || a.Range < best.Range) {
			best = a
		}
		if a.Range > largest.Range {
			largest = a
		}
	}
	if best != (Accuracy{}) {
		return best
	}
	return largest
}

// specsOf are the instrument's specs of dimension d, in file order.
func (si StationInstrument) specsOf(d units.Dim) []Accuracy {
	specs := si.Specs
	if len(specs) == 0 {
		specs = []Accuracy{si.Accuracy}
	}
	var out []Accuracy
	for _, a := range specs {
		if a.Dim == d || a.Dim == 0 && d == units.Volt {
			out = append(out, a)
		}
	}
	return out
}

// sameRange reports whether two ranges are the same one, as written in files
// ("1 V" and "1000 mV" parse to values that may differ in the last bit).
func sameRange(a, b float64) bool {
	return math.Abs(a-b) <= 1e-9*math.Max(math.Abs(a), math.Abs(b))
}

// AccuracyText is every spec of the instrument in the written form, "; "
// between them: what the record keeps.
func (si StationInstrument) AccuracyText() string {
	if len(si.Specs) <= 1 {
		return si.Accuracy.String()
	}
	var out []string
	for _, a := range si.Specs {
		out = append(out, a.String())
	}
	return strings.Join(out, "; ")
}

// accuracyDecl is one spec as the station file writes it.
type accuracyDecl struct {
	OfReading  units.Fraction `yaml:"of_reading"`
	OfRange    units.Fraction `yaml:"of_range"`
	Range      units.Quantity `yaml:"range"`
	Resolution units.Quantity `yaml:"resolution"`
}

// specsOf checks the instrument's accuracy specs: every range of V or A (a
// voltage source's of V, a current source's of A), positive, no two of the
// same dimension and range.
func specsOf(doc *files.Doc, base string, kind RoleKind, errs *files.List) []Accuracy {
	var out []Accuracy
	type key struct {
		dim units.Dim
		rng float64
		at  int // index in the list
	}
	var seen []key
	n, isList := doc.Len(base+".accuracy"), true
	if n == 0 {
		n, isList = 1, false
	}
	for i := range n {
		path := base + ".accuracy"
		if isList {
			path = fmt.Sprintf("%s[%d]", path, i)
		}
		var d accuracyDecl
		if err := doc.DecodeAt(path, &d, nil); err != nil {
			if fe := files.Errs(err); fe != nil {
				*errs = append(*errs, fe...)
			} else {
				*errs = append(*errs, doc.Errorf(path, "%v", err))
			}
			continue
		}
		bad := func(key, format string, args ...any) {
			p := path
			if key != "" {
				p += "." + key
			}
			*errs = append(*errs, doc.Errorf(p, format, args...))
		}
		spec := Accuracy{OfReading: float64(d.OfReading), OfRange: float64(d.OfRange), Range: d.Range.Value, Resolution: d.Resolution.Value, Dim: d.Range.Dim}
		if spec.OfReading < 0 || spec.OfRange < 0 || spec.Resolution < 0 {
			bad("", "accuracy terms must not be negative")
		}
		switch {
		case d.Range.Dim != units.Volt && d.Range.Dim != units.Ampere || kind == VoltageSource && d.Range.Dim != units.Volt ||
			kind == CurrentSource && d.Range.Dim != units.Ampere:
			want := "voltage or current"
			switch kind {
			case VoltageSource:
				want = "voltage"
			case CurrentSource:
				want = "current"
			}
			bad("range", "expected a positive %s range such as 10V or 100 mA, found a %s", want, d.Range.Dim)
			continue
		case spec.Range <= 0:
			bad("range", "expected a positive range such as 10V")
		}
		if d.Resolution != (units.Quantity{}) && d.Resolution.Dim != d.Range.Dim {
			bad("resolution", "expected a resolution in the range's unit (a %s), found a %s", d.Range.Dim, d.Resolution.Dim)
		}
		if j := slices.IndexFunc(seen, func(k key) bool { return k.dim == spec.Dim && sameRange(k.rng, spec.Range) }); j >= 0 {
			bad("range", "a second spec for the %s range (accuracy[%d] is one already): give one spec per range", units.Format(spec.Range, spec.unit(), 4), seen[j].at)
			continue
		}
		seen = append(seen, key{spec.Dim, spec.Range, i})
		out = append(out, spec)
	}
	return out
}

func round6(v float64) float64 {
	s := fmt.Sprintf("%.6g", v)
	var f float64
	fmt.Sscan(s, &f)
	return f
}

type stationFile struct {
	Station struct {
		ID                string `yaml:"id"`
		Name              string `yaml:"name"`
		CertificatePrefix string `yaml:"certificate_prefix"`
		Site              string `yaml:"site"`
	} `yaml:"station"`
	Instruments map[string]struct {
		Kind     string   `yaml:"kind"`
		Address  string   `yaml:"address"`
		Asset    string   `yaml:"asset"`
		CalDue   string   `yaml:"cal_due"`
		Model    string   `yaml:"model"`
		Serial   string   `yaml:"serial"`
		Accuracy *anyNode `yaml:"accuracy"`
		// Calibration is who calibrated the instrument, when, under which certificate.
		Calibration *calibrationDecl  `yaml:"calibration"`
		Spec        *specDecl         `yaml:"spec"`
		Settings    map[string]string `yaml:"settings"`
		Templates   map[string]string `yaml:"templates"`
		Timeout     *units.Duration   `yaml:"timeout"`
	} `yaml:"instruments"`
	Interlock *struct {
		Role   string `yaml:"role"`
		Query  string `yaml:"query"`
		Closed string `yaml:"closed"`
	} `yaml:"interlock"`
	StepDeadline *units.Duration `yaml:"step_deadline"`
	Signing      struct {
		Key string `yaml:"key"`
	} `yaml:"signing"`
	RequireRelease bool   `yaml:"require_release"`
	ReleaseKeys    string `yaml:"release_keys"`
	Safety         struct {
		SourceRating     *ratingDecl     `yaml:"source_rating"`
		MaxSourceVoltage *units.Voltage  `yaml:"max_source_voltage"`
		MaxSourceCurrent *units.Current  `yaml:"max_source_current"`
		SafeTemperature  *units.Quantity `yaml:"safe_temperature"`
		HandlingBand     *units.Quantity `yaml:"handling_band"`
		MinTemperature   *units.Quantity `yaml:"min_temperature"`
		MaxTemperature   *units.Quantity `yaml:"max_temperature"`
	} `yaml:"safety"`
	Output struct {
		Folder string `yaml:"folder"`
	} `yaml:"output"`
	People []personDecl `yaml:"people"`
}

// Bounds on the durations a station file sets: a wait longer than these is a
// hung instrument, not a slow one.
const (
	// MaxTimeout is the longest per-exchange timeout of an instrument.
	MaxTimeout = time.Minute
	// MaxStepDeadline is the longest deadline of one engine step (a sweep point
	// of MaxReadings readings at 1 PLC takes 20 s; a trim write well under 1 s).
	MaxStepDeadline = 10 * time.Minute
)

// LoadStation reads and checks a station file. Every problem comes back in a
// files.List, positioned.
func LoadStation(path string) (*Station, error) {
	data, err := files.ReadFile(path)
	if err != nil {
		return nil, err
	}
	return ParseStation(path, data)
}

// ParseStation is LoadStation on bytes already read; name is used in messages and
// to resolve the output folder.
func ParseStation(name string, data []byte) (*Station, error) {
	st, err := InspectStation(name, data)
	if err != nil {
		return nil, err
	}
	return st, nil
}

// InspectStation is ParseStation that returns what did load even when the file has
// problems (nil only when it could not be read as a station file at all), so that
// trimline check can go on to report what else production would refuse. A station
// that comes with an error must not be run.
func InspectStation(name string, data []byte) (*Station, error) {
	return parseStation(name, data, false)
}

// ParseRecordedStation loads a station file stored with a recorded run, for replay.
// The file was in force when the run was made, so the rules added since a file may
// have been recorded are not applied to it: a declared source_rating (caps are
// then bounded by nothing but being finite and positive), the station id rule and
// the interlock above the hazardous-live level. Nor are the drivers' settings
// checked: the station is never opened, and a setting may name a file that is not
// stored with the run (a simulated DUT's budget). Everything else is checked as
// ParseStation checks it. The station must not be run.
func ParseRecordedStation(name string, data []byte) (*Station, error) {
	st, err := parseStation(name, data, true)
	if err != nil {
		return nil, err
	}
	return st, nil
}

// parseStation loads a station file; recorded is ParseRecordedStation's leniency.
func parseStation(name string, data []byte, recorded bool) (*Station, error) {
	doc, err := files.Parse(name, data)
	if err != nil {
		return nil, err
	}
	if err := wrongKind(doc, data, FileStation); err != nil {
		return nil, err
	}
	var f stationFile
	decodeErrs := decodeAll(doc, &f)
	var errs files.List
	req := func(path, v string) {
		if strings.TrimSpace(v) == "" {
			errs = append(errs, doc.Errorf(path, "missing required key %q", lastPart(path)))
		}
	}
	req("$.station.id", f.Station.ID)
	if !recorded {
		stationIDs(doc, f.Station.ID, f.Station.CertificatePrefix, &errs)
	}
	st := &Station{
		ID: f.Station.ID, Name: f.Station.Name, CertificatePrefix: f.Station.CertificatePrefix,
		Site:        f.Station.Site,
		Instruments: map[string]StationInstrument{},
		File:        FileRef{Kind: FileStation, Name: filepath.Base(name), Title: f.Station.Name, SHA256: hashHex(data)},
		Raw:         data,
		doc:         doc,
	}
	if st.CertificatePrefix == "" {
		st.CertificatePrefix = st.ID
	}
	if err := checkLabel("site", st.Site); err != nil {
		errs = append(errs, doc.Errorf("$.station.site", "%v (the factory or hall the station stands in, e.g. \"Eastfield works\")", err))
	}
	if !doc.Has("$.instruments") {
		errs = append(errs, doc.Errorf("$", "missing required key \"instruments\" (each role with its kind: %s)", kindsText()))
	}
	roles := make([]string, 0, len(f.Instruments))
	for r := range f.Instruments {
		roles = append(roles, r)
	}
	sort.Strings(roles)
	for _, role := range roles {
		in := f.Instruments[role]
		base := "$.instruments." + role
		if !validRoleName(role) {
			errs = append(errs, doc.KeyErrorf(base, "role %q: expected a name of lowercase letters, digits and _ beginning with a letter", role))
			continue
		}
		kind, known := defaultKind(role)
		switch k := RoleKind(in.Kind); {
		case in.Kind == "" && !known:
			errs = append(errs, doc.KeyErrorf(base, "missing required key \"kind\" for role %q (one of %s)", role, kindsText()))
		case in.Kind == "":
		case k.order() == len(roleKinds):
			errs = append(errs, doc.Errorf(base+".kind", "unknown instrument kind %q (expected one of %s)", in.Kind, kindsText()))
			kind, known = "", false
		default:
			kind, known = k, true
		}
		req(base+".address", in.Address)
		req(base+".asset", in.Asset)
		si := StationInstrument{Role: role, Kind: kind, Address: in.Address, Asset: in.Asset, Model: in.Model, Serial: in.Serial,
			Settings: in.Settings, Templates: in.Templates, Dir: filepath.Dir(name)}
		if in.Timeout != nil {
			if si.Timeout = in.Timeout.D(); si.Timeout <= 0 {
				errs = append(errs, doc.Errorf(base+".timeout", "expected a positive timeout such as 2 s"))
			} else if si.Timeout > MaxTimeout {
				errs = append(errs, doc.Errorf(base+".timeout", "expected a timeout of at most %s, found %s", MaxTimeout, si.Timeout))
			}
		}
		// An instrument of no known kind has no checks to make; a DUT port and a
		// switch measure nothing, so they have no calibration or accuracy; a
		// thermal role's readings decide when a soak is stable, not a result.
		if known && kind != DUTPort && kind != SwitchRole && kind != ThermalRole {
			req(base+".cal_due", in.CalDue)
			if in.CalDue != "" {
				d, err := time.Parse("2006-01-02", in.CalDue)
				if err != nil {
					errs = append(errs, doc.Errorf(base+".cal_due", "expected a date as YYYY-MM-DD, found %q", in.CalDue))
				}
				si.CalDue = d
			}
			calibration(doc, base, &si, in.Calibration, &errs)
			if in.Spec != nil {
				si.Validity = validity(doc, base+".spec", *in.Spec, si, &errs)
			}
			if in.Accuracy == nil {
				errs = append(errs, doc.Errorf(base, "missing required key \"accuracy\" (of_reading, of_range, range)"))
			} else {
				si.Specs = specsOf(doc, base, kind, &errs)
				if len(si.Specs) > 0 {
					si.Accuracy = si.Specs[0]
				}
			}
		}
		if known && (kind == DUTPort || kind == SwitchRole || kind == ThermalRole) {
			for _, k := range []string{"calibration", "spec"} {
				if doc.Has(base + "." + k) {
					errs = append(errs, doc.KeyErrorf(base+"."+k, "a %s measures nothing the results are traced through: it has no %s (remove the key)", kind, k))
				}
			}
		}
		if in.Address != "" && !recorded {
			spec := si.spec()
			if err := instruments.Check([]instruments.Spec{spec}); err != nil {
				var se *instruments.SettingError
				if errors.As(err, &se) {
					path := base + ".settings." + se.Key
					if t, ok := strings.CutPrefix(se.Key, "templates."); ok {
						path = base + ".templates." + t
					}
					errs = append(errs, doc.Errorf(path, "%s", err))
				} else {
					errs = append(errs, doc.Errorf(base+".address", "%s", err))
				}
			}
		}
		st.Instruments[role] = si
	}
	if f.Safety.SourceRating != nil || !recorded {
		st.SourceRating = rating(doc, f.Safety.SourceRating, &errs)
	}
	st.MaxSourceVolts, st.MaxSourceAmps = caps(doc, f.Safety.MaxSourceVoltage, f.Safety.MaxSourceCurrent, st.SourceRating, &errs)
	temperatures(doc, st, f.Safety.SafeTemperature, f.Safety.MinTemperature, f.Safety.MaxTemperature, &errs)
	handlingBand(doc, st, f.Safety.HandlingBand, &errs)
	if f.StepDeadline != nil {
		if st.StepDeadline = f.StepDeadline.D(); st.StepDeadline <= 0 {
			errs = append(errs, doc.Errorf("$.step_deadline", "expected a positive duration such as 30 s"))
		} else if st.StepDeadline > MaxStepDeadline {
			errs = append(errs, doc.Errorf("$.step_deadline", "expected a step deadline of at most %s, found %s", MaxStepDeadline, st.StepDeadline))
		}
	}
	if il := f.Interlock; il != nil {
		st.Interlock = &Interlock{Role: il.Role, Query: il.Query, Closed: il.Closed}
		if _, ok := f.Instruments[il.Role]; !ok {
			errs = append(errs, doc.Errorf("$.interlock.role", "the interlock is read through the %q role, which this station does not bind", il.Role))
		}
		if il.Query == "" {
			errs = append(errs, doc.Errorf("$.interlock.query", "missing required key \"query\" (the command that reads the fixture lid)"))
		}
		if il.Closed == "" {
			errs = append(errs, doc.Errorf("$.interlock.closed", "missing required key \"closed\" (the reply that means the lid is closed)"))
		}
	}
	if !recorded {
		hazard(doc, st, &errs)
	}
	st.RequireRelease = f.RequireRelease
	if k := f.ReleaseKeys; k != "" {
		st.ReleaseKeys = k
		if !filepath.IsAbs(k) {
			st.ReleaseKeys = filepath.Join(filepath.Dir(name), k)
		}
	}
	if st.RequireRelease && st.ReleaseKeys == "" {
		errs = append(errs, doc.Errorf("$.require_release", "require_release needs release_keys: the folder of the approvers' public keys, or a trust file naming them, whose signed releases count"))
	}
	if k := f.Signing.Key; k != "" {
		st.SigningKey = k
		if !filepath.IsAbs(k) {
			st.SigningKey = filepath.Join(filepath.Dir(name), k)
		}
	}
	st.People = people(doc, name, f.People, &errs)
	st.OutputFolder = f.Output.Folder
	if st.OutputFolder != "" && !filepath.IsAbs(st.OutputFolder) {
		st.OutputFolder = filepath.Join(filepath.Dir(name), st.OutputFolder)
	}
	if errs = withDecodeErrs(decodeErrs, errs); len(errs) > 0 {
		errs.Sort()
		return st, errs
	}
	return st, nil
}

// Specs returns the instrument specs to open, in role order.
func (s *Station) Specs(roles []string) []instruments.Spec {
	var out []instruments.Spec
	for _, r := range roles {
		in, ok := s.Instruments[r]
		if !ok {
			continue
		}
		out = append(out, in.spec())
	}
	return out
}

func (si StationInstrument) spec() instruments.Spec {
	return instruments.Spec{Role: si.Role, Kind: string(si.Kind), Address: si.Address, Settings: si.Settings, Templates: si.Templates, Timeout: si.Timeout, Dir: si.Dir}
}

func lastPart(path string) string {
	return path[strings.LastIndex(path, ".")+1:]
}

func hashHex(b []byte) string {
	h := sha256.Sum256(b)
	return hex.EncodeToString(h[:])
}
