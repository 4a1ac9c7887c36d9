// Package stats is the quality engineer's numbers from a ledger: yield,
// first-pass yield, retest and fault rates, the Pareto of failing limits, the
// capability of every toleranced result (Cp, Cpk, Pp, Ppk with confidence
// intervals, e-Handbook §6.1.6), histograms over the tolerance band with
// explicit under- and overflow, trends per day, lot or station with control
// limits, and the pre-trim results beside the post-trim ones. It reads the
// ledger (Read, Open), computes a Report (Compute) and writes it as text, CSV, or a
// PDF lot report; the statistics themselves are sequencer/spc's.
//
// Every number of a result is in its limit's unit (the unit the limit file
// writes the tolerance in), never in SI base units, except the indices, which
// are pure numbers, and the rates, which are fractions 0–1. A number that
// cannot be computed is NaN (JSON writers must write it as null).
package stats

import (
	"time"

	"trimline/sequencer/spc"
)

// Filter selects the runs a report counts. Text fields match ignoring case
// and "" matches any value.
type Filter struct {
	Product, Revision, Station, Site, Lot string
	// Only runs finished on or after Since and before Until; a zero time is no
	// bound.
	Since, Until time.Time
	// IncludeEngineering counts engineering runs (made with unreleased files)
	// as if they were production runs; without it they are left out and only
	// counted in Counts.Engineering.
	IncludeEngineering bool
}

// Trend groupings (Options.By, Trend.By).
const (
	ByDay     = "day"     // the UTC calendar day the run finished
	ByLot     = "lot"     // Record.Lot ("" is its own group, "(no lot)")
	ByStation = "station" // the station id
)

// Options configures Compute.
type Options struct {
	Filter
	By         string  // trend grouping: ByDay, ByLot or ByStation; "" means ByDay
	Confidence float64 // two-sided level of the Cp and Cpk intervals; 0 means 0.95
	Bins       int     // histogram bins over the band; 0 means DefaultBins
	// Margin widens the histogram's band beyond the tolerance on each side, as
	// a fraction of the tolerance width (two-sided) or of the data's span to the
	// limit (one-sided); 0 means DefaultMargin.
	Margin    float64
	Ledger    string    // the ledger's path, for the report's heading
	Generated time.Time // when the report was made (PDF date, heading)
}

// Defaults of Options.
const (
	DefaultBins   = 24
	DefaultMargin = 0.25
)

// Report is what Compute makes of the runs of a ledger.
type Report struct {
	Ledger    string
	Filter    Filter
	By        string
	Generated time.Time
	// Confidence is the two-sided level of every Cp and Cpk interval (0.95
	// unless Options said otherwise).
	Confidence float64
	// Population states, one sentence each, which runs count for what (a unit
	// is a serial; its latest completed run counts for yield and capability;
	// …). Every output prints it.
	Population []string
	Counts     Counts
	// Units are the counted units in test order: the order the ledger
	// recorded their latest attempts in.
	Units []UnitRow
	// Yield is Passed/Units, FirstPassYield FirstPass/Units, RetestRate
	// Retested/Units, FaultRate Faults/Runs; NaN when the denominator is 0.
	Yield, FirstPassYield, RetestRate, FaultRate float64
	// Pareto lists the limits that failing or held units did not pass, most
	// units first (then by name).
	Pareto []LimitFailures
	// Results are the toleranced results: the pre-trim ones (as found) first,
	// then the others, each group in the order of the newest counted run's
	// limit outcomes.
	Results []ResultStats
	// Pairs put each pre-trim result beside the post-trim result of the same
	// quantity and channel (what comes off assembly, what the trim achieves).
	Pairs []Pair
	// Trends are each result's mean and spread per group (By), one per result
	// of Results that has at least two groups with values.
	Trends []Trend
	// Notes are what a reader must know about the numbers: a tolerance that
	// changed within the population, a result with too few values for
	// capability, units whose latest run lacks a result.
	Notes []string
}

// Counts are the counts behind the rates.
type Counts struct {
	Units int // serials with at least one completed (PASS, FAIL, REVIEW) run counted
	// By the verdict of each unit's latest completed run (a review decision
	// is that run's final verdict): passed, failed, held for REVIEW with no
	// decision yet. Passed + Failed + Held = Units.
	Passed, Failed, Held int
	FirstPass            int // units whose first attempt passed (a REVIEW accepted on review without a retest counts)
	Retested             int // units with more than one attempt
	Attempts             int // completed runs that measured a unit (review decisions are not attempts)
	Decisions            int // review decisions among the runs counted
	// Runs is every run counted for the fault rate: attempts, faults and
	// aborted runs.
	Runs, Faults, Aborted int
	// Engineering is the engineering runs among those the filter matched:
	// left out unless Filter.IncludeEngineering.
	Engineering int
	// NoCompleted is the serials whose only runs ended in FAULT or ABORTED.
	NoCompleted int
}

// LimitFailures is how many units one limit did not pass.
type LimitFailures struct {
	Limit   string // the limit's name
	Channel string // the channel it judged, "" for a limit of the whole unit
	// Failed counts units whose latest attempt failed the limit (a
	// conditional pass counts only where a reviewer rejected the unit; beside
	// another limit's failure it failed nothing); Held the units held for
	// review (undecided) that did not pass it; First the units whose first
	// attempt did not pass it (any zone), when that attempt was counted.
	Failed, Held, First int
}

// ResultStats is the capability of one toleranced result over the units.
type ResultStats struct {
	Name     string // Result, or Result@Channel for a per-channel result
	Result   string // the result's name
	Channel  string
	Limit    string // the toleranced limit that judges it (the first in file order)
	Stage    string // "as_found" (pre-trim), "adjustment" or "as_left" (post-trim)
	Quantity string // what it measures ("offset", "gain_error", …), "" when the record does not say
	Unit     string // the limit's unit: every number below is in it, except the indices and fractions
	// Lower and Upper are the tolerance in Unit, nil where unbounded, as the
	// newest counted run was judged against.
	Lower, Upper *float64
	N            int // units with a valid, finite value
	Invalid      int // counted units whose latest run has no valid value of the result
	Mean         float64
	SDWithin     float64 // MR̄/1.128 of consecutive units in test order
	SDOverall    float64 // sample standard deviation (n − 1)
	Min, Max     float64
	Cp, Cpk      float64    // from SDWithin; Cp NaN for a one-sided tolerance
	Pp, Ppk      float64    // from SDOverall
	CpCI, CpkCI  [2]float64 // confidence intervals at Options.Confidence: χ² for Cp, Bissell (1990) for Cpk
	// FractionOutside is the expected fraction of units outside the tolerance
	// (normal model, overall SD), 0–1.
	FractionOutside float64
	// Outside is how many of the N values lie outside the tolerance as
	// measured (beside the normal model's FractionOutside: a few gross
	// outliers inflate the overall SD and with it the expected fraction).
	Outside int
	// MeanU is the mean expanded measurement uncertainty of the values, in
	// Unit (how much of the spread the measurement itself could be); NaN when
	// no value has one.
	MeanU float64
	// Hist bins the values over the tolerance band plus a margin, with explicit
	// under- and overflow counts.
	Hist spc.Histogram
	// DataHist bins the values over their own robust range (within Tukey's
	// inner fences, widened by the margin), with under- and overflow: the shape
	// of a capable process that fills only a few bins of Hist. No bins when
	// fewer than 2 values.
	DataHist spc.Histogram
	// Values are the N values in test order (the order the runs were
	// recorded); U the
	// expanded uncertainty of each (Unit, NaN when the record has none); Units
	// the index in Report.Units of the unit each belongs to. For charts and
	// the per-unit CSV.
	Values []float64
	U      []float64
	Units  []int
}

// UnitRow is one counted unit: its latest completed run and its history.
type UnitRow struct {
	Serial, Product, Revision string
	RunID                     string // the latest completed run (a review decision's record when decided)
	Certificate               string
	Station, Site, Lot        string
	Started, Finished         time.Time // of the latest completed attempt (the test, not the decision)
	Verdict                   string    // final: "PASS", "FAIL" or "REVIEW" (held, undecided)
	FirstVerdict              string    // of the first attempt, after any review decision on it; "" when that attempt lies outside the filter
	Attempts                  int
}

// Pair is a pre-trim result beside the post-trim result of the same quantity
// and channel: indices into Report.Results.
type Pair struct {
	Quantity, Channel string
	Pre, Post         int
}

// Trend is one result's mean and spread per group.
type Trend struct {
	Result int    // index into Report.Results
	By     string // ByDay, ByLot or ByStation
	Groups []Group
	// Means is the chart of the group means, Spreads that of the group
	// standard deviations (spc.Subgroups), with each group's own limits.
	Means, Spreads spc.Chart
}

// Group is one group of a trend: its key (a date "2026-12-02", a lot id, a
// station id), how many values, their mean and sample standard deviation
// (NaN for a single value).
type Group struct {
	Key      string
	N        int
	Mean, SD float64
}
