package console

import (
	"fmt"
	"math"
	"strings"
	"time"

	"trimline/cmd/trimline/internal/shift"
	"trimline/instruments/units"
	"trimline/sequencer"
)

// The phases of the station, as the page shows them.
const (
	phaseReady   = "ready"   // waiting for a scan
	phaseRunning = "running" // a unit is on test
	phaseVerdict = "verdict" // the last unit's verdict is shown; the next scan starts the next unit
	phaseLocked  = "locked"  // a station fault: nothing runs until someone clears it
)

// recentMax is how many units the recent list keeps.
const recentMax = 20

// plotMax bounds the points a snapshot carries for the plot.
const plotMax = 2000

// state is the station as every page shows it: one per console, guarded by
// Server.mu. Its JSON is the snapshot GET /state answers and the "state"
// event carries.
type state struct {
	Version  int64        `json:"version"`
	Station  stationView  `json:"station"`
	Phase    string       `json:"phase"`
	Status   []statusItem `json:"status"`
	Blocked  bool         `json:"blocked"`
	Lot      string       `json:"lot"` // the production lot in force, recorded by every unit started now; "" = none
	Unit     *unitView    `json:"unit,omitempty"`
	Verdict  *verdictView `json:"verdict,omitempty"`
	Fault    *faultView   `json:"fault,omitempty"`
	Counters counters     `json:"counters"`
	Recent   []recentRow  `json:"recent"`
	Review   []reviewRow  `json:"review"`

	cycles []time.Duration // wall time of every measured unit this shift
}

type stationView struct {
	ID, Name, Product, Revision string
	Engineering                 bool
	Simulated                   bool // the simulated bench, not a measurement
	MaxAttempts                 int
}

// statusItem is one line of the station status panel.
type statusItem struct {
	Key    string   `json:"key"`   // files, calibration, key, ledger
	State  string   `json:"state"` // ok, warn, block
	Title  string   `json:"title"`
	Detail []string `json:"detail"`
}

// unitView is the unit on test (or the last one), with its progress.
type unitView struct {
	Serial    string     `json:"serial"`
	Operator  string     `json:"operator"`
	Retest    bool       `json:"retest"`
	Attempt   int        `json:"attempt"`
	StartedMs int64      `json:"started_ms"` // wall clock, Unix ms
	ExpectMs  int64      `json:"expected_ms"`
	Steps     []stepView `json:"steps"`
	Step      int        `json:"step"` // index into Steps, -1 before the first
	StepName  string     `json:"step_name"`
	PointText string     `json:"point_text"`
	Points    []plotPt   `json:"points"`
	Unit      string     `json:"unit"` // the error's unit, as the plot labels it
	Stopping  bool       `json:"stopping"`
}

type stepView struct {
	Name   string `json:"name"`
	Status string `json:"status"` // "", running, done, skipped, not reached
}

// plotPt is one point of the error plot: the stimulus X (in XUnit), the
// error Y (in the unit's Unit), point I of the step's N (1-based).
type plotPt struct {
	X, Y  float64
	Step  int
	I, N  int
	XUnit string
}

// verdictView is the last unit's verdict as the operator reads it.
type verdictView struct {
	Serial    string   `json:"serial"`
	Verdict   string   `json:"verdict"` // PASS, FAIL, REVIEW, FAULT, ABORTED
	Word      string   `json:"word"`
	Reasons   []string `json:"reasons"`
	Action    string   `json:"action"`
	Statement []string `json:"statement"`
	Cert      string   `json:"cert"`
	CertURL   string   `json:"cert_url"`
	Notes     []string `json:"notes"`
	Retest    string   `json:"retest"` // "retest of certificate …", "" for a first test
}

// faultView is what locked the station.
type faultView struct {
	What   string `json:"what"`
	Said   string `json:"said"`
	Check  string `json:"check"`
	Serial string `json:"serial"`
	RunID  string `json:"run_id"`
	At     string `json:"at"`
}

type counters struct {
	Units    int     `json:"units"`
	Passed   int     `json:"passed"`
	Failed   int     `json:"failed"`
	Review   int     `json:"review"`
	Faults   int     `json:"faults"`
	Aborted  int     `json:"aborted"`
	FirstIn  int     `json:"first_in"`   // measured first tests
	FirstOK  int     `json:"first_ok"`   // of those, passed
	FPY      string  `json:"fpy"`        // "96.0 %", "—"
	CycleS   float64 `json:"cycle_s"`    // mean wall time of a measured unit, s
	CycleTxt string  `json:"cycle_text"` // "4.6 s", "—"
}

type recentRow struct {
	At       string `json:"at"`
	Serial   string `json:"serial"`
	Verdict  string `json:"verdict"`
	Cert     string `json:"cert"`
	CertURL  string `json:"cert_url"`
	Operator string `json:"operator"`
	Retest   bool   `json:"retest"`
	Lot      string `json:"lot"` // the production lot the run recorded, "" = none
}

type reviewRow struct {
	Cert    string `json:"cert"`
	Serial  string `json:"serial"`
	At      string `json:"at"`
	Reasons string `json:"reasons"`
}

// newState is the state of a shift that has not run a unit yet; simulated:
// the station runs on the simulated bench (served or in process).
func newState(sh *shift.Shift, simulated bool) state {
	st, seq := sh.Station, sh.Sequence
	name := st.Name
	if name == "" {
		name = st.ID
	}
	return state{
		Station: stationView{ID: st.ID, Name: name, Product: seq.Product, Revision: seq.Revision,
			Engineering: sh.Issuer.Engineering, Simulated: simulated, MaxAttempts: seq.MaxAttempts},
		Phase:  phaseReady,
		Recent: []recentRow{},
		Review: []reviewRow{},
	}
}

// lock puts the station in the locked phase with f.
func (s *state) lock(f faultView, serial string) {
	if f.Serial == "" {
		f.Serial = serial
	}
	if f.At == "" {
		f.At = time.Now().Format("15:04:05")
	}
	s.Phase, s.Fault = phaseLocked, &f
}

// record counts a finished unit and adds it to the recent list.
func (s *state) record(rec *sequencer.Record, cert, certURL string, wall time.Duration) {
	c := &s.Counters
	c.Units++
	measured := false
	switch rec.Verdict {
	case sequencer.Pass:
		c.Passed++
		measured = true
	case sequencer.Fail:
		c.Failed++
		measured = true
	case sequencer.Review:
		c.Review++
		measured = true
	case sequencer.Fault:
		c.Faults++
	case sequencer.Aborted:
		c.Aborted++
	}
	if measured {
		s.cycles = append(s.cycles, wall)
		if rec.RetestOf == "" {
			c.FirstIn++
			if rec.Verdict == sequencer.Pass {
				c.FirstOK++
			}
		}
	}
	c.FPY, c.CycleTxt = "—", "—"
	if c.FirstIn > 0 {
		c.FPY = fmt.Sprintf("%.1f %%", 100*float64(c.FirstOK)/float64(c.FirstIn))
	}
	if n := len(s.cycles); n > 0 {
		var sum time.Duration
		for _, d := range s.cycles {
			sum += d
		}
		c.CycleS = (sum / time.Duration(n)).Seconds()
		c.CycleTxt = fmt.Sprintf("%.1f s", c.CycleS)
	}
	row := recentRow{At: time.Now().Format("15:04"), Serial: rec.Serial, Verdict: string(rec.Verdict), Cert: cert,
		CertURL: certURL, Operator: rec.Operator, Retest: rec.RetestOf != "", Lot: rec.Lot}
	s.Recent = append([]recentRow{row}, s.Recent...)
	if len(s.Recent) > recentMax {
		s.Recent = s.Recent[:recentMax]
	}
}

// progress applies one engine event to the unit on test.
func (u *unitView) progress(ev sequencer.Event) {
	switch ev.Kind {
	case sequencer.EventUnitStart:
		u.Steps = u.Steps[:0]
		for _, st := range ev.Steps {
			name := st.Name
			if st.Channel != "" {
				name += " · ch " + st.Channel
			}
			u.Steps = append(u.Steps, stepView{Name: name})
		}
		u.ExpectMs = ev.Expected.Milliseconds()
		u.Step = -1
	case sequencer.EventStepStart:
		u.Step = ev.Step
		if ev.Step >= 0 && ev.Step < len(u.Steps) {
			u.Steps[ev.Step].Status = "running"
		}
		u.StepName = stepTitle(ev, len(u.Steps))
		u.PointText = ""
	case sequencer.EventPoint:
		u.PointText = pointText(ev)
		if ev.ResponseUnit != "" {
			u.Unit = ev.ResponseUnit
		}
		// One plot per reading step: the first point of another step
		// starts a new one (a zero check's two points never sit among a
		// sweep's eleven).
		if n := len(u.Points); n > 0 && u.Points[n-1].Step != ev.Step {
			u.Points = u.Points[:0]
		}
		if len(u.Points) < plotMax && finite(ev.Stimulus) && finite(ev.Error) {
			u.Points = append(u.Points, plotPt{X: ev.Stimulus, Y: ev.Error, Step: ev.Step, I: ev.Point, N: ev.Points, XUnit: ev.StimulusUnit})
		}
	case sequencer.EventStepEnd:
		if ev.Step >= 0 && ev.Step < len(u.Steps) {
			u.Steps[ev.Step].Status = ev.Status
		}
	}
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

// stepTitle is "step 3 of 9: sweep as found (ch 2)".
func stepTitle(ev sequencer.Event, n int) string {
	name := strings.ReplaceAll(ev.Name, "_", " ")
	if ev.Channel != "" {
		name += " (ch " + ev.Channel + ")"
	}
	if n > 0 {
		return fmt.Sprintf("step %d of %d: %s", ev.Step+1, n, name)
	}
	return name
}

// pointText is "point 4 of 11: −2.5 V in, error +1.2 mV", with U+2212 for a
// minus sign and a no-break space between a number and its unit.
func pointText(ev sequencer.Event) string {
	t := fmt.Sprintf("point %d of %d", ev.Point, ev.Points)
	if finite(ev.Stimulus) {
		t += ": " + quantity(ev.Stimulus, ev.StimulusUnit, false) + " in"
		if finite(ev.Error) {
			t += ", error " + quantity(ev.Error, ev.ResponseUnit, true)
		}
	}
	return keepTogether(t)
}

// quantity writes v in unit ("V", "A", "count") as an operator reads it.
func quantity(v float64, unit string, signed bool) string {
	switch unit {
	case "V", "A", "":
		if unit == "" {
			unit = "V"
		}
		s := units.Format(v, unit, 3)
		if signed && v >= 0 {
			s = "+" + s
		}
		return s
	case "count":
		if signed {
			return fmt.Sprintf("%+.1f counts", v)
		}
		return fmt.Sprintf("%.0f counts", v)
	}
	return fmt.Sprintf("%g %s", v, unit)
}
