package sequencer

import (
	"time"

	"trimline/instruments"
	"trimline/limits"
)

// RecordSchema is the version of the Record layout. Bump it when a field changes
// meaning; readers of old ledgers switch on it.
const RecordSchema = 2

// Metrology is the revision of the measurement rules a record was computed by
// (degrees of freedom, Monte Carlo, rounding, measurands). A replay computes a
// record by the revision it was made with, so a certificate issued years ago
// re-derives exactly; a new run uses CurrentMetrology.
//
//   - 0: records made before revisions were kept.
//   - 1: a pooled standard deviation is one Type A input (its Σ(n_i − 1)
//     degrees of freedom counted once), and the rest of the rules that came
//     with it (see DEVELOPERS.md, "Metrology revisions").
const CurrentMetrology = 1

// Verdict is the outcome of one unit's run. PASS, REVIEW and FAIL are the limit
// file's overall verdicts (limits.VerdictPass, VerdictReview, VerdictFail) as the
// record spells them; FAULT and ABORTED are the station's, when nothing was judged.
type Verdict string

const (
	Pass    Verdict = "PASS"    // every limit passed
	Fail    Verdict = "FAIL"    // the unit was measured and at least one limit failed (or a trim saturated)
	Fault   Verdict = "FAULT"   // the station could not measure: an instrument or I/O error
	Aborted Verdict = "ABORTED" // the operator or a signal stopped the run
	// Review: measured, nothing failed, but a result sits in a conditional zone
	// (within the guard band of a limit) and the limit file's policy sends such
	// units to a person instead of shipping them.
	Review Verdict = "REVIEW"
)

// Judged is the limit file's overall verdict that v spells: limits.VerdictPass,
// VerdictReview or VerdictFail; ok is false for FAULT and ABORTED (and anything
// else), which no limit judged.
func (v Verdict) Judged() (verdict string, ok bool) {
	switch v {
	case Pass:
		return limits.VerdictPass, true
	case Review:
		return limits.VerdictReview, true
	case Fail:
		return limits.VerdictFail, true
	}
	return "", false
}

// Conditions are the environmental conditions of a run.
type Conditions struct {
	AmbientC      float64 `json:"ambient_c,omitempty"`      // ambient temperature, °C
	AmbientSource string  `json:"ambient_source,omitempty"` // "" (not recorded), "entered" or "sensor"
}

// Uncertainty is the uncertainty of one number (JCGM 100:2008): standard
// uncertainty, effective degrees of freedom (Welch–Satterthwaite), coverage factor
// for the record's coverage probability, and the expanded uncertainty U = k·u. The
// zero value means "not evaluated". Std and Expanded are in the unit of the value.
type Uncertainty struct {
	Std      float64 `json:"u"`
	DOF      float64 `json:"dof"` // math.Inf(1) when every contribution has infinite dof
	K        float64 `json:"k"`
	Expanded float64 `json:"U"`
	Method   string  `json:"method,omitempty"` // "GUM" (law of propagation) or "MC" (JCGM 101 Monte Carlo); MethodMaxMC for a maximum
	// Max says how the uncertainty of a maximum-type result (nonlinearity,
	// max_error) was evaluated from metrology revision 1: Monte Carlo of the
	// maximum (maxunc.go). Zero for every other result.
	Max MaxUnc `json:"max,omitzero"`
	// MC is the Monte Carlo coverage interval behind Std and Expanded (Method
	// "MC", metrology revision ≥ 1; nil otherwise). Std is then the standard
	// deviation of the model values, Expanded the larger distance from the
	// value to an end of the interval (so that value ± Expanded holds the
	// whole interval, and a limit judging with a symmetric U is never less
	// cautious than the interval), K = Expanded/Std, and DOF the GUM's
	// Welch–Satterthwaite νeff, for reference only: k does not come from it.
	MC *MCInterval `json:"mc,omitempty"`
}

// MCInterval is a Monte Carlo coverage interval (JCGM 101:2008) at the record's
// coverage probability, with the check of the GUM interval against it (§8).
// Numbers are in the unit of the value.
type MCInterval struct {
	Low  float64 `json:"low"`  // lower end point, absolute
	High float64 `json:"high"` // upper end point, absolute
	// Interval is "symmetric" (probabilistically symmetric, JCGM 101 §7.7) or
	// "shortest" (§7.8).
	Interval string `json:"interval"`
	Trials   int    `json:"trials"`             // M, the trials made
	Adaptive bool   `json:"adaptive,omitempty"` // the adaptive procedure of §7.9 chose M
	// Capped: the adaptive procedure reached the trial cap before its results
	// stabilised to Delta (they may be good to fewer digits).
	Capped bool    `json:"capped,omitempty"`
	Delta  float64 `json:"delta"` // numerical tolerance δ of Std at two significant digits (§7.9.2)
	// GUMStd and GUMExpanded are the law of propagation's u and U = k·u (k
	// from νeff) for the same quantity; DLow = |y − U − low| and DHigh = |y +
	// U − high| compare its interval y ± U with [Low, High], and Validated is
	// true when both are at most GUMDelta, δ of GUMStd at two significant
	// digits (JCGM 101 §8.2).
	GUMStd      float64 `json:"gum_u"`
	GUMExpanded float64 `json:"gum_U"`
	DLow        float64 `json:"d_low"`
	DHigh       float64 `json:"d_high"`
	GUMDelta    float64 `json:"gum_delta"`
	Validated   bool    `json:"validated"`
}

// Record is everything one run of one serial number produced: the raw readings with
// their times, the fits, the codes, every limit's value and verdict, the instruments'
// identities and the hashes of the files in force. Reports are made from a Record
// alone; identical Records give identical documents.
type Record struct {
	Schema   int    `json:"schema"`
	RunID    string `json:"run_id"`
	Serial   string `json:"serial"`
	Product  string `json:"product"`
	Revision string `json:"revision"`
	Station  string `json:"station"`
	Operator string `json:"operator"`
	Software string `json:"software"` // trimline version that ran
	// Metrology is the revision of the measurement rules the record was
	// computed by (CurrentMetrology for a new run; 0 in older records).
	Metrology int       `json:"metrology,omitempty"`
	Started   time.Time `json:"started"`
	Finished  time.Time `json:"finished"`

	Files       []FileRef       `json:"files"`
	Instruments []InstrumentRef `json:"instruments"`

	// Ideal transfer the unit is trimmed to: y = IdealGain·x + IdealOffset (V/V, V).
	IdealGain   float64 `json:"ideal_gain"`
	IdealOffset float64 `json:"ideal_offset_v"`
	FullScale   float64 `json:"full_scale_v"` // output span used for "% of full scale"

	Sweeps []Sweep      `json:"sweeps"`
	Fits   []FitSummary `json:"fits"`
	Trims  []TrimCode   `json:"trims"`
	// Coefficients are the firmware correction coefficients written, one per
	// coefficient (and channel), in write order. Empty for products without them.
	Coefficients []CoefficientWrite `json:"coefficients,omitempty"`
	// Soaks are the temperature soaks of the run, in order.
	Soaks []Soak `json:"soaks,omitempty"`
	// Retrims are the passes of every closed-loop re-trim, in order.
	Retrims []RetrimPass `json:"retrims,omitempty"`
	// Zeros are the run's zero checks (zero_check steps), in order.
	Zeros []ZeroCheck `json:"zeros,omitempty"`
	// TrimEffects say how the uncertainty of each trim-effect result (a fit's
	// offset_change, gain_change) was evaluated: which instrument errors the
	// two sweeps shared (trimeffect.go). In the order computed.
	TrimEffects []TrimEffect `json:"trim_effects,omitempty"`
	// StimulusUnit and ResponseUnit are the units of every sweep's stimulus and
	// response (Point.Stimulus, Point.Mean, the readings) and of the ideal
	// offset and full scale: "V", "A" or "count" (a number the unit reports).
	// Empty means "V" (records made before other quantities).
	StimulusUnit string `json:"stimulus_unit,omitempty"`
	ResponseUnit string `json:"response_unit,omitempty"`

	Conditions Conditions `json:"conditions"`
	Coverage   float64    `json:"coverage"` // coverage probability of every expanded uncertainty, e.g. 0.9545

	// Steps says, step by step, what the run did (records of schema 2).
	Steps    []StepRun        `json:"steps,omitempty"`
	Results  []Result         `json:"results"`
	Outcomes []limits.Outcome `json:"limits"`

	// Simulated is set when any instrument of the run was simulated: the
	// record and its certificate carry SimulatedMark and claim no traceability.
	Simulated *Simulation `json:"simulated,omitempty"`

	Verdict Verdict `json:"verdict"` // PASS, FAIL, REVIEW, FAULT or ABORTED
	// Engineering marks a run made with files that were never released: its
	// certificate says so in large letters and comes from a number series of its own.
	Engineering bool `json:"engineering,omitempty"`
	// Lot is the production lot the unit was run in, as the operator or the
	// script gave it (run --lot), "" when none was given: quality numbers
	// are filtered and trended by it.
	Lot string `json:"lot,omitempty"`
	// Site is the station's site (station.site) when the run was made, "" when
	// the station file names none.
	Site string `json:"site,omitempty"`
	// RetestOf is the run id of the earlier measured run (PASS, FAIL or REVIEW) of
	// the same serial that this run repeats, "" for a first test. The ledger
	// supersedes that run's certificate when this run is certified.
	RetestOf string   `json:"retest_of,omitempty"`
	Reasons  []string `json:"reasons,omitempty"` // why the verdict is not PASS, in order
	Fault    string   `json:"fault,omitempty"`   // the station fault message, for FAULT and ABORTED
	// FaultDetail says, for a FAULT, which instrument failed and what it said,
	// when the engine knows (nil otherwise, and in every record made before it
	// was kept).
	FaultDetail *FaultDetail `json:"fault_detail,omitempty"`
	// Disposition is a reviewer's decision on a run held for REVIEW: set only on
	// the record that reissues that run's certificate with the final verdict.
	Disposition *Disposition `json:"disposition,omitempty"`
	// Notes are what the operator must know once the run is over, whatever its
	// verdict: a chamber still beyond the handling band of the safe temperature
	// ("chamber at 84.9 °C: wait before opening the fixture").
	Notes []string `json:"notes,omitempty"`
}

// FaultDetail is the instrument a station fault came from.
type FaultDetail struct {
	Role    string `json:"role"`              // the station role ("meter")
	Asset   string `json:"asset,omitempty"`   // its asset tag from the station file
	Address string `json:"address,omitempty"` // where the station file binds it
	// Said is what the instrument said or did: an error-queue entry, or what
	// went wrong talking to it ("no reply within 2 s").
	Said string `json:"said"`
}

// Disposition is a reviewer's decision on a unit held for REVIEW.
type Disposition struct {
	Of            string    `json:"of"`             // run id of the REVIEW run decided on
	OfCertificate string    `json:"of_certificate"` // that run's certificate number
	Decision      string    `json:"decision"`       // DecisionAccept or DecisionReject
	Reviewer      string    `json:"reviewer"`       // name, as the station file lists the person
	Reason        string    `json:"reason"`         // the reviewer's reason, in words
	At            time.Time `json:"at"`
	// Tested is when the REVIEW run decided on ended: the time of the test
	// the certificate states (the disposition record's own Started and
	// Finished are the time of the decision, when its certificate is issued).
	Tested time.Time `json:"tested,omitzero"`
	// Authenticated says how the reviewer was known: "station sign-in",
	// "passphrase", or "key ed25519:…".
	Authenticated string `json:"authenticated,omitempty"`
}

// The decisions of a Disposition.
const (
	DecisionAccept = "accept" // the unit ships: final verdict PASS
	DecisionReject = "reject" // the unit does not: final verdict FAIL
)

// StepRun is what one step of the sequence did in a run.
type StepRun struct {
	Name string `json:"name"`
	// Channel is the channel this run of a per-channel step worked on ("" for
	// a step of the whole unit).
	Channel string `json:"channel,omitempty"`
	Kind    string `json:"kind"`
	Stage   Stage  `json:"stage,omitempty"`
	Status  string `json:"status"`         // StepDone, StepSkipped or StepNotReached
	Note    string `json:"note,omitempty"` // why it was skipped or not reached
}

// What a step did.
const (
	StepDone       = "done"
	StepSkipped    = "skipped"     // its skip_if held
	StepNotReached = "not reached" // an earlier step ended the run
)

// FileRef names one input file and the SHA-256 of its exact bytes.
type FileRef struct {
	Kind   string `json:"kind"` // FileStation, FileSequence or FileLimits
	Name   string `json:"name"` // base name as given
	Title  string `json:"title"`
	SHA256 string `json:"sha256"` // lowercase hex
}

// InstrumentRef is one instrument used, as the station file declares it and as it
// identified itself.
type InstrumentRef struct {
	Role string `json:"role"`
	// Kind is what the role binds (VoltageSource, VoltMeter or DUTPort); empty
	// in records made before roles had kinds, when the role's name said it: read
	// it with RoleKind.
	Kind     RoleKind             `json:"kind,omitempty"`
	Address  string               `json:"address"`
	Asset    string               `json:"asset"`
	CalDue   string               `json:"cal_due"` // YYYY-MM-DD
	Accuracy string               `json:"accuracy,omitempty"`
	Identity instruments.Identity `json:"identity"`

	// What the station file says of the instrument's calibration and of when
	// its specs hold; empty where it says nothing (and in older records).
	CalDate        string `json:"cal_date,omitempty"`        // YYYY-MM-DD, the day it was calibrated
	CalCertificate string `json:"cal_certificate,omitempty"` // the number of that calibration's certificate
	CalLab         string `json:"cal_lab,omitempty"`         // the laboratory that issued it
	SpecPeriod     string `json:"spec_period,omitempty"`     // the data sheet's column: "90 days", "1 year"
	// SpecBand is the ambient band in which Accuracy holds, Tempco what each
	// degree outside it adds ("±(3 ppm of reading + 0.5 ppm of range) per °C").
	SpecBand *TempBand `json:"spec_band,omitempty"`
	Tempco   string    `json:"tempco,omitempty"`
	// OutsideBandC is how far the run's ambient lay outside SpecBand, °C, and
	// AccuracyAtAmbient the specs widened by Tempco for it: what the
	// uncertainty evaluation used. Both empty when the ambient was within the
	// band or not recorded (the specs were then applied as written).
	OutsideBandC      float64 `json:"outside_band_c,omitempty"`
	AccuracyAtAmbient string  `json:"accuracy_at_ambient,omitempty"`
}

// TempBand is a band of ambient temperature, °C.
type TempBand struct {
	LowC  float64 `json:"low_c"`
	HighC float64 `json:"high_c"`
}

// SimulatedMark is what a record of a run on a simulated bench says of itself,
// and what every page of its certificate shows.
const SimulatedMark = "SIMULATED BENCH — NOT A MEASUREMENT"

// Simulation says that a run was made with simulated instruments
// (instruments.Simulated): nothing it read is a measurement and nothing is
// traceable.
type Simulation struct {
	Mark  string   `json:"mark"`  // SimulatedMark
	Roles []string `json:"roles"` // the roles bound to simulated instruments, in role order
	// BenchClock is true when the record's times (Started, Finished, every
	// reading's and soak's) are the simulated bench's own clock, which runs
	// ahead of the wall clock by the simulated waits, not the time of day.
	BenchClock bool `json:"bench_clock,omitempty"`
}

// RoleKind is the kind of instrument r's role binds: r.Kind, or for a record
// made before roles had kinds, the kind of the same name as the role (source,
// meter, dut); "" when neither says.
func (r InstrumentRef) RoleKind() RoleKind {
	if r.Kind != "" {
		return r.Kind
	}
	k, _ := defaultKind(r.Role)
	return k
}

// Sweep is one pass across the stimulus range.
type Sweep struct {
	// TempC is the unit's temperature during the sweep, °C, as the last soak
	// before it left it (the mean of the chamber's readings over its dwell);
	// 0 with TempKnown false when no soak preceded it.
	TempC     float64 `json:"temp_c,omitempty"`
	TempKnown bool    `json:"temp_known,omitempty"`
	// Channel is the unit's channel the sweep measured ("" for a one-channel unit).
	Channel string `json:"channel,omitempty"`
	Name    string `json:"name"` // the sweep step's name (SweepPreTrim or SweepVerify in records of schema 1)
	// Stage is what the sweep measures: the unit as found or as left (0 in
	// records of schema 1: SweepStage tells it from the name).
	Stage  Stage   `json:"stage,omitempty"`
	Points []Point `json:"points"`
}

// Names of the sweeps, as the record writes them.
const (
	SweepPreTrim = "pre-trim" // the unit as found, before trim
	SweepVerify  = "verify"   // the unit as left, after trim
)

// StageOf is the stage sw measures: its own, or in a record of schema 1 the one
// its name says (AsFound for the pre-trim sweep, AsLeft for the verify sweep).
func (sw Sweep) StageOf() Stage {
	if sw.Stage != 0 {
		return sw.Stage
	}
	return SweepStage(sw.Name)
}

// SweepStage is the stage a sweep of a schema-1 record measures by its name:
// AsFound for the pre-trim sweep, AsLeft for the verify sweep, 0 for any other.
func SweepStage(name string) Stage {
	switch name {
	case SweepPreTrim:
		return AsFound
	case SweepVerify:
		return AsLeft
	}
	return 0
}

// Point is one stimulus level and the readings taken there.
type Point struct {
	Stimulus float64               `json:"stimulus_v"` // programmed source level, in the stimulus's unit (V, or A on a current source; the key keeps its first name)
	Readings []instruments.Reading `json:"readings"`
	Mean     float64               `json:"mean_v"` // mean of the valid readings, in the unit read (V, A or count)
	SD       float64               `json:"sd_v"`   // sample standard deviation of the valid readings, in the unit read
	Valid    int                   `json:"valid"`  // number of valid readings
	// URandom is the Type A standard uncertainty of Mean (SD/√n, n − 1 dof);
	// USys the Type B standard uncertainty from the meter and source specs and
	// the meter resolution at this point, in the unit read, referred to the output.
	URandom float64 `json:"u_random_v"`
	USys    float64 `json:"u_sys_v"`
}

// FitSummary is the straight-line fit of one sweep: y = Intercept + Slope·x, with x
// the stimulus in its unit (V or A) and y the mean output in the response's (V, A
// or count); the V and V/V below stand for those units.
type FitSummary struct {
	Channel      string        `json:"channel,omitempty"` // the channel fitted ("" for a one-channel unit)
	Sweep        string        `json:"sweep"`
	Step         string        `json:"step,omitempty"`  // the fit step's name ("" in records of schema 1)
	Order        int           `json:"order,omitempty"` // 1 (a line) or 2; 0 in records of schema 1, which are lines
	Coef         []float64     `json:"coef,omitempty"`  // order 2: b0, b1, b2 of y = b0 + b1·x + b2·x², V, V/V, 1/V
	Slope        float64       `json:"slope"`           // V/V
	Intercept    float64       `json:"intercept_v"`     // V at x = 0
	Cov          [2][2]float64 `json:"cov"`             // covariance of (intercept, slope)
	ResidualSD   float64       `json:"residual_sd_v"`
	DOF          int           `json:"dof"`
	Residuals    []float64     `json:"residuals_v"`
	Nonlinearity float64       `json:"nonlinearity"` // max |residual| / full scale, a fraction
	// CovTotal adds to Cov the correlated parts of the source and meter errors
	// (gain and offset errors shared by every point) that a least-squares
	// covariance misses; uncertainties of results come from CovTotal.
	CovTotal [2][2]float64 `json:"cov_total"`
	DOFEff   float64       `json:"dof_eff"` // effective dof of the intercept's uncertainty
	// LackOfFit says how well the model fits the points beyond their own scatter.
	LackOfFit *LackOfFit `json:"lack_of_fit,omitempty"`
	// Random is "residuals" when the random part of the line's uncertainty is
	// the residual scatter (JCGM 100 H.3, the fit step's random: residuals);
	// "" when it is the readings' pooled standard deviation.
	Random string `json:"random,omitempty"`
	// SourceZero names the zero check (Record.Zeros) whose measured source
	// offset the fit applied: the levels corrected by it and its Type A
	// uncertainty in place of the source's offset spec; "" = none.
	SourceZero string `json:"source_zero,omitempty"`
}

// LackOfFit is a fit's lack-of-fit statistic: χ²/ν of the residuals against the
// points' random uncertainties, or, where stimulus levels repeat, the F ratio of
// the lack-of-fit mean square to the pure-error mean square (NIST/SEMATECH
// e-Handbook §4.4.4), with its degrees of freedom and upper-tail probability.
type LackOfFit struct {
	Method    string  `json:"method"` // "chi2/dof" or "F"
	Statistic float64 `json:"statistic"`
	DOF1      float64 `json:"dof1"`
	DOF2      float64 `json:"dof2,omitempty"` // F only
	P         float64 `json:"p"`              // probability of a statistic this large from a model that fits
	// Alpha is the significance level the model was judged at (LackOfFitAlpha;
	// 0 in records of metrology revision 0, which did not judge it), Adequate
	// whether P ≥ Alpha: the model describes the points (JCGM 100 §4.1.2).
	Alpha    float64 `json:"alpha,omitempty"`
	Adequate bool    `json:"adequate,omitempty"`
}

// TrimCode is one trim DAC's computed, written and read-back code.
type TrimCode struct {
	Channel   string  `json:"channel,omitempty"` // the channel trimmed ("" for a one-channel unit)
	DAC       string  `json:"dac"`               // "offset" or "gain"
	Before    int     `json:"before"`            // code in the DAC before trimming (no correction)
	Code      int     `json:"code"`              // code written
	Ideal     float64 `json:"ideal"`             // exact (unrounded) code the fit asked for
	IdealU    float64 `json:"ideal_u"`           // standard uncertainty of Ideal, in codes
	Written   bool    `json:"written"`           // Code was written to the unit (false when the run stopped first)
	Readback  int     `json:"readback"`
	Saturated bool    `json:"saturated"`
	Stored    bool    `json:"stored"` // committed to non-volatile memory
	// Offset is "terminal" for an offset DAC whose code brings the output
	// measured at zero input to the ideal offset (the trim's offset:
	// terminal); "" when it brings the best-fit line's output there.
	Offset string `json:"offset,omitempty"`
}

// Result is one named number a limit may judge. Value is in SI base units (volts,
// amperes, plain fractions for ppm and %, counts for codes, plain numbers as they are);
// Unit names the dimension.
type Result struct {
	Name string `json:"name"`
	// Channel is the unit's channel the result belongs to, "" for a result of the
	// whole unit. Name and Channel together are unique in a record.
	Channel  string      `json:"channel,omitempty"`
	Stage    Stage       `json:"stage,omitempty"`    // as found, adjustment or as left (0 in records of schema 1: see ResultStageOf)
	Step     string      `json:"step,omitempty"`     // the step that computed it
	Quantity string      `json:"quantity,omitempty"` // what it measures (ResultDef.Quantity); "" in older records: see QuantityOf
	Value    float64     `json:"value"`
	Unit     string      `json:"unit"` // as ResultDef.Unit names it: "V", "A", "ratio", "code", "count" or "number"
	Valid    bool        `json:"valid"`
	Note     string      `json:"note,omitempty"` // why the value is not valid
	Unc      Uncertainty `json:"uncertainty"`    // zero for codes (exact integers)
	// Budget is the uncertainty budget behind Unc, one row per input quantity
	// (JCGM 100 §5.1.3, eq. (10)), for results whose step evaluates one (a
	// fit's offset and gain error, a measure step's mean and error); nil for
	// the others and in records made before budgets were kept.
	Budget []BudgetRow `json:"budget,omitempty"`
}

// BudgetRow is one input quantity of a result's uncertainty budget: its
// standard uncertainty u(x_i) in its own unit, the sensitivity coefficient
// c_i = ∂result/∂x_i, and its contribution u_i = |c_i|·u(x_i) to the result's
// standard uncertainty (JCGM 100 §5.1.3). Inputs of one name that a sweep has
// once per point (repeatability, resolution) are one row: each point has its own
// sensitivity (its weight in the fit), so Sensitivity is 0 and Points says how
// many; U is then the root-sum-square of the points' contributions.
type BudgetRow struct {
	Name string `json:"name"` // the input, e.g. "source offset" (uncertainty.Name… constants)
	Kind string `json:"kind"` // "A" or "B" (JCGM 100 §4.2, §4.3); "A+B" for a measured input budgeted with the spec it could not beat
	// InputU is u(x_i), in InputUnit; for a per-point row the points' common
	// value, or the largest where they differ.
	InputU    float64 `json:"input_u"`
	InputUnit string  `json:"input_unit"` // "V", "A", "count", or "1" for a relative quantity (a gain error)
	// Sensitivity is c_i in the result's unit per InputUnit; 0 for a per-point row.
	Sensitivity float64 `json:"sensitivity,omitempty"`
	Points      int     `json:"points,omitempty"` // number of per-point inputs the row holds; 0 for one shared input
	U           float64 `json:"u"`                // contribution |c_i|·u(x_i), in the result's unit
	DOF         float64 `json:"dof"`              // degrees of freedom of the contribution (+Inf for limits taken as exact)
	// Share is u_i²/Σu_j², the row's fraction of the combined variance of the
	// budget (the rows sum to 1).
	Share float64 `json:"share"`
}

// FaultRecord is the record of a unit that could not be run at all because the
// station failed before it started (an instrument that would not open, identify or
// reach a safe state). It carries the files in force and the message, so the
// ledger shows the attempt.
func FaultRecord(cfg Config, serial string, now time.Time, err error) *Record {
	st, seq := cfg.Station, cfg.Sequence
	rec := &Record{Schema: RecordSchema, Metrology: CurrentMetrology, Serial: serial, Product: seq.Product, Revision: seq.Revision,
		Station: st.ID, Operator: cfg.Operator, Software: cfg.Software, Started: now.UTC(), Finished: now.UTC(),
		Files:     []FileRef{st.File, seq.File, seq.LimitsFile},
		IdealGain: seq.IdealGain, IdealOffset: seq.IdealOffset, FullScale: seq.FullScale, ResponseUnit: seq.recordResponseUnit(),
		Conditions: cfg.Conditions, Engineering: cfg.Engineering, Lot: cfg.Lot, Verdict: Fault, Fault: "station could not start the unit: " + err.Error()}
	if d, ok := DetailOf(err); ok {
		rec.FaultDetail = &d
	}
	for _, r := range seq.Requires {
		ref := instrumentRef(r, st.Instruments[r], cfg.Conditions)
		ref.Identity = instruments.Identity{Maker: "0", Model: "0", Serial: "0", Firmware: "0"}
		rec.Instruments = append(rec.Instruments, ref)
	}
	rec.Simulated = simulation(rec.Instruments, false)
	if cfg.NewID != nil {
		rec.RunID = cfg.NewID(now)
	} else {
		rec.RunID = newID(now)
	}
	return rec
}

// CoefficientWrite is one firmware correction coefficient: what the fit asked for,
// the word written in the coefficient's number format, and what the unit gave back.
type CoefficientWrite struct {
	Step    string `json:"step"`              // the coefficients, tempco or clear_trim step that wrote it
	Name    string `json:"name"`              // the coefficient's name in the sequence
	Channel string `json:"channel,omitempty"` // "" for a one-channel unit
	Adjusts string `json:"adjusts"`           // "gain", "offset", "offset_tc" or "gain_tc"
	Format  string `json:"format"`            // e.g. "Q2.14 hex", "float32 decimal"
	Unit    string `json:"unit,omitempty"`    // unit of the value ("" for a gain factor; "uV/°C", "ppm/°C" for a tc)
	// Ideal is the exact (unrounded) value the fit asked for, IdealU its standard
	// uncertainty from the fit.
	Ideal  float64 `json:"ideal"`
	IdealU float64 `json:"ideal_u"`
	// Value is the value the written word stands for (Ideal rounded to the format),
	// Text the word as sent, Resolution the format's spacing at Value.
	Value      float64 `json:"value"`
	Text       string  `json:"text"`
	Resolution float64 `json:"resolution"`
	Written    bool    `json:"written"`
	// Readback is the unit's reply to the read command and ReadbackValue what it
	// decodes to; Match is true when it is the written word at the format's
	// resolution.
	Readback      string  `json:"readback,omitempty"`
	ReadbackValue float64 `json:"readback_value"`
	Match         bool    `json:"match"`
	// Found is the unit's reply to the read command before clear_trim wrote the
	// no-correction value (clear_trim's entries only), FoundValue what it decodes
	// to (0 when it does not decode): the coefficient as found.
	Found      string  `json:"found,omitempty"`
	FoundValue float64 `json:"found_value,omitempty"`
	// Stored is true when a store step committed this word to non-volatile
	// memory: the last word written to the coefficient before the store.
	Stored bool `json:"stored,omitempty"`
}

// RetrimPass is one pass of a closed-loop re-trim: the code in the DAC, the
// output error measured with it, the trim's sensitivity measured so far and the
// code the pass chose next.
type RetrimPass struct {
	Step    string `json:"step"`              // the re-trim step
	DAC     string `json:"dac"`               // the DAC re-trimmed
	Channel string `json:"channel,omitempty"` // "" for a one-channel unit
	Pass    int    `json:"pass"`              // 1, 2, …
	Code    int    `json:"code"`              // code in the DAC during this pass's measurement
	// Error is the measured output error at the re-trim's points (mean of the
	// points, response unit), ErrorU its standard uncertainty.
	Error  float64 `json:"error"`
	ErrorU float64 `json:"error_u"`
	// Sensitivity is the trim's measured response per code (response unit per
	// code) used to choose Next; Measured is false while it is still the nominal LSB.
	Sensitivity float64 `json:"sensitivity"`
	Measured    bool    `json:"measured"`
	Within      bool    `json:"within"` // |Error| was within the step's bound
	// Next is the code written for the next pass; on the last pass, the code the
	// re-trim leaves in the DAC: Code, or the best code tried when the bound was
	// not met and it was written back.
	Next int `json:"next"`
}

// SweepName is the name of the sweep in the same record that keeps the pass's
// readings: "<step> pass <n>".
func (p RetrimPass) SweepName() string { return passName(p.Step, p.Pass) }

// Soak is one temperature soak: the set point, when the chamber got there and was
// stable, and every temperature read while waiting.
type Soak struct {
	Step     string  `json:"step"`
	Role     string  `json:"role"`      // the thermal role
	SetPoint float64 `json:"set_point"` // °C
	Band     float64 `json:"band"`      // ± °C of the set point that counts as there
	Dwell    float64 `json:"dwell_s"`   // s the temperature must stay in the band
	// Started is when the set point was programmed, Stable when the dwell began
	// (the last entry into the band), Ended when the dwell was complete or the
	// soak gave up.
	Started time.Time `json:"started"`
	Stable  time.Time `json:"stable,omitzero"`
	Ended   time.Time `json:"ended"`
	// MeanC and SDC are the mean and standard deviation of the temperatures read
	// over the dwell: the unit's temperature for the sweeps that follow.
	MeanC float64 `json:"mean_c"`
	// UnitMeanC is the mean of the unit's own sensor over the dwell, when the
	// soak read it: the temperature of the sweeps that follow.
	UnitMeanC *float64      `json:"unit_mean_c,omitempty"`
	SDC       float64       `json:"sd_c"`
	Readings  []TempReading `json:"readings"`
	TimedOut  bool          `json:"timed_out,omitempty"`
}

// TempReading is one temperature the soak read.
type TempReading struct {
	Time  time.Time `json:"time"`
	C     float64   `json:"c"`
	UnitC *float64  `json:"unit_c,omitempty"` // the unit's own sensor, when the soak reads it
}
