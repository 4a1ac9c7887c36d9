package main

// The output of --json: what scripts and line controllers read instead of the
// text a person reads. Every type of the schema is in this file; README's
// "Output for scripts" shows an example of each, and a test decodes those
// examples, and what the commands write, into these types with unknown fields
// disallowed, so that the documentation and the code cannot drift apart.
//
// The rules, the same for every command:
//   - stdout carries JSON Lines: one object a line, each with "kind" (what the
//     object is) and "version" (jsonVersion; a change that removes or renames a
//     field, or changes its meaning, raises it; new fields may appear within a
//     version);
//   - when the command cannot do its work (bad input, a refused file, a station
//     fault) stderr carries one errorOut object and nothing else; the exit code
//     is the same as without --json;
//   - numbers are in SI units (volts, a plain fraction for a ratio, counts for a
//     code) and the unit is named beside them; a number that does not exist is
//     null, never NaN.

import (
	"encoding/json"
	"errors"
	"flag"
	"io"
	"math"
	"path/filepath"
	"slices"
	"strings"
	"time"

	"trimline/instruments/files"
	"trimline/limits"
	"trimline/reports/audit"
	"trimline/reports/certificate"
	planreport "trimline/reports/plan"
	"trimline/reports/stats"
	"trimline/sequencer"
	"trimline/sequencer/plan"
	"trimline/sequencer/spc"
)

// jsonVersion is the version of every object below.
const jsonVersion = 1

// Kinds of JSON object, the value of each object's "kind".
const (
	kindUnit         = "unit"         // unitOut: one unit run (run)
	kindSummary      = "summary"      // summaryOut: the batch, after its units (run)
	kindCheck        = "check"        // checkOut: the files checked (check)
	kindVerification = "verification" // verificationOut: one certificate (audit verify)
	kindError        = "error"        // errorOut: why the command could not do its work (stderr)
	kindStats        = "stats"        // statsOut: quality numbers of a ledger (stats)
)

// jsonFlag adds the --json flag every command that has it takes, with words
// that say the same thing everywhere; what decides the objects is the command's.
func jsonFlag(c *command, what string) *bool {
	return c.Flag.Bool("json", false, "write "+what+" as JSON Lines on stdout, and an error as one JSON object on stderr (README: Output for scripts)")
}

// wantsJSON reports whether c was asked for JSON: its --json flag is set, or
// stands among args that did not parse (so that a usage error is JSON too).
func wantsJSON(c *command, args []string) bool {
	f := c.Flag.Lookup("json")
	if f == nil {
		return false
	}
	if g, ok := f.Value.(flag.Getter); ok {
		if b, _ := g.Get().(bool); b {
			return true
		}
	}
	return slices.ContainsFunc(args, func(a string) bool {
		return a == "--json" || a == "-json" || a == "--json=true" || a == "-json=true"
	})
}

// unitOut is one unit a run ran, written as soon as it is recorded.
type unitOut struct {
	Kind        string `json:"kind"` // "unit"
	Version     int    `json:"version"`
	Serial      string `json:"serial"`
	Product     string `json:"product"`
	Revision    string `json:"revision"`
	Station     string `json:"station"`
	Operator    string `json:"operator"`
	RunID       string `json:"run_id"`
	Verdict     string `json:"verdict"` // PASS, FAIL, REVIEW, FAULT or ABORTED
	Engineering bool   `json:"engineering"`
	// Simulated is the record's mark, "SIMULATED BENCH — NOT A MEASUREMENT",
	// when any instrument of the run was simulated; left out otherwise.
	Simulated   string `json:"simulated,omitempty"`
	RetestOf    string `json:"retest_of"`   // run id of the earlier run this one retests; "" for a first test
	Certificate string `json:"certificate"` // certificate number; "" when the run gets none (FAULT, ABORTED)
	// CertificatePDF is the certificate's file, as the station wrote it (under
	// the output folder); "" with Certificate.
	CertificatePDF string    `json:"certificate_pdf"`
	Started        time.Time `json:"started"` // RFC 3339, UTC
	Finished       time.Time `json:"finished"`
	Reasons        []string  `json:"reasons"` // why the verdict is not PASS, in words, in order; empty for PASS
	// OperatorReasons are the same in the operator's plain words, worst first
	// (sequencer.ForOperator): "offset after trim is −12.4 mV, limit ±0.8 mV".
	OperatorReasons []string    `json:"operator_reasons"`
	Fault           string      `json:"fault"` // the station fault, for FAULT and ABORTED
	Results         []resultOut `json:"results"`
	Limits          []limitOut  `json:"limits"`
	TrimCodes       []trimOut   `json:"trim_codes"`
	// Coefficients are the firmware correction coefficients written, in write
	// order, and Retrims the passes of every closed-loop re-trim; both are left
	// out for a product that has none.
	Coefficients []coefficientOut `json:"coefficients,omitempty"`
	Retrims      []retrimOut      `json:"retrims,omitempty"`
	// FaultDetail names the instrument a FAULT came from (role, asset,
	// address, what it said), when the engine knows it; left out otherwise.
	FaultDetail *sequencer.FaultDetail `json:"fault_detail,omitempty"`
}

// resultOut is one result of a unit: a named number with its uncertainty and the
// limits that judged it.
type resultOut struct {
	Name string `json:"name"` // as limit files name it
	// Channel is the unit's channel of a result measured per channel; absent for
	// a result of the whole unit (every result of a one-channel unit).
	Channel  string `json:"channel,omitempty"`
	Stage    string `json:"stage"`    // as_found, adjustment or as_left
	Step     string `json:"step"`     // the step that computed it
	Quantity string `json:"quantity"` // what it measures (offset, gain_error, …); results of one quantity pair as found and as left
	Valid    bool   `json:"valid"`
	Note     string `json:"note"` // why it is not valid
	// Value is in SI units of Unit: "V" volts, "A" amperes, "count" a number the
	// unit reports, "ratio" a plain fraction (0.001 is 0.1 % or 1000 ppm), "code"
	// counts of a DAC, "number" a plain number; null when not valid.
	Value *float64 `json:"value"`
	Unit  string   `json:"unit"`
	// StandardUncertainty, ExpandedUncertainty (U) and CoverageFactor (k, U =
	// k·u) are in the value's unit; null when not evaluated (codes are exact).
	StandardUncertainty *float64 `json:"standard_uncertainty"`
	ExpandedUncertainty *float64 `json:"expanded_uncertainty"`
	CoverageFactor      *float64 `json:"coverage_factor"`
	JudgedBy            []judged `json:"judged_by"` // the limits that use the result; empty when none does
}

// judged is one limit's outcome, seen from a result it uses.
type judged struct {
	Limit   string `json:"limit"`
	Channel string `json:"channel,omitempty"` // the outcome's channel, as in limitOut
	Pass    bool   `json:"pass"`
	// Zone is the decision rule's zone for a toleranced limit that judged this
	// result: pass, conditional pass, conditional fail or fail; "" for an
	// expression limit or a tolerance that could not be judged.
	Zone string `json:"zone"`
}

// limitOut is one limit of the unit's limit file and its outcome. Its numbers are
// in the limit's own unit, named in Unit (as the limit file writes it: "mV",
// "ppm", …).
type limitOut struct {
	Name string `json:"name"`
	// Channel is the channel this outcome judges: a limit over per-channel
	// results has one outcome per channel (or one for the channel it names);
	// absent for a limit of the whole unit.
	Channel     string   `json:"channel,omitempty"`
	Description string   `json:"description"`
	Uses        []string `json:"uses"` // the results it reads
	Pass        bool     `json:"pass"`
	Zone        string   `json:"zone"`   // as in judged
	Reason      string   `json:"reason"` // why it failed, in words; "" when it passed
	Unit        string   `json:"unit"`
	// Value, Lower and Upper are the judged value and the tolerance, for a
	// toleranced limit; null when unbounded on that side or not judged.
	Value *float64 `json:"value"`
	Lower *float64 `json:"lower"`
	Upper *float64 `json:"upper"`
	// ExpandedUncertainty and CoverageFactor are the value's U and k, in Unit;
	// null when not evaluated.
	ExpandedUncertainty *float64 `json:"expanded_uncertainty"`
	CoverageFactor      *float64 `json:"coverage_factor"`
	Rule                string   `json:"rule"` // "simple", "guarded", or "" for an expression limit
	TUR                 *float64 `json:"tur"`  // test uncertainty ratio; null when not defined (one-sided, U unknown)
}

// trimOut is one trim DAC's code.
type trimOut struct {
	DAC       string `json:"dac"`
	Channel   string `json:"channel,omitempty"` // the channel trimmed; absent for a one-channel unit
	Before    int    `json:"before"`            // code in the DAC before trimming
	Code      int    `json:"code"`              // code written
	Readback  int    `json:"readback"`
	Written   bool   `json:"written"`
	Saturated bool   `json:"saturated"`
	Stored    bool   `json:"stored"` // committed to non-volatile memory
	// Offset is "terminal" for an offset DAC trimmed so that the output
	// measured at zero input is the ideal offset (the trim's offset: terminal);
	// absent when trimmed to the best-fit line's offset.
	Offset string `json:"offset,omitempty"`
}

// coefficientOut is one firmware correction coefficient written to a unit.
type coefficientOut struct {
	Name    string `json:"name"`              // as the sequence names it
	Channel string `json:"channel,omitempty"` // left out for a one-channel unit
	Adjusts string `json:"adjusts"`           // "gain", "offset", "offset_tc" or "gain_tc"
	Format  string `json:"format"`            // the number format and text, e.g. "Q2.14 hex"
	// Value is what the word written stands for (the fit's value rounded to the
	// format), in Unit: the unit the firmware holds it in ("mA", "V", …), ""
	// for a gain, a plain factor. Ideal is the fit's value before rounding and
	// StandardUncertainty its u from the fit, in the same unit.
	Value               *float64 `json:"value"`
	Unit                string   `json:"unit"`
	Ideal               *float64 `json:"ideal"`
	StandardUncertainty *float64 `json:"standard_uncertainty"`
	Text                string   `json:"text"`     // the word as sent to the unit
	Written             bool     `json:"written"`  // false when the run stopped before writing it
	Readback            string   `json:"readback"` // the unit's reply to the read command; "" when not read
	// Match: the read-back is the written word at the format's resolution.
	Match bool `json:"match"`
}

// retrimOut is one pass of a closed-loop re-trim of one DAC.
type retrimOut struct {
	Step    string `json:"step"` // the re-trim step
	DAC     string `json:"dac"`
	Channel string `json:"channel,omitempty"` // left out for a one-channel unit
	Pass    int    `json:"pass"`              // 1, 2, …
	Code    int    `json:"code"`              // code in the DAC during the pass
	// Error is the output error measured with Code (mean over the re-trim's
	// points) and StandardUncertainty its u, in SI units of Unit (the unit's
	// response: "V", "A" or "count"). Sensitivity is the output change per code
	// used to choose Next, Measured false while it is the DAC's nominal LSB.
	Error               *float64 `json:"error"`
	StandardUncertainty *float64 `json:"standard_uncertainty"`
	Unit                string   `json:"unit"`
	Sensitivity         *float64 `json:"sensitivity"`
	Measured            bool     `json:"measured"`
	Within              bool     `json:"within"` // the error was within the step's bound
	Next                int      `json:"next"`   // the code written for the next pass; the code left in the DAC on the last
}

// summaryOut ends a run's output: the batch's counts. It is written when the
// batch ran (every unit, or until it was stopped); not after a setup error.
type summaryOut struct {
	Kind    string   `json:"kind"` // "summary"
	Version int      `json:"version"`
	Units   int      `json:"units"` // units run
	Passed  int      `json:"passed"`
	Failed  int      `json:"failed"`
	Review  int      `json:"review"`  // held for review
	Faulted int      `json:"faulted"` // station faults and aborted runs
	Yield   *float64 `json:"yield"`   // passed / judged, a plain fraction; null when none was judged
	Skipped []string `json:"skipped"` // serials not run because the batch was stopped
}

// checkOut is what check found, one object for every file named.
type checkOut struct {
	Kind     string    `json:"kind"` // "check"
	Version  int       `json:"version"`
	OK       bool      `json:"ok"` // no file has an error (warnings do not count)
	Files    []fileOut `json:"files"`
	Problems []problem `json:"problems"` // every problem, positioned where the file says
	TUR      []turOut  `json:"tur"`      // per station and sequence given together
	Errors   int       `json:"errors"`
	Warnings int       `json:"warnings"`
	Notes    []string  `json:"notes"` // what a person should know that is no problem
}

// fileOut is one file check looked at.
type fileOut struct {
	Path string `json:"path"`
	// What is the file's kind: station, sequence or limits; or what else it is
	// (seal, trust file, certificate or report (PDF), …); "unreadable" or
	// "unknown" for a file that could not be read or told.
	What string `json:"what"`
	// OK: the file loads as the command that uses it would load it. A file that
	// is no input (a PDF, the ledger) is OK; Says names the command that checks
	// it, or a station file's site ("site: …").
	OK   bool   `json:"ok"`
	Says string `json:"says"`
}

// problem is one problem with a file; Line and Col are 1-based, 0 when unknown.
type problem struct {
	File    string `json:"file"`
	Line    int    `json:"line"`
	Col     int    `json:"col"`
	Message string `json:"message"`
	Warning bool   `json:"warning"` // does not make the file unusable
}

// turOut is the TUR a toleranced limit can reach on a station, from the
// instruments' specifications alone.
type turOut struct {
	Station  string   `json:"station"`
	Limits   string   `json:"limits"` // the limit file
	Limit    string   `json:"limit"`
	Result   string   `json:"result"`
	TUR      *float64 `json:"tur"` // null when not defined (one-sided) or unknown
	Minimum  float64  `json:"minimum"`
	Low      bool     `json:"low"`
	OneSided bool     `json:"one_sided"`
	Note     string   `json:"note"`
	// Budget is the result's uncertainty budget on paper (none for a result
	// without one).
	Budget []budgetOut `json:"budget,omitempty"`
}

// verificationOut is audit verify's verdict on one certificate.
type verificationOut struct {
	Kind    string `json:"kind"` // "verification"
	Version int    `json:"version"`
	File    string `json:"file"`
	// Verdict is GENUINE, ALTERED, UNKNOWN, VOIDED or SUPERSEDED; only GENUINE
	// exits 0.
	Verdict string   `json:"verdict"`
	Reasons []string `json:"reasons"` // the reasons, in words, in order
	// Certificate, RunID and Serial are what the certificate was found to be
	// (its number, its run and the unit's serial), "" where the check did not
	// find it (a file that is no certificate of the ledger, a seal without a
	// serial); SupersededBy is the number of the retest's certificate that
	// replaced a SUPERSEDED one, else "".
	Certificate  string `json:"certificate"`
	RunID        string `json:"run_id"`
	Serial       string `json:"serial"`
	SupersededBy string `json:"superseded_by"`
	// Simulated is the record's mark "SIMULATED BENCH — NOT A MEASUREMENT"
	// when the run was made with simulated instruments (a GENUINE verdict
	// then says the document is the station's, not that it is a
	// measurement); "" for real instruments, or with SealOnly, where the
	// record was not read.
	Simulated string `json:"simulated"`
	// SealOnly: checked against the seal beside the PDF alone (--no-ledger):
	// voids, supersedes and the chain were not checked.
	SealOnly        bool     `json:"seal_only"`
	Ledger          string   `json:"ledger"`           // the ledger consulted; "" with SealOnly
	TrustedKeys     string   `json:"trusted_keys"`     // where the trusted keys came from
	TrustedStations []string `json:"trusted_stations"` // the stations they bind
}

// statsOut is stats' report: the quality numbers of the runs of a ledger that
// the filter let through. Rates are fractions 0–1; every number of a result is
// in its limit's unit (Unit, as the limit file writes it), not in SI units,
// except the indices (pure numbers) and fraction_outside (0–1). A number that
// cannot be computed (a rate of no units, an index of one value) is null.
type statsOut struct {
	Kind      string         `json:"kind"` // "stats"
	Version   int            `json:"version"`
	Ledger    string         `json:"ledger"`
	Filter    statsFilterOut `json:"filter"`
	By        string         `json:"by"`        // the trends' groups: "day" (UTC), "lot" or "station"
	Generated time.Time      `json:"generated"` // RFC 3339, UTC
	// Confidence is the two-sided level of every cp_ci and cpk_ci (0.95).
	Confidence float64 `json:"confidence"`
	// Population says, one sentence each, which runs count for what.
	Population []string `json:"population"`
	Units      int      `json:"units"` // counted units (serials with a completed run)
	// Yield is passed/units, FirstPassYield passed-on-the-first-attempt/units,
	// RetestRate retested/units, FaultRate faults/runs (counts: Counts).
	Yield          *float64       `json:"yield"`
	FirstPassYield *float64       `json:"first_pass_yield"`
	RetestRate     *float64       `json:"retest_rate"`
	FaultRate      *float64       `json:"fault_rate"`
	Counts         statsCountsOut `json:"counts"`
	// Pareto lists the limits failing or held units did not pass, most units first.
	Pareto  []paretoOut     `json:"pareto"`
	Results []statResultOut `json:"results"` // the toleranced results, pre-trim first
	Pairs   []pairOut       `json:"pairs"`   // pre-trim results beside post-trim ones
	Trends  []trendOut      `json:"trends"`
	Notes   []string        `json:"notes"` // what a reader must know about the numbers
}

// statsFilterOut is the filter a stats report was made with; "" and null
// match anything.
type statsFilterOut struct {
	Product  string `json:"product"`
	Revision string `json:"revision"`
	Station  string `json:"station"`
	Site     string `json:"site"`
	Lot      string `json:"lot"`
	// Since and Until bound the runs' finish: on or after Since, before Until.
	Since              *time.Time `json:"since"`
	Until              *time.Time `json:"until"`
	IncludeEngineering bool       `json:"include_engineering"`
}

// statsCountsOut are the counts behind the rates.
type statsCountsOut struct {
	Units       int `json:"units"`
	Passed      int `json:"passed"` // by the final verdict of each unit's latest attempt
	Failed      int `json:"failed"`
	Held        int `json:"held"`       // REVIEW with no decision yet
	FirstPass   int `json:"first_pass"` // units whose first attempt passed
	Retested    int `json:"retested"`   // units with more than one attempt
	Attempts    int `json:"attempts"`   // completed runs (review decisions are none)
	Decisions   int `json:"decisions"`  // review decisions
	Runs        int `json:"runs"`       // attempts, faults and aborted runs
	Faults      int `json:"faults"`
	Aborted     int `json:"aborted"`
	Engineering int `json:"engineering"`  // engineering runs the filter matched
	NoCompleted int `json:"no_completed"` // serials with only faulted or aborted runs
}

// paretoOut is how many units one limit did not pass.
type paretoOut struct {
	Limit   string `json:"limit"`
	Channel string `json:"channel,omitempty"` // absent for a limit of the whole unit
	Failed  int    `json:"failed"`            // units whose latest attempt failed it
	Held    int    `json:"held"`              // … held it for review
	First   int    `json:"first"`             // units whose first attempt did not pass it
}

// statResultOut is the capability of one toleranced result.
type statResultOut struct {
	Name     string `json:"name"` // result, or result@channel
	Result   string `json:"result"`
	Channel  string `json:"channel,omitempty"`
	Stage    string `json:"stage"` // as_found (pre-trim), adjustment or as_left
	Quantity string `json:"quantity"`
	Limit    string `json:"limit"` // the toleranced limit that judges it
	Unit     string `json:"unit"`  // the limit's unit, of every number below but the indices and fractions
	// Lower and Upper are the tolerance; null where unbounded.
	Lower     *float64 `json:"lower"`
	Upper     *float64 `json:"upper"`
	N         int      `json:"n"`       // units with a valid value
	Invalid   int      `json:"invalid"` // counted units without one
	Mean      *float64 `json:"mean"`
	SDWithin  *float64 `json:"sd_within"`  // MR̄/1.128 of consecutive units in test order
	SDOverall *float64 `json:"sd_overall"` // sample SD (n − 1)
	Min       *float64 `json:"min"`
	Max       *float64 `json:"max"`
	Cp        *float64 `json:"cp"` // null for a one-sided tolerance
	// CpCI and CpkCI are [low, high] confidence intervals at the report's confidence (χ² for Cp,
	// Bissell 1990 for Cpk).
	CpCI            [2]*float64  `json:"cp_ci"`
	Cpk             *float64     `json:"cpk"`
	CpkCI           [2]*float64  `json:"cpk_ci"`
	Pp              *float64     `json:"pp"`
	Ppk             *float64     `json:"ppk"`
	FractionOutside *float64     `json:"fraction_outside"` // expected, normal model, 0–1
	Outside         int          `json:"outside"`          // values measured outside the tolerance
	MeanU           *float64     `json:"mean_u"`           // mean expanded uncertainty U of the values
	Histogram       histogramOut `json:"histogram"`
	// DataHistogram bins the same values over their own robust range (within
	// Tukey's inner fences, and a margin): the shape of a capable process that
	// fills few bins of Histogram. No counts with fewer than 2 values.
	DataHistogram histogramOut `json:"data_histogram"`
}

// histogramOut bins a result's values over [lo, hi] (the tolerance band and a
// margin) in len(counts) equal bins; under and over count the values outside.
type histogramOut struct {
	Lo     *float64 `json:"lo"`
	Hi     *float64 `json:"hi"`
	Counts []int    `json:"counts"`
	Under  int      `json:"under"`
	Over   int      `json:"over"`
}

// pairOut puts a pre-trim result beside the post-trim result of the same
// quantity and channel, by their names in results.
type pairOut struct {
	Quantity string `json:"quantity"`
	Channel  string `json:"channel,omitempty"`
	Pre      string `json:"pre"`
	Post     string `json:"post"`
}

// trendOut is one result's mean and spread per group, with each group's
// control limits: the mean against center ± 3·sigma/√n, the sd against
// sigma·(c4 ± 3·√(1 − c4²)) (sigma the result's sd_within).
type trendOut struct {
	Result string          `json:"result"` // its name in results
	By     string          `json:"by"`
	Center *float64        `json:"center"`
	Sigma  *float64        `json:"sigma"`
	Groups []trendGroupOut `json:"groups"`
}

// trendGroupOut is one group of a trend: a day "2026-12-02", a lot id, a
// station id. Beyond: its mean or sd is outside its limits.
type trendGroupOut struct {
	Key        string      `json:"key"`
	N          int         `json:"n"`
	Mean       *float64    `json:"mean"`
	SD         *float64    `json:"sd"` // null for a group of one value
	MeanLimits [2]*float64 `json:"mean_limits"`
	SDLimits   [2]*float64 `json:"sd_limits"`
	Beyond     bool        `json:"beyond"`
}

// errorOut is why a command could not do its work, on stderr.
type errorOut struct {
	Kind     string    `json:"kind"` // "error"
	Version  int       `json:"version"`
	Command  string    `json:"command"` // "run", "audit verify", …
	Error    string    `json:"error"`   // the message a person reads
	ExitCode int       `json:"exit_code"`
	Problems []problem `json:"problems"` // positioned problems in files, when the error has them
}

// writeJSON writes v as one line.
func writeJSON(w io.Writer, v any) {
	json.NewEncoder(w).Encode(v)
}

// num is v, or nil when v is no number JSON can hold.
func num(v float64) *float64 {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return nil
	}
	return &v
}

// newUnitOut is rec as a unitOut; cert is its certificate number and certDir
// the folder its PDF is in.
func newUnitOut(rec *sequencer.Record, cert, certDir string) unitOut {
	u := unitOut{Kind: kindUnit, Version: jsonVersion, Serial: rec.Serial, Product: rec.Product, Revision: rec.Revision,
		Station: rec.Station, Operator: rec.Operator, RunID: rec.RunID, Verdict: string(rec.Verdict),
		Engineering: rec.Engineering, RetestOf: rec.RetestOf, Certificate: cert,
		Started: rec.Started, Finished: rec.Finished, Reasons: nonNil(rec.Reasons), Fault: rec.Fault, FaultDetail: rec.FaultDetail,
		Results: []resultOut{}, Limits: []limitOut{}, TrimCodes: []trimOut{}}
	if rec.Simulated != nil {
		u.Simulated = rec.Simulated.Mark
	}
	if cert != "" {
		u.CertificatePDF = filepath.Join(certDir, certificate.FileName(rec, certificate.Options{Number: cert}))
	}
	u.OperatorReasons = nonNil(sequencer.ForOperator(rec, 0, 0).Reasons)
	for _, r := range rec.Results {
		ro := resultOut{Name: r.Name, Channel: r.Channel, Step: r.Step, Quantity: r.QuantityOf(), Valid: r.Valid, Note: r.Note, Unit: r.Unit, JudgedBy: []judged{}}
		if st, err := r.StageOf().MarshalText(); err == nil {
			ro.Stage = string(st)
		}
		if r.Valid {
			ro.Value = num(r.Value)
			if r.Unc.Expanded > 0 || r.Unc.Std > 0 {
				ro.StandardUncertainty, ro.ExpandedUncertainty, ro.CoverageFactor = num(r.Unc.Std), num(r.Unc.Expanded), num(r.Unc.K)
			}
		}
		for _, o := range rec.Outcomes {
			// An outcome of a channel judges that channel's results; one of the
			// whole unit (or made before outcomes named channels) those of its
			// names.
			if !slices.Contains(o.Uses, r.Name) || o.Channel != "" && o.Channel != r.Channel {
				continue
			}
			j := judged{Limit: o.Name, Channel: o.Channel, Pass: o.Pass}
			if o.Decision != nil && o.Decision.Result == r.Name {
				j.Zone = o.Decision.Zone
			}
			ro.JudgedBy = append(ro.JudgedBy, j)
		}
		u.Results = append(u.Results, ro)
	}
	for _, o := range rec.Outcomes {
		u.Limits = append(u.Limits, newLimitOut(o))
	}
	for _, t := range rec.Trims {
		u.TrimCodes = append(u.TrimCodes, trimOut{DAC: t.DAC, Channel: t.Channel, Before: t.Before, Code: t.Code, Readback: t.Readback, Offset: t.Offset,
			Written: t.Written, Saturated: t.Saturated, Stored: t.Stored})
	}
	for _, c := range rec.Coefficients {
		co := coefficientOut{Name: c.Name, Channel: c.Channel, Adjusts: c.Adjusts, Format: c.Format, Unit: c.Unit,
			Ideal: num(c.Ideal), Text: c.Text, Written: c.Written, Readback: c.Readback, Match: c.Match}
		if c.Written {
			co.Value = num(c.Value)
		}
		if c.IdealU > 0 {
			co.StandardUncertainty = num(c.IdealU)
		}
		u.Coefficients = append(u.Coefficients, co)
	}
	resp := rec.ResponseUnit
	if resp == "" {
		resp = "V"
	}
	for _, p := range rec.Retrims {
		ro := retrimOut{Step: p.Step, DAC: p.DAC, Channel: p.Channel, Pass: p.Pass, Code: p.Code, Error: num(p.Error), Unit: resp,
			Sensitivity: num(p.Sensitivity), Measured: p.Measured, Within: p.Within, Next: p.Next}
		if p.ErrorU > 0 {
			ro.StandardUncertainty = num(p.ErrorU)
		}
		u.Retrims = append(u.Retrims, ro)
	}
	return u
}

func newLimitOut(o limits.Outcome) limitOut {
	l := limitOut{Name: o.Name, Channel: o.Channel, Description: o.Description, Uses: nonNil(o.Uses), Pass: o.Pass, Reason: o.Reason, Unit: o.Unit}
	if d := o.Decision; d != nil {
		l.Zone, l.Rule, l.Value, l.Lower, l.Upper = d.Zone, d.Rule, num(d.Value), d.Lower, d.Upper
		if d.U > 0 {
			l.ExpandedUncertainty, l.CoverageFactor = num(d.U), num(d.K)
		}
		if d.TUR > 0 {
			l.TUR = num(d.TUR)
		}
	} else if t := o.Tolerance; t != nil {
		l.Rule, l.Lower, l.Upper = t.Rule, t.Lower, t.Upper
	}
	return l
}

func newSummaryOut(t *sequencer.Tally) summaryOut {
	s := t.Summary()
	return summaryOut{Kind: kindSummary, Version: jsonVersion, Units: s.Units, Passed: s.Passed, Failed: s.Failed,
		Review: s.Review, Faulted: s.Faulted, Yield: num(s.Yield), Skipped: nonNil(t.Skipped)}
}

func newVerificationOut(file string, v audit.Verdict, sealOnly bool, ledgerPath string, trustSource string, stations []string) verificationOut {
	out := verificationOut{Kind: kindVerification, Version: jsonVersion, File: file, Verdict: strings.ToUpper(v.Kind),
		Reasons: nonNil(v.Reasons), Certificate: v.Number, RunID: v.RunID, Serial: v.Serial, SupersededBy: v.SupersededBy, Simulated: v.Simulated, SealOnly: sealOnly, TrustedKeys: trustSource, TrustedStations: nonNil(stations)}
	if !sealOnly {
		out.Ledger = ledgerPath
	}
	return out
}

// newStatsOut is r for --json; its numbers are rounded to the 15 digits a
// float64 holds for sure (stats.Round15).
func newStatsOut(r stats.Report) statsOut {
	statNum := func(v float64) *float64 { return num(stats.Round15(v)) }
	f := r.Filter
	out := statsOut{Kind: kindStats, Version: jsonVersion, Ledger: r.Ledger, By: r.By, Generated: r.Generated.UTC(), Confidence: r.Confidence,
		Filter: statsFilterOut{Product: f.Product, Revision: f.Revision, Station: f.Station, Site: f.Site, Lot: f.Lot,
			IncludeEngineering: f.IncludeEngineering},
		Population: nonNil(r.Population), Units: r.Counts.Units,
		Yield: statNum(r.Yield), FirstPassYield: statNum(r.FirstPassYield), RetestRate: statNum(r.RetestRate), FaultRate: statNum(r.FaultRate),
		Pareto: []paretoOut{}, Results: []statResultOut{}, Pairs: []pairOut{}, Trends: []trendOut{}, Notes: nonNil(r.Notes)}
	if !f.Since.IsZero() {
		t := f.Since.UTC()
		out.Filter.Since = &t
	}
	if !f.Until.IsZero() {
		t := f.Until.UTC()
		out.Filter.Until = &t
	}
	c := r.Counts
	out.Counts = statsCountsOut{Units: c.Units, Passed: c.Passed, Failed: c.Failed, Held: c.Held, FirstPass: c.FirstPass,
		Retested: c.Retested, Attempts: c.Attempts, Decisions: c.Decisions, Runs: c.Runs, Faults: c.Faults, Aborted: c.Aborted,
		Engineering: c.Engineering, NoCompleted: c.NoCompleted}
	for _, p := range r.Pareto {
		out.Pareto = append(out.Pareto, paretoOut{Limit: p.Limit, Channel: p.Channel, Failed: p.Failed, Held: p.Held, First: p.First})
	}
	ci := func(v [2]float64) [2]*float64 { return [2]*float64{statNum(v[0]), statNum(v[1])} }
	for _, s := range r.Results {
		out.Results = append(out.Results, statResultOut{Name: s.Name, Result: s.Result, Channel: s.Channel, Stage: s.Stage,
			Quantity: s.Quantity, Limit: s.Limit, Unit: s.Unit, Lower: statPtr(s.Lower), Upper: statPtr(s.Upper), N: s.N, Invalid: s.Invalid,
			Mean: statNum(s.Mean), SDWithin: statNum(s.SDWithin), SDOverall: statNum(s.SDOverall), Min: statNum(s.Min), Max: statNum(s.Max),
			Cp: statNum(s.Cp), CpCI: ci(s.CpCI), Cpk: statNum(s.Cpk), CpkCI: ci(s.CpkCI), Pp: statNum(s.Pp), Ppk: statNum(s.Ppk),
			FractionOutside: statNum(s.FractionOutside), Outside: s.Outside, MeanU: statNum(s.MeanU),
			Histogram: newHistogramOut(s.Hist), DataHistogram: newHistogramOut(s.DataHist)})
	}
	name := func(i int) string {
		if i < 0 || i >= len(r.Results) {
			return ""
		}
		return r.Results[i].Name
	}
	for _, p := range r.Pairs {
		out.Pairs = append(out.Pairs, pairOut{Quantity: p.Quantity, Channel: p.Channel, Pre: name(p.Pre), Post: name(p.Post)})
	}
	for _, t := range r.Trends {
		to := trendOut{Result: name(t.Result), By: t.By, Center: statNum(t.Means.Center), Sigma: statNum(t.Means.Sigma), Groups: []trendGroupOut{}}
		beyond := map[int]bool{}
		for _, s := range append(slices.Clone(t.Means.Signals), t.Spreads.Signals...) {
			beyond[s.Index] = true
		}
		for i, g := range t.Groups {
			grp := trendGroupOut{Key: g.Key, N: g.N, Mean: statNum(g.Mean), SD: statNum(g.SD), Beyond: beyond[i+1]}
			if i < len(t.Means.Points) {
				p := t.Means.Points[i]
				grp.MeanLimits = [2]*float64{statNum(p.LCL), statNum(p.UCL)}
			}
			if i < len(t.Spreads.Points) {
				p := t.Spreads.Points[i]
				grp.SDLimits = [2]*float64{statNum(p.LCL), statNum(p.UCL)}
			}
			to.Groups = append(to.Groups, grp)
		}
		out.Trends = append(out.Trends, to)
	}
	return out
}

func newHistogramOut(h spc.Histogram) histogramOut {
	return histogramOut{Lo: num(stats.Round15(h.Lo)), Hi: num(stats.Round15(h.Hi)), Counts: nonNil(h.Counts), Under: h.Under, Over: h.Over}
}

// statPtr is a bound of a tolerance for --json: nil stays nil.
func statPtr(v *float64) *float64 {
	if v == nil {
		return nil
	}
	return num(stats.Round15(*v))
}

// newErrorOut is err, which command c ended with, as an errorOut with its exit
// code and the positioned problems it carries.
func newErrorOut(command string, err error, code int) errorOut {
	out := errorOut{Kind: kindError, Version: jsonVersion, Command: command, Error: err.Error(), ExitCode: code, Problems: []problem{}}
	fe := files.Errs(err)
	var d detailed
	if fe == nil && errors.As(err, &d) {
		fe = d
		// The message a person reads holds every problem with its excerpt;
		// here they are fields, so its first line is enough.
		first, _, _ := strings.Cut(out.Error, "\n")
		out.Error = strings.TrimSuffix(first, ":")
	}
	for _, p := range fe {
		out.Problems = append(out.Problems, newProblem(p))
	}
	return out
}

func newProblem(p *files.Error) problem {
	return problem{File: p.File, Line: p.Line, Col: p.Col, Message: p.Msg, Warning: p.Warning}
}

// nonNil is s, or an empty slice for nil: a list in the JSON is [], never null.
func nonNil[T any](s []T) []T {
	if s == nil {
		return []T{}
	}
	return s
}

// kindPlan is the kind of planOut: the trim plan of an error budget (plan).
const kindPlan = "plan"

// planOut is plan's report: what the error budget predicts of the units before
// and after trim. Numbers are in SI units with the unit named beside them ("V"
// or "A" for an offset, "ratio" for a gain error, "code" for a trim code);
// fractions (shares, saturation, yields) are 0–1. A number that does not exist
// is null.
type planOut struct {
	Kind     string `json:"kind"` // "plan"
	Version  int    `json:"version"`
	Budget   string `json:"budget"` // the budget file
	Product  string `json:"product"`
	Revision string `json:"revision"`
	Limits   string `json:"limits"` // the limit file the yield is judged against; "" when the budget names none
	Seed     uint64 `json:"seed"`
	// Trials is the number of units drawn; AdaptiveTrials the number after which
	// the adaptive rule (JCGM 101:2008 §7.9) held the pre-trim quantities to
	// Digits significant digits (units are drawn on to 100 000 for the yield).
	Trials         int `json:"trials"`
	AdaptiveTrials int `json:"adaptive_trials"`
	Digits         int `json:"digits"`
	// Quantities: pre_offset and pre_gain_error, NAME_code of each DAC, then
	// post_offset and post_gain_error.
	Quantities []planQuantityOut `json:"quantities"`
	// Saturation is, per DAC name, the fraction of units whose ideal code is
	// outside the DAC's codes (0 … 2^bits − 1, or −2^(bits−1) … 2^(bits−1) − 1
	// in two's complement); with firmware coefficients, per coefficient name,
	// the fraction whose exact value lies beyond its format's range.
	Saturation map[string]float64 `json:"saturation"`
	// PredictedYield is the fraction of units whose predicted results
	// (Predicted) all pass their tolerances, YieldSE its standard error
	// √(p(1 − p)/trials); null without a limit file.
	PredictedYield *float64 `json:"predicted_yield"`
	YieldSE        *float64 `json:"yield_se"`
	Predicted      []string `json:"predicted"`     // the results the yield judges: post_offset, post_gain_error (less post_offset when the limits judge it in another unit)
	NotPredicted   []string `json:"not_predicted"` // limits of the file on other results, by name
	TargetYield    float64  `json:"target_yield"`  // what the recommendation must meet, a fraction
	// Recommendation is, per DAC of the design, the smallest one meeting
	// TargetYield; [] without a limit file.
	Recommendation []planRecommendationOut `json:"recommendation"`
	// RecommendedYield is the predicted yield with every DAC as recommended
	// (null when some DAC has no recommendation).
	RecommendedYield *float64 `json:"recommended_yield"`
	// PerDACTarget is the fraction each DAC was sized to pass its own result
	// in, 1 − (1 − target)/k for k DACs (tightened while the DACs together fell
	// short); null without a recommendation.
	PerDACTarget *float64 `json:"per_dac_target"`
	Notes        []string `json:"notes"` // what a reader must know about the numbers
	// Against is, with --against LEDGER, the predictions beside what the
	// stations measured; absent otherwise.
	Against *againstOut `json:"against,omitempty"`
}

// againstOut is a plan's predictions beside a ledger's measurements (plan
// --against): per quantity both sides' n, mean, SD and quantiles (at
// probabilities), the two-sample Kolmogorov–Smirnov statistic and p-value,
// the SD ratio with the F test's p-value, the IQR ratio, the mean difference
// with Welch's p-value, a verdict ("agrees", "differs", "not compared") and a
// sentence; per proportion (the yield, each DAC's saturation) the predicted
// and measured fractions with the exact 95 % interval and binomial p-value.
// Numbers in the quantity's SI unit; null where not computable.
type againstOut struct {
	Ledger        string                 `json:"ledger"`
	Product       string                 `json:"product"`
	Units         int                    `json:"units"`
	Alpha         float64                `json:"alpha"` // significance level of every test
	Probabilities []float64              `json:"probabilities"`
	Quantities    []againstQuantityOut   `json:"quantities"`
	Proportions   []againstProportionOut `json:"proportions"`
	Notes         []string               `json:"notes"`
}

// againstSideOut is one side (predicted or measured) of a quantity.
type againstSideOut struct {
	N         int        `json:"n"`
	Mean      *float64   `json:"mean"`
	SD        *float64   `json:"sd"`
	Quantiles []*float64 `json:"quantiles"`
}

type againstQuantityOut struct {
	Name           string             `json:"name"`
	Unit           string             `json:"unit"`
	Predicted      againstSideOut     `json:"predicted"`
	Measured       againstSideOut     `json:"measured"`
	KSD            *float64           `json:"ks_d"`
	KSP            *float64           `json:"ks_p"`
	SDRatio        *float64           `json:"sd_ratio"`
	FP             *float64           `json:"f_p"`
	IQRRatio       *float64           `json:"iqr_ratio"`
	MeanDifference *float64           `json:"mean_difference"`
	MeanP          *float64           `json:"mean_p"`
	Shares         map[string]float64 `json:"shares,omitempty"`
	Verdict        string             `json:"verdict"`
	Finding        string             `json:"finding"`
}

type againstProportionOut struct {
	Name        string      `json:"name"`
	Predicted   *float64    `json:"predicted"`
	PredictedSE *float64    `json:"predicted_se"`
	Count       int         `json:"count"`
	N           int         `json:"n"`
	Measured    *float64    `json:"measured"`
	Interval95  [2]*float64 `json:"interval_95"`
	P           *float64    `json:"p"`
	Verdict     string      `json:"verdict"`
	Finding     string      `json:"finding"`
}

// newAgainstOut is c for --json, NaN as null.
func newAgainstOut(c planreport.Comparison) *againstOut {
	side := func(s planreport.Summary) againstSideOut {
		o := againstSideOut{N: s.N, Mean: num(s.Mean), SD: num(s.SD), Quantiles: []*float64{}}
		for _, q := range s.Quantiles {
			o.Quantiles = append(o.Quantiles, num(q))
		}
		return o
	}
	out := &againstOut{Ledger: c.Ledger, Product: c.Product, Units: c.Units, Alpha: c.Alpha, Probabilities: c.QuantileProbs,
		Quantities: []againstQuantityOut{}, Proportions: []againstProportionOut{}, Notes: nonNil(c.Notes)}
	for _, q := range c.Quantities {
		out.Quantities = append(out.Quantities, againstQuantityOut{Name: q.Name, Unit: q.Unit, Predicted: side(q.Predicted), Measured: side(q.Measured),
			KSD: num(q.KSD), KSP: num(q.KSP), SDRatio: num(q.SDRatio), FP: num(q.FP), IQRRatio: num(q.IQRRatio),
			MeanDifference: num(q.MeanDifference), MeanP: num(q.MeanP), Shares: q.Shares, Verdict: q.Verdict, Finding: q.Finding})
	}
	for _, p := range c.Proportions {
		out.Proportions = append(out.Proportions, againstProportionOut{Name: p.Name, Predicted: num(p.Predicted), PredictedSE: num(p.PredictedSE),
			Count: p.Count, N: p.N, Measured: num(p.Measured), Interval95: [2]*float64{num(p.Interval95[0]), num(p.Interval95[1])},
			P: num(p.P), Verdict: p.Verdict, Finding: p.Finding})
	}
	return out
}

// planQuantityOut is one predicted quantity over the units drawn.
type planQuantityOut struct {
	Name string   `json:"name"`
	Unit string   `json:"unit"` // "V", "A", "ratio" or "code"
	Mean *float64 `json:"mean"`
	SD   *float64 `json:"sd"`
	// Interval95 is the Monte Carlo's probabilistically symmetric 95 %
	// interval [low, high].
	Interval95 []float64 `json:"interval_95"`
	// GUMInterval95 is the 95 % interval by the law of propagation (JCGM 100);
	// for a post-trim quantity the common-practice ±1.96·LSB/√12 (GUMBasis
	// says which); null when there is none.
	GUMInterval95 []float64 `json:"gum_interval_95"`
	GUMBasis      string    `json:"gum_basis"`
	// WorstCase is [low, high] (every bounded source at an end, normal ones at
	// ±3σ; for a code, unclamped; for a post-trim quantity ±½ LSB); null when
	// there is none.
	WorstCase []float64 `json:"worst_case"`
	// Shares is each contribution's fraction of the variance: sources by name
	// for a pre-trim quantity or a code, the parts of the residual
	// (quantisation, saturation, DNL, coefficient rounding) after trim.
	Shares map[string]float64 `json:"shares"`
}

// planRecommendationOut is the smallest design of one DAC that meets the target.
type planRecommendationOut struct {
	DAC    string `json:"dac"`    // the designed DAC it replaces
	Result string `json:"result"` // the result it is judged on: post_offset or post_gain_error
	Found  bool   `json:"found"`
	Reason string `json:"reason"` // why none was found; "" when found
	Bits   int    `json:"bits"`
	// LSB per code and Range = 2^bits·LSB, in LSBUnit ("V" or "A" at the
	// output or input by placement, "ratio" for gain).
	LSB          *float64 `json:"lsb"`
	Range        *float64 `json:"range"`
	LSBUnit      string   `json:"lsb_unit"`
	NoCorrection int      `json:"no_correction"` // mid-code: 2^(bits−1), or 0 in two's complement
	// Pass is the fraction of units whose Result passes, PassSE its standard
	// error; Saturation the fraction that saturate the DAC.
	Pass       *float64 `json:"pass"`
	PassSE     *float64 `json:"pass_se"`
	Saturation *float64 `json:"saturation"`
}

// newPlanOut is r as a planOut.
func newPlanOut(r *plan.Report) planOut {
	b := r.Budget
	out := planOut{Kind: kindPlan, Version: jsonVersion, Budget: b.Path, Product: b.Product, Revision: b.Revision,
		Seed: r.Seed, Trials: r.Trials, AdaptiveTrials: r.AdaptiveTrials, Digits: r.Digits,
		Saturation: map[string]float64{}, Predicted: nonNil(r.Judged), NotPredicted: []string{}, TargetYield: r.TargetYield,
		Recommendation: []planRecommendationOut{}, PredictedYield: num(r.Yield), YieldSE: num(r.YieldSE),
		RecommendedYield: num(r.AllRecommended), PerDACTarget: num(r.PerDACTarget), Notes: nonNil(r.Notes)}
	if r.Tolerances != nil {
		out.Limits = r.Tolerances.File
		out.NotPredicted = nonNil(r.Tolerances.NotPredicted)
	}
	pair := func(p *[2]float64) []float64 {
		if p == nil || math.IsNaN(p[0]) || math.IsNaN(p[1]) {
			return nil
		}
		return []float64{p[0], p[1]}
	}
	for _, qs := range [][]plan.Quantity{r.Pre, r.Codes, r.Post} {
		for _, q := range qs {
			sh := q.Shares
			if sh == nil {
				sh = map[string]float64{}
			}
			out.Quantities = append(out.Quantities, planQuantityOut{Name: q.Name, Unit: q.Unit, Mean: num(q.Mean), SD: num(q.SD),
				Interval95: pair(&q.Interval95), GUMInterval95: pair(q.GUM95), GUMBasis: q.GUMBasis, WorstCase: pair(q.WorstCase), Shares: sh})
		}
	}
	for _, d := range r.DACs {
		out.Saturation[d.DAC.Name] = d.Saturation
	}
	for _, c := range r.Coefficients { // a design trims by DACs or by coefficients, never both
		out.Saturation[c.Coefficient.Name] = c.Saturation
	}
	for i, rec := range r.Recommendations {
		o := planRecommendationOut{DAC: rec.DAC, Result: rec.Result, Found: rec.Found, Reason: rec.Reason}
		if rec.Found {
			o.Bits, o.NoCorrection = rec.Bits, rec.NoCorrection
			o.LSB, o.Range = num(rec.LSB), num(rec.Range)
			o.Pass, o.PassSE, o.Saturation = num(rec.Pass), num(rec.PassSE), num(rec.Saturation)
		}
		o.LSBUnit = plan.LSBUnit(b, r.DACs[i].DAC)
		out.Recommendation = append(out.Recommendation, o)
	}
	return out
}
