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
	"crypto/ed25519"
	"crypto/sha256"
	"encoding/base64"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"path/filepath"
	"strings"
	"time"

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

// Release is the detail of a release entry: a 21 CFR 11.50 manifestation (printed
// name, date and time, meaning) signed with the releasing key.
type Release struct {
	File      string    `json:"file"`
	Kind      string    `json:"kind"`
	SHA256    string    `json:"sha256"`
	By        string    `json:"by"`
	Meaning   string    `json:"meaning"`
	At        time.Time `json:"at"`
	KeyID     string    `json:"key_id,omitempty"`
	Signature string    `json:"signature,omitempty"` // base64 Ed25519 over Message
}

// Message is the signed message of a release; its layout is owned by
// signing.ReleaseMessage.
func Message(r Release) []byte { return signing.ReleaseMessage(r.SHA256, r.By, r.Meaning, r.At) }

// Record writes a release entry for data (the contents of the file at path, of
// kind KindLimits or KindSequence) into led's audit trail, signed with key when key
// is not nil, and returns it. Its time is now, in UTC.
func Record(ctx context.Context, led *ledger.Ledger, key *signing.Key, path, kind string, data []byte, by, meaning string) (Release, error) {
	if kind != KindLimits && kind != KindSequence {
		return Release{}, fmt.Errorf("%s: %w", path, ErrNotReleasable)
	}
	sum := sha256.Sum256(data)
	r := Release{File: filepath.Base(path), Kind: kind, SHA256: hex.EncodeToString(sum[:]), By: by, Meaning: meaning, At: time.Now().UTC()}
	if key != nil {
		r.KeyID, r.Signature = key.ID(), base64.StdEncoding.EncodeToString(key.Sign(Message(r)))
	}
	detail, _ := json.Marshal(r)
	if err := led.Audit(ctx, r.By, Action, r.SHA256, string(detail)); err != nil {
		return Release{}, err
	}
	return r, nil
}

// All returns every release in the ledger's audit trail by file hash, signed or not.
func All(ctx context.Context, led *ledger.Ledger) (map[string]Release, error) {
	trail, err := led.AuditTrail(ctx)
	if err != nil {
		return nil, err
	}
	out := map[string]Release{}
	for _, e := range trail {
		if e.Action != Action {
			continue
		}
		var r Release
		if json.Unmarshal([]byte(e.Detail), &r) == nil && r.SHA256 == e.Subject {
			out[r.SHA256] = r
		}
	}
	return out, nil
}

// By returns the releases whose signature verifies with one of the trusted keys,
// by file hash.
func By(ctx context.Context, led *ledger.Ledger, trusted map[string]ed25519.PublicKey) (map[string]Release, error) {
	all, err := All(ctx, led)
	if err != nil {
		return nil, err
	}
	out := map[string]Release{}
	for sha, r := range all {
		pub, ok := trusted[r.KeyID]
		sig, err := base64.StdEncoding.DecodeString(r.Signature)
		if ok && err == nil && signing.Verify(pub, Message(r), sig) {
			out[sha] = r
		}
	}
	return out, nil
}

// ByDir is By with the trusted keys read from the *.pub files in dir, as
// signing.TrustDir reads them: a folder that group or others may write is refused
// (an error matching ErrReleaseKeys and signing.ErrUnsafeKeyFolder).
func ByDir(ctx context.Context, led *ledger.Ledger, dir string) (map[string]Release, error) {
	trust, err := signing.TrustDir(dir)
	if err != nil {
		return nil, &keysError{err}
	}
	return By(ctx, led, trust.Keys())
}

// NotReleasedError lists the files of a production run that no trusted approver
// released; it matches ErrNotReleased.
type NotReleasedError struct {
	Keys    string   // the trusted keys' folder
	Missing []string // "sequence file NAME (SHA-256 0123456789ab…)"
}

func (e *NotReleasedError) Error() string {
	return fmt.Sprintf("production runs need released files; not released by a trusted approver (%s): %s. An approver releases them with "+
		"'trimline limits release FILE --by NAME --meaning approved --key THEIR.key', or run with --engineering (certificates then say ENGINEERING RUN — NOT FOR SHIPMENT)",
		e.Keys, strings.Join(e.Missing, "; "))
}

func (e *NotReleasedError) Is(target error) bool { return target == ErrNotReleased }

// Check refuses a production run on a sequence or limit file that no trusted
// approver released: a release counts only when its signature verifies with one of
// the public keys in the station's release_keys folder. It returns nil, a
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
