package console

import (
	"context"
	"fmt"
	"strings"
	"time"

	"trimline/reports/release"
	"trimline/sequencer"
)

// refreshStatus checks what a unit needs before it may start: the files in
// force and their release, the instruments' calibration due dates, the
// signing key and the ledger.
func (s *Server) refreshStatus(ctx context.Context) {
	sh := s.shift
	st, seq := sh.Station, sh.Sequence
	var items []statusItem

	files := statusItem{Key: "files", State: "ok", Title: "files released"}
	var rel map[string]release.Release
	switch {
	case sh.Issuer.Engineering:
		files.State, files.Title = "warn", "engineering run: files not released, certificates marked"
	case !st.RequireRelease:
		files.State, files.Title = "warn", "files in force (the station does not require a release)"
	default:
		if err := release.Check(ctx, sh.Ledger, st, seq); err != nil {
			files.State, files.Title = "block", "files not released"
			files.Detail = append(files.Detail, err.Error())
		}
	}
	if st.ReleaseKeys != "" {
		rel, _ = release.ByDir(ctx, sh.Ledger, st.ReleaseKeys)
	}
	for _, f := range []sequencer.FileRef{st.File, seq.File, seq.LimitsFile} {
		line := fmt.Sprintf("%s file %s (SHA-256 %.12s…)", f.Kind, f.Name, f.SHA256)
		if r, ok := rel[f.SHA256]; ok {
			line += fmt.Sprintf(", released by %s on %s", r.By, r.At.Local().Format("2006-01-02"))
		}
		files.Detail = append(files.Detail, line)
	}
	items = append(items, files)

	cal := statusItem{Key: "calibration", State: "ok", Title: "calibration current"}
	now := time.Now()
	var soonest time.Time
	var expired, soon []string // "meter DMM-0203 (2026-12-12)"
	// The instruments this sequence uses, as the engine checks them.
	for _, r := range seq.Requires {
		in, ok := st.Instruments[r]
		if !ok || in.CalDue.IsZero() {
			continue
		}
		due := in.CalDue.Format("2006-01-02")
		line := fmt.Sprintf("%s %s due %s", r, in.Asset, due)
		who := strings.TrimSpace(r+" "+in.Asset) + " (" + due + ")"
		switch state, left := in.Calibration(now); state {
		case sequencer.CalExpired:
			cal.State = "block"
			expired = append(expired, who)
			line += " — EXPIRED"
		case sequencer.CalDueSoon: // as trimline check warns
			if cal.State == "ok" {
				cal.State = "warn"
			}
			soon = append(soon, who)
			line += fmt.Sprintf(" — in %d days", left)
		}
		if soonest.IsZero() || in.CalDue.Before(soonest) {
			soonest = in.CalDue
		}
		cal.Detail = append(cal.Detail, line)
	}
	switch {
	case len(expired) > 0:
		cal.Title = "calibration expired: " + strings.Join(expired, ", ")
	case len(soon) > 0:
		cal.Title = "calibration due soon: " + strings.Join(soon, ", ")
	case !soonest.IsZero():
		cal.Title = "calibration current to " + soonest.Format("2006-01-02")
	}
	items = append(items, cal)

	key := statusItem{Key: "key", State: "ok", Title: "signing key loaded"}
	if sh.Issuer.Key == nil {
		key.State, key.Title = "warn", "no signing key: certificates are not signed"
	} else {
		key.Detail = []string{sh.Issuer.Key.ID()}
	}
	items = append(items, key)

	led := statusItem{Key: "ledger", State: "ok", Title: "ledger reachable"}
	if n, err := sh.Ledger.Counts(ctx); err != nil {
		led.State, led.Title, led.Detail = "block", "ledger unreachable", []string{err.Error()}
	} else {
		led.Detail = []string{fmt.Sprintf("%d runs recorded, %d audit entries", n["runs"], n["audit_trail"])}
	}
	items = append(items, led)

	blocked := false
	for _, it := range items {
		blocked = blocked || it.State == "block"
	}
	s.mu.Lock()
	s.st.Status, s.st.Blocked = items, blocked
	s.st.Version++
	s.mu.Unlock()
}

// refreshReview reads the units held for review at this station.
func (s *Server) refreshReview(ctx context.Context) {
	q, err := s.shift.Ledger.ReviewQueue(ctx, s.shift.Station.ID)
	rows := []reviewRow{}
	if err == nil {
		for _, r := range q {
			row := reviewRow{Cert: r.Certificate, Serial: r.Serial, At: r.Finished.Local().Format("2006-01-02 15:04")}
			if rec, err := s.shift.Ledger.Run(ctx, r.RunID); err == nil && rec != nil {
				ov := sequencer.ForOperator(rec, 0, 0)
				row.Reasons = strings.Join(keepAllTogether(ov.Reasons), "; ")
			}
			rows = append(rows, row)
		}
	} else {
		s.shift.Log.Error().Err(err).Msg("console: review queue")
	}
	s.mu.Lock()
	s.st.Review = rows
	s.st.Version++
	s.mu.Unlock()
}
