package sequencer

// Which instrument a station fault came from: the record's FaultDetail.

import "errors"

// roleError is an error of one instrument of the station: the role the station
// file binds it to, and what it said or did. Its text is the wrapped error's, so
// that a record's Fault reads as it did before the detail was kept.
type roleError struct {
	detail FaultDetail
	err    error
}

func (r *roleError) Error() string { return r.err.Error() }
func (r *roleError) Unwrap() error { return r.err }

// blame returns err marked as the fault of the instrument bound to role, which
// said said ("" = the text of err); nil stays nil. An error already marked keeps
// its instrument: the nearest cause names it best.
func (e *Engine) blame(role, said string, err error) error {
	return blame(e.cfg.Station, role, said, err)
}

// blame is Engine.blame on station st.
func blame(st *Station, role, said string, err error) error {
	if err == nil {
		return nil
	}
	var re *roleError
	if errors.As(err, &re) {
		return err
	}
	if said == "" {
		said = err.Error()
	}
	d := FaultDetail{Role: role, Said: said}
	if si, ok := st.Instruments[role]; ok {
		d.Asset, d.Address = si.Asset, si.Address
	}
	return &roleError{detail: d, err: err}
}

// DetailOf returns the instrument an error of Open or of a run names, and
// whether it names one: an Open that fails on an instrument (it does not answer,
// identifies as another, is out of calibration) says which, as a run's
// Record.FaultDetail does.
func DetailOf(err error) (FaultDetail, bool) {
	var re *roleError
	if errors.As(err, &re) {
		return re.detail, true
	}
	return FaultDetail{}, false
}

// readerRole is the role that takes the plan's readings: its meter, or the DUT
// port of a unit that reports its own response.
func (p SweepPlan) readerRole() string {
	if p.Response != nil {
		return p.Response.Port
	}
	return p.Meter
}
