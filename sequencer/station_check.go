package sequencer

// Checks of a loaded station file that depend on more than the file: the date.

import (
	"fmt"
	"time"

	"trimline/instruments/files"
)

// CalWarnDays is how many days ahead CheckCalibration warns of a calibration that
// runs out.
const CalWarnDays = 14

// CalState is where an instrument's calibration stands on a day.
type CalState int

// The states of a calibration: current, running out within CalWarnDays days
// (the last day of cal_due included), or run out (after the last day).
const (
	CalCurrent CalState = iota
	CalDueSoon
	CalExpired
)

// Calibration says where the instrument's calibration stands at now and how
// many whole UTC days are left until its cal_due (negative once past);
// CalCurrent with 0 days for an instrument without a cal_due. CheckCalibration,
// the engine and the console's status all decide by it.
func (si StationInstrument) Calibration(now time.Time) (CalState, int) {
	if si.CalDue.IsZero() {
		return CalCurrent, 0
	}
	left := int(si.CalDue.Sub(now.UTC().Truncate(24*time.Hour)).Hours() / 24)
	switch {
	case now.After(si.CalDue.AddDate(0, 0, 1)):
		return CalExpired, left
	case left <= CalWarnDays:
		return CalDueSoon, left
	}
	return CalCurrent, left
}

// Errorf returns a problem positioned at path in the station file (a YAML path
// such as "$.signing.key"), for checks made after loading; a Station not loaded
// from a file gives the file name alone.
func (s *Station) Errorf(path, format string, args ...any) *files.Error {
	if s.doc == nil {
		return &files.Error{File: s.File.Name, Msg: fmt.Sprintf(format, args...)}
	}
	return s.doc.Errorf(path, format, args...)
}

// CheckCalibration reports, positioned at each cal_due in the station file and in
// role order, every instrument whose calibration has run out at now (an error: the
// engine refuses to run past the last day of cal_due) or runs out within
// CalWarnDays days (a warning, Warning set), and, at its calibration.date, every
// instrument said to be calibrated after today (an error). Days are UTC calendar days, as cal_due
// is read.
func (s *Station) CheckCalibration(now time.Time) files.List {
	var out files.List
	today := now.UTC().Truncate(24 * time.Hour)
	for _, r := range s.Roles() {
		si, ok := s.Instruments[r]
		if ok && si.CalDate.After(today) {
			out = append(out, s.Errorf("$.instruments."+r+".calibration.date", "the %s %s is calibrated on %s, after today (%s): a calibration not yet made traces nothing; give the date of its last calibration",
				r, si.Asset, si.CalDate.Format("2006-01-02"), today.Format("2006-01-02")))
		}
		if !ok || si.CalDue.IsZero() {
			continue
		}
		due := si.CalDue.Format("2006-01-02")
		path := "$.instruments." + r + ".cal_due"
		cal, left := si.Calibration(now)
		switch {
		case cal == CalExpired:
			out = append(out, s.Errorf(path, "the calibration of the %s %s ran out on %s: the engine refuses to run; recalibrate it and update cal_due", r, si.Asset, due))
		case cal == CalDueSoon:
			when := fmt.Sprintf("in %d days", left)
			switch left {
			case 0:
				when = "today"
			case 1:
				when = "tomorrow"
			}
			e := s.Errorf(path, "the calibration of the %s %s runs out %s (cal_due %s): plan its recalibration; the engine refuses to run after that day", r, si.Asset, when, due)
			e.Warning = true
			out = append(out, e)
		}
	}
	return out
}
