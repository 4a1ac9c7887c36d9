// Package release records that an approver released a limit or sequence file for
// production, and tells a production run whether its files were released by a
// trusted approver.
//
// A release is an entry in the ledger's audit trail (action "release", subject the
// file's SHA-256) whose detail is a Release: a 21 CFR 11.50 manifestation (printed
// name, date and time, meaning) signed with the approver's Ed25519 key over
// Message. Anyone can write an unsigned release; only one whose signature verifies
// with a trusted public key counts.
package release

import (
	"context"
	"crypto/sha256"
	"encoding/base64"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"time"

	"trimline/limits"
	"trimline/reports/ledger"
	"trimline/reports/signing"
	"trimline/sequencer"
)

// Action is the audit-trail action that releases a file by its hash.
const Action = "release"

// Kinds of file that are released.
const (
	KindLimits   = sequencer.FileLimits
	KindSequence = sequencer.FileSequence
)

// ErrNotReleased is returned by Check when a production run's sequence or limit file
// was not released by a trusted approver; the error is a *NotReleasedError.
var ErrNotReleased = errors.New("files not released by a trusted approver")

// ErrNotReleasable is returned by Record for a file that is neither a limit nor a
// sequence file.
var ErrNotReleasable = errors.New("only limit and sequence files are released")

// ErrReleaseKeys is returned by Check when the station's release_keys folder
// cannot be read; the message says why.
var ErrReleaseKeys = errors.New("release keys unreadable")

// Decisions an approver signs about a file. Only the last decision signed by a
// trusted approver counts: approve puts the file in force, reject and withdraw
// take it out (reject: it was never fit for production; withdraw: it was, and is
// no longer).
const (
	Approve  = "approve"
	Reject   = "reject"
	Withdraw = "withdraw"
)

// Decisions lists the decision words, in the order help text names them.
var Decisions = []string{Approve, Reject, Withdraw}

// ErrUntrusted is returned by Record when the signing key is not trusted to
// release: it is not an approver's of the trust given, or the approver may not
// release.
var ErrUntrusted = errors.New("not a trusted approver's key")

// ErrLint is returned by Record when a limit file to approve has lint errors; the
// error is a *LintError.
var ErrLint = errors.New("lint found errors")

// ErrDecision is returned by Record for a decision that is not one of Decisions.
var ErrDecision = errors.New("unknown decision")

// Release is the detail of a release entry: a 21 CFR 11.50 manifestation (printed
// name, date and time, meaning) signed with the approver's key. Decision is one of
// Approve, Reject and Withdraw; a release recorded before decisions existed has
// none, and then its meaning decides (see DecisionOf).
type Release struct {
	File      string    `json:"file"`
	Kind      string    `json:"kind"`
	SHA256    string    `json:"sha256"`
	Decision  string    `json:"decision,omitempty"`
	By        string    `json:"by"`
	Meaning   string    `json:"meaning"`
	At        time.Time `json:"at"`
	KeyID     string    `json:"key_id,omitempty"`
	Signature string    `json:"signature,omitempty"` // base64 Ed25519 over Message
}

// Message is the signed message of a release: signing.DecisionMessage when it
// carries a decision, else (a release recorded before decisions) the original
// signing.ReleaseMessage, whose bytes are kept so its signature still verifies.
func Message(r Release) []byte {
	if r.Decision != "" {
		return signing.DecisionMessage(r.SHA256, r.Decision, r.By, r.Meaning, r.At)
	}
	return signing.ReleaseMessage(r.SHA256, r.By, r.Meaning, r.At)
}

// DecisionOf returns what r decides: its Decision; for a release recorded before
// decisions, the decision its meaning states in plain words ("approved" or
// "released": Approve; "rejected": Reject; "withdrawn": Withdraw; any case), and ""
// for any other meaning, which decides nothing.
func DecisionOf(r Release) string {
	if r.Decision != "" {
		for _, d := range Decisions {
			if d == r.Decision {
				return d
			}
		}
		return ""
	}
	switch strings.ToLower(strings.TrimSpace(r.Meaning)) {
	case "approved", "approve", "released", "release":
		return Approve
	case "rejected", "reject":
		return Reject
	case "withdrawn", "withdraw":
		return Withdraw
	}
	return ""
}

// DefaultMeaning is the meaning recorded with a decision when none is given.
func DefaultMeaning(decision string) string {
	switch decision {
	case Approve:
		return "approved"
	case Reject:
		return "rejected"
	case Withdraw:
		return "withdrawn"
	}
	return ""
}

// Request is what an approver decides about a file.
type Request struct {
	Key      *signing.Key          // the approver's private key; required
	Trust    *signing.Trust        // whose approvers may release; the name comes from here
	Decision string                // Approve, Reject or Withdraw
	Meaning  string                // the words of the signature's meaning; "" for DefaultMeaning
	Ranges   map[string][2]float64 // physical ranges for lint (sequencer.PhysicalRanges)
	Catalog  limits.Catalog        // the results a limit file may judge (Sequence.Catalog); nil: the first layout's
}

// LintError lists the lint errors that stop a limit file's approval; it matches
// ErrLint.
type LintError struct{ Findings []limits.Finding }

func (e *LintError) Error() string {
	lines := make([]string, len(e.Findings))
	for i, f := range e.Findings {
		lines[i] = f.Error()
	}
	return fmt.Sprintf("not released: trimline limits lint finds %d error(s):\n%s", len(e.Findings), strings.Join(lines, "\n"))
}

func (e *LintError) Is(target error) bool { return target == ErrLint }

// Record writes a release decision on data (the contents of the file at path, of
// kind KindLimits or KindSequence) into led's audit trail, signed with req.Key,
// and returns it; its time is now, in UTC. The key must be that of an approver of
// req.Trust who may release (else ErrUntrusted, saying so), and the printed name
// recorded is the approver's trust entry's. A limit file is approved only when
// limits.Lint, with req.Ranges, finds no error (else a *LintError); rejecting or
// withdrawing needs no lint. Other errors: ErrNotReleasable, ErrDecision (also for
// a meaning whose words state another decision), the ledger's.
func Record(ctx context.Context, led *ledger.Ledger, path, kind string, data []byte, req Request) (Release, error) {
	if kind != KindLimits && kind != KindSequence {
		return Release{}, fmt.Errorf("%s: %w", path, ErrNotReleasable)
	}
	if DecisionOf(Release{Decision: req.Decision}) == "" {
		return Release{}, fmt.Errorf("%q: %w: expected %s", req.Decision, ErrDecision, strings.Join(Decisions, ", "))
	}
	if req.Key == nil || req.Trust == nil {
		return Release{}, fmt.Errorf("%s: a release is signed by a trusted approver's key: %w", path, ErrUntrusted)
	}
	a, ok := req.Trust.Approver(req.Key.ID())
	if !ok {
		return Release{}, fmt.Errorf("%s: key %s is not an approver's in %s: %w", path, req.Key.ID(), req.Trust.Source, ErrUntrusted)
	}
	if !a.Can(signing.MayRelease) {
		return Release{}, fmt.Errorf("%s: %s (key %s) may not release files (%s): %w", path, a.Name, req.Key.ID(), req.Trust.Source, ErrUntrusted)
	}
	if kind == KindLimits && req.Decision == Approve {
		var errs []limits.Finding
		for _, f := range limits.Lint(path, data, catalogOr(req.Catalog), limits.LintOptions{Ranges: req.Ranges}) {
			if f.Severity == limits.SeverityError {
				errs = append(errs, f)
			}
		}
		if len(errs) > 0 {
			return Release{}, &LintError{Findings: errs}
		}
	}
	meaning := req.Meaning
	if meaning == "" {
		meaning = DefaultMeaning(req.Decision)
	}
	if d := DecisionOf(Release{Meaning: meaning}); d != "" && d != req.Decision {
		return Release{}, fmt.Errorf("meaning %q says %s, but the decision is %s: %w", meaning, d, req.Decision, ErrDecision)
	}
	sum := sha256.Sum256(data)
	r := Release{File: filepath.Base(path), Kind: kind, SHA256: hex.EncodeToString(sum[:]), Decision: req.Decision,
		By: a.Name, Meaning: meaning, At: time.Now().UTC(), KeyID: req.Key.ID()}
	r.Signature = base64.StdEncoding.EncodeToString(req.Key.Sign(Message(r)))
	detail, _ := json.Marshal(r)
	if err := led.Audit(ctx, r.By, Action, r.SHA256, string(detail)); err != nil {
		return Release{}, err
	}
	return r, nil
}

// All returns every release entry in the ledger's audit trail, signed or not, in
// the trail's order.
func All(ctx context.Context, led *ledger.Ledger) ([]Release, error) {
	trail, err := led.AuditTrail(ctx)
	if err != nil {
		return nil, err
	}
	var out []Release
	for _, e := range trail {
		if e.Action != Action {
			continue
		}
		var r Release
		if json.Unmarshal([]byte(e.Detail), &r) == nil && r.SHA256 == e.Subject {
			out = append(out, r)
		}
	}
	return out, nil
}

// Approved reports whether r is a decision signed by an approver of trust who may
// release, and returns that approver.
func Approved(r Release, trust *signing.Trust) (signing.Approver, bool) {
	a, ok := trust.Approver(r.KeyID)
	if !ok || !a.Can(signing.MayRelease) || DecisionOf(r) == "" {
		return signing.Approver{}, false
	}
	sig, err := base64.StdEncoding.DecodeString(r.Signature)
	return a, err == nil && signing.Verify(a.Key, Message(r), sig)
}

// By returns the files in force, by hash: those whose last decision signed by an
// approver of trust who may release (in the audit trail's order) approves them.
// Unsigned entries, entries signed by other keys and meanings that state no
// decision change nothing. Each Release's By is the approver's name as the trust
// names them.
func By(ctx context.Context, led *ledger.Ledger, trust *signing.Trust) (map[string]Release, error) {
	all, err := All(ctx, led)
	if err != nil {
		return nil, err
	}
	out := map[string]Release{}
	for _, r := range all {
		a, ok := Approved(r, trust)
		if !ok {
			continue
		}
		if DecisionOf(r) == Approve {
			r.By = a.Name
			out[r.SHA256] = r
		} else {
			delete(out, r.SHA256)
		}
	}
	return out, nil
}

// Approvers reads the approvers a station trusts from its release_keys: a folder
// of NAME.pub files (signing.ApproverDir) or a trust file (signing.LoadTrust).
// An error matches ErrReleaseKeys.
func Approvers(path string) (*signing.Trust, error) {
	var t *signing.Trust
	fi, err := os.Stat(path)
	switch {
	case err != nil:
		return nil, &keysError{fmt.Errorf("signing: %w", err)}
	case fi.IsDir():
		t, err = signing.ApproverDir(path)
	default:
		t, err = signing.LoadTrust(path)
	}
	if err != nil {
		return nil, &keysError{err}
	}
	return t, nil
}

// ByDir is By with the approvers of release_keys (see Approvers).
func ByDir(ctx context.Context, led *ledger.Ledger, releaseKeys string) (map[string]Release, error) {
	trust, err := Approvers(releaseKeys)
	if err != nil {
		return nil, err
	}
	return By(ctx, led, trust)
}

// NotReleasedError lists the files of a production run that no trusted approver
// released; it matches ErrNotReleased.
type NotReleasedError struct {
	Keys    string   // the trusted keys' folder
	Missing []string // "sequence file NAME (SHA-256 0123456789ab…)"
}

func (e *NotReleasedError) Error() string {
	return fmt.Sprintf("production runs need released files; not released by a trusted approver (%s): %s. An approver releases them with "+
		"'trimline limits release FILE --decision approve --key THEIR.key --station STATION', or run with --engineering (certificates then say ENGINEERING RUN — NOT FOR SHIPMENT)",
		e.Keys, strings.Join(e.Missing, "; "))
}

func (e *NotReleasedError) Is(target error) bool { return target == ErrNotReleased }

// Check refuses a production run on a sequence or limit file that no trusted
// approver released: a file is in force when the last decision on it signed by an
// approver of the station's release_keys (Approvers) approves it (see By). It returns nil, a
// *NotReleasedError, an error matching ErrReleaseKeys, or the ledger's error.
func Check(ctx context.Context, led *ledger.Ledger, st *sequencer.Station, seq *sequencer.Sequence) error {
	rel, err := ByDir(ctx, led, st.ReleaseKeys)
	var ke *keysError
	if errors.As(err, &ke) {
		return fmt.Errorf("%s release_keys: %w", st.File.Name, ke)
	} else if err != nil {
		return err
	}
	var missing []string
	for _, f := range []sequencer.FileRef{seq.File, seq.LimitsFile} {
		if _, ok := rel[f.SHA256]; !ok {
			missing = append(missing, fmt.Sprintf("%s file %s (SHA-256 %s…)", f.Kind, f.Name, f.SHA256[:12]))
		}
	}
	if len(missing) > 0 {
		return &NotReleasedError{Keys: st.ReleaseKeys, Missing: missing}
	}
	return nil
}

// keysError is a trusted-keys folder that could not be read; it matches
// ErrReleaseKeys and says why in its message.
type keysError struct{ err error }

func (e *keysError) Error() string        { return e.err.Error() }
func (e *keysError) Unwrap() error        { return e.err }
func (e *keysError) Is(target error) bool { return target == ErrReleaseKeys }

// catalogOr is cat, or the first layout's catalogue when cat is nil.
func catalogOr(cat limits.Catalog) limits.Catalog {
	if cat == nil {
		return sequencer.FirstLayoutCatalog()
	}
	return cat
}
