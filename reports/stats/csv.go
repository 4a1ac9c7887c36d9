package stats

import (
	"encoding/csv"
	"io"
	"math"
	"strconv"
	"time"
)

// CSVColumns are the header of WriteCSV, one column per field of a
// ResultStats: the tolerance (lower, upper: empty where unbounded), the
// numbers in the limit's unit (unit), the indices, their confidence intervals
// (cp_low, cp_high, cpk_low, cpk_high, at the level of confidence), the
// expected fraction outside (0–1), the values measured outside (outside),
// the mean expanded measurement uncertainty (mean_U) and the histogram's
// under- and overflow counts.
var CSVColumns = []string{
	"name", "result", "channel", "stage", "quantity", "limit", "unit", "lower", "upper",
	"n", "invalid", "mean", "sd_within", "sd_overall", "min", "max",
	"cp", "cp_low", "cp_high", "cpk", "cpk_low", "cpk_high", "pp", "ppk",
	"confidence", "fraction_outside", "outside", "mean_U", "hist_under", "hist_over",
}

// WriteCSV writes one row per toleranced result (Report.Results, in order)
// under the header CSVColumns. Numbers are written with 15 significant digits
// (what a float64 holds for sure, so that 100.00000000000001, an artefact of
// converting SI values to the limit's unit, is written 100); a number that cannot be computed (NaN, or an infinite index of a result with
// no spread) is an empty cell. It returns the first error of w.
func (r Report) WriteCSV(w io.Writer) error {
	cw := csv.NewWriter(w)
	cw.Write(CSVColumns)
	for _, s := range r.Results {
		cw.Write([]string{
			s.Name, s.Result, s.Channel, s.Stage, s.Quantity, s.Limit, s.Unit, csvPtr(s.Lower), csvPtr(s.Upper),
			strconv.Itoa(s.N), strconv.Itoa(s.Invalid), csvNum(s.Mean), csvNum(s.SDWithin), csvNum(s.SDOverall), csvNum(s.Min), csvNum(s.Max),
			csvNum(s.Cp), csvNum(s.CpCI[0]), csvNum(s.CpCI[1]), csvNum(s.Cpk), csvNum(s.CpkCI[0]), csvNum(s.CpkCI[1]), csvNum(s.Pp), csvNum(s.Ppk),
			csvNum(r.Confidence), csvNum(s.FractionOutside), strconv.Itoa(s.Outside), csvNum(s.MeanU), strconv.Itoa(s.Hist.Under), strconv.Itoa(s.Hist.Over),
		})
	}
	cw.Flush()
	return cw.Error()
}

// ValuesCSVColumns are the first columns of WriteValuesCSV, before the two
// columns of each result.
var ValuesCSVColumns = []string{
	"serial", "product", "revision", "run_id", "certificate", "station", "site", "lot",
	"started", "finished", "attempts", "first_verdict", "verdict",
}

// WriteValuesCSV writes one row per counted unit (Report.Units, in test
// order): the columns ValuesCSVColumns (times in RFC 3339, UTC), then for
// each result of Report.Results its value and expanded uncertainty, headed
// with the result's name and its limit's unit: "post_offset [uV]",
// "post_offset U [uV]". A cell is empty where the unit's latest run has no
// valid value of the result, or the value no uncertainty. It returns the
// first error of w.
func (r Report) WriteValuesCSV(w io.Writer) error {
	cw := csv.NewWriter(w)
	head := append([]string(nil), ValuesCSVColumns...)
	for _, s := range r.Results {
		head = append(head, s.Name+" ["+s.Unit+"]", s.Name+" U ["+s.Unit+"]")
	}
	cw.Write(head)
	// cells[u] is unit u's row of result cells, two per result.
	cells := make([][]string, len(r.Units))
	for u := range cells {
		cells[u] = make([]string, 2*len(r.Results))
	}
	for j, s := range r.Results {
		for i, u := range s.Units {
			if u < 0 || u >= len(cells) || i >= len(s.Values) {
				continue
			}
			cells[u][2*j] = csvNum(s.Values[i])
			if i < len(s.U) {
				cells[u][2*j+1] = csvNum(s.U[i])
			}
		}
	}
	for i, u := range r.Units {
		row := []string{u.Serial, u.Product, u.Revision, u.RunID, u.Certificate, u.Station, u.Site, u.Lot,
			csvTime(u.Started), csvTime(u.Finished), strconv.Itoa(u.Attempts), u.FirstVerdict, u.Verdict}
		cw.Write(append(row, cells[i]...))
	}
	cw.Flush()
	return cw.Error()
}

// csvNum is v with 15 significant digits, or "" when it is not a finite
// number.
func csvNum(v float64) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return ""
	}
	return strconv.FormatFloat(Round15(v), 'g', -1, 64)
}

// Round15 is v rounded to 15 significant digits, the digits a float64 holds
// for sure: a value converted from SI units to its limit's unit
// (100.00000000000001 µV) comes back as written (100). Writers of numbers for
// programs (CSV, JSON) use it.
func Round15(v float64) float64 {
	r, err := strconv.ParseFloat(strconv.FormatFloat(v, 'g', 15, 64), 64)
	if err != nil {
		return v
	}
	return r
}

func csvPtr(v *float64) string {
	if v == nil {
		return ""
	}
	return csvNum(*v)
}

func csvTime(t time.Time) string {
	if t.IsZero() {
		return ""
	}
	return t.UTC().Format(time.RFC3339Nano)
}
