package console

// Temporary stand-ins for functions other branches of this issue add, with the
// same signatures and a simple honest behaviour. Delete this file once those
// branches are merged; the calls below then resolve to the real methods (the
// call sites use these names only).

import (
	"context"
	"crypto/pbkdf2"
	"crypto/sha256"
	"crypto/subtle"
	"encoding/base64"
	"errors"
	"fmt"
	"slices"
	"strconv"
	"strings"

	"trimline/reports/issuing"
	"trimline/reports/ledger"
	"trimline/sequencer"
)

// personOf finds the person id names (badge first, else name, exact).
// pending: helper C (sequencer.Station.Person)
func personOf(st *sequencer.Station, id string) (sequencer.Person, bool) {
	for _, p := range st.People {
		if p.Badge != "" && p.Badge == id {
			return p, true
		}
	}
	for _, p := range st.People {
		if p.Name == id {
			return p, true
		}
	}
	return sequencer.Person{}, false
}

// can says whether p holds right.
// pending: helper C (sequencer.Person.Can)
func can(p sequencer.Person, right string) bool { return slices.Contains(p.May, right) }

// checkPassphrase checks pass against p's hashed passphrase
// "pbkdf2-sha256$ITER$SALT$HASH" (standard base64), in constant time.
// pending: helper C (sequencer.Person.CheckPassphrase)
func checkPassphrase(p sequencer.Person, pass string) bool {
	parts := strings.Split(p.Passphrase, "$")
	if len(parts) != 4 || parts[0] != "pbkdf2-sha256" {
		return false
	}
	iter, err := strconv.Atoi(parts[1])
	if err != nil || iter < 1 {
		return false
	}
	dec := func(s string) []byte {
		for _, enc := range []*base64.Encoding{base64.StdEncoding, base64.RawStdEncoding} {
			if b, err := enc.DecodeString(s); err == nil {
				return b
			}
		}
		return nil
	}
	salt, want := dec(parts[2]), dec(parts[3])
	if len(salt) == 0 || len(want) == 0 {
		return false
	}
	got, err := pbkdf2.Key(sha256.New, pass, salt, iter, len(want))
	return err == nil && subtle.ConstantTimeCompare(got, want) == 1
}

// forOperator is the verdict in an operator's words.
// pending: helper C (sequencer.ForOperator)
func forOperator(rec *sequencer.Record, attempt, maxAttempts int) operatorView {
	v := operatorView{Headline: string(rec.Verdict)}
	switch rec.Verdict {
	case sequencer.Pass:
		v.Action = "pack it"
	case sequencer.Fail:
		v.Reasons, v.Action = rec.Reasons, "send to rework"
		if maxAttempts > 0 && attempt < maxAttempts {
			v.Action = fmt.Sprintf("retest it (attempt %d of %d)", attempt+1, maxAttempts)
		}
	case sequencer.Review:
		v.Reasons, v.Action = rec.Reasons, "put it on the review shelf"
	case sequencer.Fault:
		v.Headline, v.Reasons, v.Action = "STATION FAULT", []string{rec.Fault}, "call the test engineer"
	case sequencer.Aborted:
		v.Headline, v.Action = "STOPPED", "test it again when ready"
	}
	return v
}

// operatorView mirrors sequencer.OperatorView.
// pending: helper C (sequencer.OperatorView)
type operatorView struct {
	Headline string
	Reasons  []string
	Action   string
}

// faultText mirrors sequencer.FaultText.
// pending: helper C (sequencer.FaultText)
type faultText struct{ What, Said, Check string }

// explainFault says what failed, from the record's fault detail when the
// engine gave one, else its fault message.
// pending: helper C (sequencer.ExplainFault)
func explainFault(rec *sequencer.Record) faultText {
	if d := rec.FaultDetail; d != nil {
		what := "the " + d.Role
		if d.Asset != "" || d.Address != "" {
			what += " (" + strings.TrimSpace(d.Asset+" at "+d.Address) + ")"
		}
		return faultText{What: what + " failed", Said: d.Said, Check: "its cable and power"}
	}
	return faultText{What: "the station could not measure", Said: rec.Fault, Check: "the instruments' cables and power"}
}

// attempts is how many measured runs serial has had (PASS, FAIL or REVIEW,
// without a review disposition).
// pending: helper C (issuing.Issuer.Attempts)
func attempts(ctx context.Context, is *issuing.Issuer, serial string) (int, error) {
	runs, err := is.Ledger.Runs(ctx, serial)
	if err != nil {
		return 0, err
	}
	n := 0
	for _, r := range runs {
		if _, judged := r.Verdict.Judged(); judged {
			n++
		}
	}
	return n, nil
}

// reviewQueue is the REVIEW runs of station whose certificate is current,
// oldest first.
// pending: helper B (ledger.Ledger.ReviewQueue)
func reviewQueue(ctx context.Context, l *ledger.Ledger, station string) ([]ledger.RunSummary, error) {
	runs, err := l.RecentRuns(ctx, 0)
	if err != nil {
		return nil, err
	}
	var q []ledger.RunSummary
	for i := len(runs) - 1; i >= 0; i-- {
		r := runs[i]
		if r.Verdict != sequencer.Review || r.Certificate == "" || (station != "" && r.Station != station) {
			continue
		}
		s, err := l.CertificateStatus(ctx, r.Certificate)
		if err != nil {
			return nil, err
		}
		if s.Current() {
			q = append(q, r)
		}
	}
	return q, nil
}

// errDisposePending is what dispose answers until review decisions can be
// recorded.
var errDisposePending = errors.New("review decisions cannot be recorded by this build yet")

// dispose records a reviewer's decision on a REVIEW certificate.
// pending: helper B (issuing.Issuer.Dispose)
func dispose(ctx context.Context, is *issuing.Issuer, cert string, d sequencer.Disposition) (string, error) {
	return "", errDisposePending
}
