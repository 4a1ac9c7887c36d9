package console

import (
	"context"
	"errors"
	"fmt"
	"net/http"
	"net/url"
	"strings"
	"time"

	"trimline/reports/certificate"
	"trimline/sequencer"
)

// scan starts the unit whose serial was scanned. Before any instrument is
// touched: the serial against the sequence's pattern, the attempts the
// sequence allows, and a serial tested before needs the operator's
// confirmation (retest=confirm).
func (s *Server) scan(w http.ResponseWriter, r *http.Request, se *session) {
	if !se.operate {
		s.reply(w, r, http.StatusForbidden, answer{Error: se.name + " may not run units at this station"})
		return
	}
	serial := strings.TrimSpace(r.PostFormValue("serial"))
	refuse := func(code int, msg string) {
		s.reply(w, r, code, answer{Error: msg})
	}
	sh := s.shift
	if err := sh.Sequence.CheckSerial(serial); err != nil {
		var se *sequencer.SerialError
		if errors.As(err, &se) {
			if s.lotLike(serial) {
				// A lot traveller scanned into the wrong field.
				refuse(http.StatusBadRequest, serial+" looks like a lot id, not a "+sh.Sequence.Product+" serial. Nothing was run. To change the lot, use the Lot field.")
				return
			}
			refuse(http.StatusBadRequest, "Not a "+sh.Sequence.Product+" serial: "+se.Rule+". Nothing was run.")
			return
		}
		refuse(http.StatusBadRequest, err.Error())
		return
	}
	ctx := r.Context()
	// The status is read again now: a shift can outlive a calibration, a
	// release or the ledger's disk. A scan request that goes away meanwhile
	// must not leave a false block behind.
	s.refreshStatus(context.WithoutCancel(ctx))
	s.publishState()
	if msg := s.cannotStart(); msg != "" {
		refuse(http.StatusConflict, msg)
		return
	}
	earlier, tested, err := sh.Ledger.LastMeasuredRun(ctx, serial, sh.Issuer.Engineering)
	if err != nil {
		refuse(http.StatusInternalServerError, "the ledger did not answer: "+err.Error())
		return
	}
	if tested && earlier.Verdict == sequencer.Review && earlier.Certificate != "" {
		// A unit held for REVIEW waits for a reviewer's decision (whatever
		// its attempts): a retest from the scan field would supersede it and
		// take it out of the queue with nobody deciding.
		st, err := sh.Ledger.CertificateStatus(ctx, earlier.Certificate)
		if err != nil {
			refuse(http.StatusInternalServerError, "the ledger did not answer: "+err.Error())
			return
		}
		if st.Current() {
			refuse(http.StatusConflict, fmt.Sprintf("%s is held for review (certificate %s): put it on the review shelf; a reviewer accepts or rejects it. Nothing was run.", serial, earlier.Certificate))
			return
		}
	}
	n, err := sh.Issuer.Attempts(ctx, serial)
	if err != nil {
		refuse(http.StatusInternalServerError, "the ledger did not answer: "+err.Error())
		return
	}
	max := sh.Sequence.MaxAttempts
	if max > 0 && n >= max {
		runs := "runs"
		if n == 1 {
			runs = "run"
		}
		refuse(http.StatusConflict, fmt.Sprintf("%s has had %d measured %s, as many as this product allows: send it to rework. Nothing was run.", serial, n, runs))
		return
	}
	if tested && r.PostFormValue("retest") != "confirm" {
		what := "run " + earlier.RunID
		if earlier.Certificate != "" {
			what = "certificate " + earlier.Certificate
		}
		ask := &retestAsk{Serial: serial, Earlier: fmt.Sprintf("%s (%s, %s)", what, earlier.Verdict, earlier.Finished.Local().Format("2006-01-02 15:04"))}
		if max > 0 {
			ask.Attempt = fmt.Sprintf("This is attempt %d of %d.", n+1, max)
		}
		ask.Lot = s.retestLot(ctx, earlier.RunID)
		s.reply(w, r, http.StatusOK, answer{Retest: ask})
		return
	}
	if err := s.start(serial, se.name, tested, n+1); err != nil {
		refuse(http.StatusConflict, err.Error())
		return
	}
	s.reply(w, r, http.StatusOK, answer{OK: true})
}

// cannotStart says why no unit may start now, "" when one may.
func (s *Server) cannotStart() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	switch {
	case s.closed:
		return "the console is closing"
	case s.st.Phase == phaseRunning:
		return errBusy.Error()
	case s.st.Phase == phaseLocked:
		return errLocked.Error()
	case s.changingLot:
		return errLotChanging.Error()
	case s.st.Blocked:
		var why []string
		for _, it := range s.st.Status {
			if it.State == "block" {
				why = append(why, it.Title)
			}
		}
		return errBlocked.Error() + ": " + strings.Join(why, "; ")
	}
	return ""
}

// start runs serial in the background; the page follows it through events.
func (s *Server) start(serial, operator string, retest bool, attempt int) error {
	s.mu.Lock()
	if s.closed || s.st.Phase == phaseRunning || s.st.Phase == phaseLocked {
		s.mu.Unlock()
		return errBusy
	}
	if s.changingLot {
		s.mu.Unlock()
		return errLotChanging
	}
	// The unit records the lot in force when it starts.
	lot := s.st.Lot
	ctx, cancel := context.WithCancelCause(context.Background())
	done := make(chan struct{})
	s.cancel = cancel
	s.running = done
	u := &unitView{Serial: serial, Operator: operator, Retest: retest, Attempt: attempt, StartedMs: time.Now().UnixMilli(), Step: -1, Steps: []stepView{}, Points: []plotPt{}}
	s.st.Phase, s.st.Unit, s.st.Verdict = phaseRunning, u, nil
	s.st.Version++
	s.mu.Unlock()
	s.publishState()
	go func() {
		defer close(done)
		defer cancel(nil)
		s.runUnit(ctx, serial, operator, lot, attempt)
	}()
	return nil
}

// runUnit runs one unit in lot (opening the instruments first when a fault
// closed them) and shows its verdict.
func (s *Server) runUnit(ctx context.Context, serial, operator, lot string, attempt int) {
	sh := s.shift
	began := time.Now()
	s.issuing.Lock()
	defer s.issuing.Unlock()
	if lot != "" {
		// The shift's lot too: a unit whose start fails in OpenEngine is
		// recorded in it. (Checked when it was set: New, setLot.)
		if err := sh.SetLot(lot); err != nil {
			sh.Log.Error().Err(err).Msg("console: lot")
		}
	}
	if sh.Engine == nil {
		// The first unit after a fault (or a bench that did not open)
		// re-identifies every instrument.
		rec, err := sh.OpenEngine(ctx, serial, operator)
		if err != nil {
			if rec == nil {
				// Refused for a reason of the files: nothing was recorded,
				// and the screen says so (no run id to clear it under).
				rec = sh.FaultRecord(serial, operator, err)
				rec.RunID = ""
			}
			s.finish(rec, "", time.Since(began), attempt, nil)
			return
		}
	}
	rec, cert, err := sh.RunUnit(ctx, serial, sequencer.RunOptions{Operator: operator, Lot: lot, Progress: s.progress})
	s.finish(rec, cert, time.Since(began), attempt, err)
}

// progress takes one engine event to the state and the pages. It runs on
// the engine's goroutine and returns quickly.
func (s *Server) progress(ev sequencer.Event) {
	if s.observe != nil {
		s.observe(ev)
	}
	s.mu.Lock()
	u := s.st.Unit
	if u == nil {
		s.mu.Unlock()
		return
	}
	u.progress(ev)
	s.st.Version++
	var out any
	switch ev.Kind {
	case sequencer.EventPoint:
		out = struct {
			Step      int     `json:"step"`
			Point     int     `json:"point"`  // 1-based
			Points    int     `json:"points"` // of the step
			X         float64 `json:"x"`
			XUnit     string  `json:"x_unit"`
			Y         float64 `json:"y"`
			Unit      string  `json:"unit"`
			PointText string  `json:"point_text"`
		}{ev.Step, ev.Point, ev.Points, ev.Stimulus, ev.StimulusUnit, ev.Error, u.Unit, u.PointText}
	default:
		out = struct {
			Kind     string     `json:"kind"`
			Step     int        `json:"step"`
			StepName string     `json:"step_name"`
			Steps    []stepView `json:"steps"`
			ExpectMs int64      `json:"expected_ms"`
		}{string(ev.Kind), u.Step, u.StepName, append([]stepView(nil), u.Steps...), u.ExpectMs}
	}
	s.mu.Unlock()
	if ev.Kind == sequencer.EventPoint {
		s.hub.publish("point", out)
	} else {
		s.hub.publish("step", out)
	}
}

// finish shows a finished unit's verdict: counted, listed, and a FAULT locks
// the station and closes the instruments, so that the next unit opens and
// identifies them again.
func (s *Server) finish(rec *sequencer.Record, cert string, wall time.Duration, attempt int, runErr error) {
	sh := s.shift
	certURL := ""
	if cert != "" {
		certURL = "/certificates/" + url.PathEscape(certificate.FileName(rec, certificate.Options{Number: cert}))
	}
	v := verdictOf(rec, cert, certURL, attempt, sh.Sequence.MaxAttempts)
	if runErr != nil && rec.Verdict != sequencer.Fault {
		// The run ended but could not be recorded: the station cannot go on.
		v.Reasons = append(v.Reasons, "the run could not be recorded: "+runErr.Error())
	}
	if rec.Verdict == sequencer.Fault {
		sh.CloseEngine()
	}
	ctx := context.Background()
	s.refreshStatus(ctx)
	s.refreshReview(ctx)
	s.mu.Lock()
	s.st.record(rec, cert, certURL, wall)
	if rec.Simulated != nil {
		s.st.Station.Simulated = true // the record says so: the screen does too
	}
	s.st.Verdict = v
	s.st.Phase = phaseVerdict
	if s.st.Unit != nil {
		s.st.Unit.Stopping = false
	}
	switch {
	case rec.Verdict == sequencer.Fault:
		ft := sequencer.ExplainFault(rec)
		s.st.lock(faultView{What: ft.What, Said: ft.Said, Check: ft.Check, RunID: rec.RunID}, rec.Serial)
	case runErr != nil:
		s.st.lock(faultView{What: "the run could not be recorded in the ledger", Said: runErr.Error(), Check: "the disk and the ledger file; call the test engineer"}, rec.Serial)
	}
	s.cancel, s.running = nil, nil
	s.st.Version++
	s.mu.Unlock()
	s.publishState()
}

// verdictOf is a record's verdict as the operator reads it, with the
// metrologist's statement beside it.
func verdictOf(rec *sequencer.Record, cert, certURL string, attempt, max int) *verdictView {
	ov := sequencer.ForOperator(rec, attempt, max)
	// What the page shows never splits a number from its unit (keepTogether).
	v := &verdictView{Serial: rec.Serial, Verdict: string(rec.Verdict), Word: ov.Headline, Reasons: keepAllTogether(ov.Reasons), Action: keepTogether(ov.Action),
		Cert: cert, CertURL: certURL, Notes: rec.Notes, Statement: []string{}}
	if v.Reasons == nil {
		v.Reasons = []string{}
	}
	if v.Notes == nil {
		v.Notes = []string{}
	}
	if rec.Verdict == sequencer.Aborted {
		v.Reasons = []string{"the unit was stopped before its verdict; the source is off and no certificate was issued"}
	}
	for _, o := range rec.Outcomes {
		name := strings.ReplaceAll(o.Name, "_", " ")
		if o.Channel != "" {
			name += " ch " + o.Channel
		}
		verdict := "pass"
		if !o.Pass {
			verdict = "not pass"
		}
		text := ""
		switch {
		case o.Decision != nil && o.Decision.Statement != "":
			text = o.Decision.Statement
		case o.Reason != "":
			text = o.Reason
		}
		line := name + ": " + verdict
		if text != "" {
			line += " — " + text
		}
		v.Statement = append(v.Statement, keepTogether(line))
	}
	if rec.Fault != "" {
		v.Statement = append(v.Statement, "station: "+rec.Fault)
	}
	if rec.RetestOf != "" {
		v.Retest = "retest of run " + rec.RetestOf
	}
	return v
}

// publishState sends the whole state to every page.
func (s *Server) publishState() {
	s.hub.publish("state", jsonRaw(s.snapshot()))
}

// jsonRaw is JSON that is already encoded.
type jsonRaw []byte

func (j jsonRaw) MarshalJSON() ([]byte, error) { return j, nil }

// stop ends the running unit safely: its context is cancelled, the engine
// switches the source off and records the run ABORTED (no certificate).
func (s *Server) stop(w http.ResponseWriter, r *http.Request, se *session) {
	s.mu.Lock()
	cancel := s.cancel
	if cancel != nil && s.st.Unit != nil {
		s.st.Unit.Stopping = true
		s.st.Version++
	}
	s.mu.Unlock()
	if cancel == nil {
		s.reply(w, r, http.StatusConflict, answer{Error: "no unit is running"})
		return
	}
	s.shift.Log.Warn().Str("person", se.name).Msg("console: stop pressed")
	cancel(fmt.Errorf("stopped by %s", se.name))
	s.publishState()
	s.reply(w, r, http.StatusOK, answer{OK: true})
}

// clear unlocks a station after a fault, with the note of what was found and
// done; the note goes into the ledger's audit trail under the person's name.
// The next unit opens the instruments again.
func (s *Server) clear(w http.ResponseWriter, r *http.Request, se *session) {
	if !se.operate {
		s.reply(w, r, http.StatusForbidden, answer{Error: se.name + " may not clear the station"})
		return
	}
	note, ok := cleanNote(r.PostFormValue("note"))
	if !ok || note == "" {
		s.reply(w, r, http.StatusBadRequest, answer{Error: errEmptyNote.Error()})
		return
	}
	s.mu.Lock()
	if s.st.Phase != phaseLocked || s.st.Fault == nil || s.clearing {
		s.mu.Unlock()
		s.reply(w, r, http.StatusConflict, answer{Error: "the station is not locked"})
		return
	}
	f := *s.st.Fault
	s.clearing = true
	s.mu.Unlock()
	defer func() {
		s.mu.Lock()
		s.clearing = false
		s.mu.Unlock()
	}()
	subject := f.RunID
	if subject == "" {
		subject = "station " + s.shift.Station.ID
	}
	detail := f.What + ": " + f.Said + " — note: " + note
	if err := s.shift.Ledger.Audit(r.Context(), se.name, "clear station fault", subject, detail); err != nil {
		s.reply(w, r, http.StatusInternalServerError, answer{Error: "the ledger did not record the note: " + err.Error()})
		return
	}
	s.shift.CloseEngine()
	s.refreshStatus(r.Context())
	s.mu.Lock()
	// Cleared: the station is ready (the faulted unit stays in the list of
	// the last units).
	s.st.Phase, s.st.Fault = phaseReady, nil
	if s.st.Verdict != nil && s.st.Verdict.Verdict == string(sequencer.Fault) {
		s.st.Verdict = nil
	}
	if s.st.Verdict != nil {
		s.st.Phase = phaseVerdict
	}
	s.st.Version++
	s.mu.Unlock()
	s.shift.Log.Info().Str("person", se.name).Str("note", note).Msg("console: station fault cleared")
	s.publishState()
	s.reply(w, r, http.StatusOK, answer{OK: true})
}

// cleanNote trims a note and refuses control characters but line breaks.
func cleanNote(s string) (string, bool) {
	s = strings.TrimSpace(strings.ReplaceAll(s, "\r\n", "\n"))
	if len(s) > 2000 {
		return "", false
	}
	for _, c := range s {
		if c < 0x20 && c != '\n' && c != '\t' || c == 0x7f {
			return "", false
		}
	}
	return s, true
}

// review records a reviewer's decision on a unit held for REVIEW: the
// certificate is reissued with the final verdict.
func (s *Server) review(w http.ResponseWriter, r *http.Request, se *session) {
	if !se.review {
		s.reply(w, r, http.StatusForbidden, answer{Error: se.name + " may not decide on held units"})
		return
	}
	cert := r.PathValue("cert")
	decision := r.PostFormValue("decision")
	if decision != sequencer.DecisionAccept && decision != sequencer.DecisionReject {
		s.reply(w, r, http.StatusBadRequest, answer{Error: "decide accept or reject"})
		return
	}
	reason, ok := cleanText(r.PostFormValue("reason"), 500)
	if !ok || reason == "" {
		s.reply(w, r, http.StatusBadRequest, answer{Error: "write the reason for the decision"})
		return
	}
	s.mu.Lock()
	busy := s.st.Phase == phaseRunning
	s.mu.Unlock()
	if busy {
		s.reply(w, r, http.StatusConflict, answer{Error: "wait until the unit on test has its verdict"})
		return
	}
	d := sequencer.Disposition{Decision: decision, Reviewer: se.name, Reason: reason, At: time.Now().UTC(), Authenticated: se.authenticated}
	s.issuing.Lock()
	newCert, err := s.shift.Issuer.Dispose(r.Context(), cert, d)
	s.issuing.Unlock()
	if err != nil {
		s.reply(w, r, http.StatusConflict, answer{Error: "not recorded: " + err.Error()})
		return
	}
	s.shift.Log.Info().Str("reviewer", se.name).Str("certificate", cert).Str("decision", decision).Str("new_certificate", newCert).Msg("console: review decision")
	s.refreshReview(r.Context())
	s.mu.Lock()
	s.st.Version++
	s.mu.Unlock()
	s.publishState()
	s.reply(w, r, http.StatusOK, answer{OK: true, Extra: map[string]string{"certificate": newCert}})
}
