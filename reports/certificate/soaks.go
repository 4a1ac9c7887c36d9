package certificate

import (
	"strconv"
	"time"

	"trimline/reports/internal/pdfdoc"
	"trimline/sequencer"
)

// soaks is the table of the run's temperature soaks (sequencer.Record.Soaks),
// shown when there are any: one row per soak with its set point and band, its
// dwell, how long after the set point was programmed the chamber entered the
// band for good, and the mean and standard deviation of the temperatures read
// over the dwell (the unit's temperature for the sweeps after it).
func (d *doc) soaks() {
	cols, rows := soakTable(d.rec.Soaks)
	if len(rows) == 0 {
		return
	}
	d.tableSection("Temperature soaks", cols, rows, nil)
	d.note("Stable after: time from programming the set point to the chamber's last entry into the band, from which it stayed " +
		"within the band for the dwell. Mean ± sd: the chamber's temperatures read over the dwell (sample standard deviation).")
}

// soakTable is the columns and rows of the soak table.
func soakTable(ks []sequencer.Soak) ([]pdfdoc.Column, []pdfdoc.Row) {
	cols := []pdfdoc.Column{
		{Title: "Step", W: 42, Align: "L"},
		{Title: "Set point ± band", W: 34, Align: "R"},
		{Title: "Dwell", W: 22, Align: "R"},
		{Title: "Stable after", W: 30, Align: "R"},
		{Title: "Mean ± sd", W: 52, Align: "R"},
	}
	var rows []pdfdoc.Row
	for _, k := range ks {
		stable, mean := c1("—", pdfdoc.Body), c1("—", pdfdoc.Body)
		if k.TimedOut {
			stable = c1("timed out", pdfdoc.Bold.With(pdfdoc.Fail))
		} else if !k.Stable.IsZero() {
			stable = c1(fmtDur(k.Stable.Sub(k.Started)), pdfdoc.Body)
			mean = c1(fmtCelsius(k.MeanC)+" ± "+strconv.FormatFloat(k.SDC, 'f', 2, 64)+" °C", pdfdoc.Body)
		}
		rows = append(rows, pdfdoc.Row{
			c1(dash(k.Step)+" ("+dash(k.Role)+")", pdfdoc.Body),
			c1(fmtCelsius(k.SetPoint)+" ± "+strconv.FormatFloat(k.Band, 'g', 3, 64)+" °C", pdfdoc.Body),
			c1(fmtDur(time.Duration(k.Dwell*float64(time.Second))), pdfdoc.Body),
			stable,
			mean,
		})
	}
	return cols, rows
}

// fmtCelsius writes a temperature to 0.01 °C, e.g. "85.08 °C".
func fmtCelsius(c float64) string { return strconv.FormatFloat(c, 'f', 2, 64) + " °C" }

// fmtDur writes a duration to the second, e.g. "5m0s".
func fmtDur(t time.Duration) string { return t.Round(time.Second).String() }

// soakTime is the time the run spent in soaks: from each set point programmed
// to the end of its dwell (or its timeout).
func soakTime(ks []sequencer.Soak) time.Duration {
	var t time.Duration
	for _, k := range ks {
		if !k.Started.IsZero() && k.Ended.After(k.Started) {
			t += k.Ended.Sub(k.Started)
		}
	}
	return t
}
