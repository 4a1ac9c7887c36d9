package console

import (
	"context"
	"net/http"
	"strings"
	"unicode"

	"trimline/sequencer"
)

// auditLot is the audit trail's action for a change of the production lot.
const auditLot = "change production lot"

// setLot changes the production lot in force: every unit started after it
// records the new lot (Record.Lot). Only a signed-in person with the operate
// right may change it, and not while a unit runs (that unit records the lot
// it started in). The change goes into the ledger's audit trail under the
// person's name before it is in force. A lot is replaced by the next one,
// never removed.
func (s *Server) setLot(w http.ResponseWriter, r *http.Request, se *session) {
	if !se.operate {
		s.reply(w, r, http.StatusForbidden, answer{Error: se.name + " may not change the lot at this station"})
		return
	}
	lot := strings.TrimSpace(r.PostFormValue("lot"))
	s.mu.Lock()
	old := s.st.Lot
	s.mu.Unlock()
	refuse := func(code int, msg string) {
		s.reply(w, r, code, answer{Error: msg + " " + lotStill(old)})
	}
	sh := s.shift
	if lot == "" {
		refuse(http.StatusBadRequest, "Scan or type the lot traveller's id, then Enter.")
		return
	}
	if err := sequencer.CheckLot(lot); err != nil {
		refuse(http.StatusBadRequest, "Not a lot id: "+err.Error()+".")
		return
	}
	if sh.Sequence.CheckSerial(lot) == nil {
		// A unit scanned into the wrong field: a serial as the lot would
		// mislabel every unit after it.
		refuse(http.StatusBadRequest, lot+" is a "+sh.Sequence.Product+" serial, not a lot id: scan units into the Scan unit field.")
		return
	}
	s.mu.Lock()
	switch {
	case s.closed:
		s.mu.Unlock()
		refuse(http.StatusConflict, "The console is closing.")
		return
	case s.st.Phase == phaseRunning:
		s.mu.Unlock()
		refuse(http.StatusConflict, "A unit is running: change the lot when it has its verdict (it records the lot it started in).")
		return
	case s.changingLot:
		s.mu.Unlock()
		refuse(http.StatusConflict, "The lot is being changed: try again in a moment.")
		return
	case s.st.Lot == lot:
		s.mu.Unlock()
		s.reply(w, r, http.StatusOK, answer{OK: true})
		return
	}
	old = s.st.Lot
	s.changingLot = true
	s.mu.Unlock()
	from := "no lot"
	if old != "" {
		from = "lot " + old
	}
	err := sh.Ledger.Audit(r.Context(), se.name, auditLot, "station "+sh.Station.ID, "from "+from+" to lot "+lot)
	s.mu.Lock()
	s.changingLot = false
	if err == nil {
		s.st.Lot = lot
		s.st.Version++
	}
	s.mu.Unlock()
	if err != nil {
		refuse(http.StatusInternalServerError, "The ledger did not record the change: "+err.Error()+".")
		return
	}
	sh.Log.Info().Str("person", se.name).Str("from", old).Str("lot", lot).Msg("console: lot changed")
	s.publishState()
	s.reply(w, r, http.StatusOK, answer{OK: true})
}

// retestLot tells the operator asked to retest a unit when its earlier run
// recorded another lot than the one in force (which the retest records): ""
// when the lots are the same or the earlier record cannot be read.
func (s *Server) retestLot(ctx context.Context, runID string) string {
	prev, err := s.shift.Ledger.Run(ctx, runID)
	s.mu.Lock()
	now := s.st.Lot
	s.mu.Unlock()
	if err != nil || prev.Lot == now {
		return ""
	}
	was, is := "in no lot", "no lot"
	if prev.Lot != "" {
		was = "in lot " + prev.Lot
	}
	if now != "" {
		is = "the lot in force, " + now
	}
	return "It was tested " + was + "; the retest records " + is + "."
}

// lotStill is what a refused change of the lot leaves in force.
func lotStill(lot string) string {
	if lot == "" {
		return "No lot is in force."
	}
	return "The lot is still " + lot + "."
}

// lotLike says whether text, refused as a serial, looks like a lot
// traveller's id scanned into the serial field: a lot of this shift (in
// force, or recorded by one of the last units), or text that begins with
// "LOT" or with "L" and a digit (a guess: many lot ids are written so).
func (s *Server) lotLike(text string) bool {
	if text == "" {
		return false
	}
	s.mu.Lock()
	known := strings.EqualFold(text, s.st.Lot)
	for _, r := range s.st.Recent {
		known = known || (r.Lot != "" && strings.EqualFold(text, r.Lot))
	}
	s.mu.Unlock()
	if known {
		return true
	}
	u := strings.ToUpper(text)
	return strings.HasPrefix(u, "LOT") || len(u) > 1 && u[0] == 'L' && unicode.IsDigit(rune(u[1]))
}
