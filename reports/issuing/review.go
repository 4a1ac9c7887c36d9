package issuing

import (
	"bytes"
	"context"
	"encoding/base64"
	"errors"
	"fmt"
	"strings"
	"time"
	"unicode"

	"trimline/reports/ledger"
	"trimline/reports/signing"
	"trimline/sequencer"
)

// ErrNotHeld is what Dispose's refusals of the certificate wrap: it is not the
// current certificate of a unit of this station held for REVIEW.
var ErrNotHeld = errors.New("not a unit held for review")

// ErrNotReviewer is what Dispose's refusals of the reviewer wrap: the station's
// people list nobody of that name or badge with the review right, or the key is
// not theirs.
var ErrNotReviewer = errors.New("not a reviewer of this station")

// ErrBadDecision is what Dispose's refusals of the decision wrap: a decision
// other than accept or reject, or a missing reason or one with control characters.
var ErrBadDecision = errors.New("bad review decision")

// Dispose records a reviewer's decision d on the unit held for REVIEW under
// certificate certNumber and reissues its certificate with the final verdict;
// it returns the new certificate's number. It is DisposeSigned without the
// reviewer's signature: d.Authenticated says how the caller knew the reviewer
// ("station sign-in", "passphrase"; "" is recorded as "named, not authenticated").
func (is *Issuer) Dispose(ctx context.Context, certNumber string, d sequencer.Disposition) (newCert string, err error) {
	return is.DisposeSigned(ctx, certNumber, d, nil)
}

// DisposeSigned records a reviewer's decision d on the unit held for REVIEW
// under certificate certNumber, signed with the reviewer's key when key is not
// nil, and reissues the certificate with the final verdict. It returns the new
// certificate's number.
//
// The certificate must be the current one (not superseded, not voided) of a
// production run of is.Station held for REVIEW, and is a production issuer
// (not Engineering); else ErrNotHeld, saying why.
// d.Decision is sequencer.DecisionAccept or DecisionReject and d.Reason a
// reason in words without control characters (else ErrBadDecision).
// d.Reviewer is the badge or name of a person of the station's people with the
// review right (sequencer.RightReview; else ErrNotReviewer), and is recorded
// under the name the station lists. With key, it must be the private key of
// that person's public key (their key: file; else ErrNotReviewer), and
// d.Authenticated becomes "key " + its id.
//
// The decision is a record of its own, made from the REVIEW run's: the same
// readings, results and outcomes (which replay recomputes to REVIEW) with a new
// run id, Started and Finished at the time of the decision (d.At, or now when
// zero), the verdict PASS (accept) or FAIL (reject), Disposition d (Of,
// OfCertificate and Tested filled in here) and RetestOf the REVIEW run, so that
// the ledger supersedes the REVIEW certificate as it stores it. It is recorded
// as Record does (signed by the station key, chained, certificate published),
// with the reviewer as the audit trail's actor and, in the same transaction, an
// audit trail entry of the decision (ledger.ActionReviewAccept or
// ActionReviewReject, subject: certNumber, detail: a ledger.ReviewDetail with
// the reviewer's signature when signed). Two decisions on one unit cannot both
// be stored: the second is refused (ErrNotHeld) in that transaction. A failure
// to publish after the record was stored returns the new number with the error
// (Repair publishes it at the next start).
func (is *Issuer) DisposeSigned(ctx context.Context, certNumber string, d sequencer.Disposition, key *signing.Key) (newCert string, err error) {
	final, ok := d.Final()
	if !ok {
		return "", fmt.Errorf("review of %s: decision %q: give %s or %s: %w", certNumber, d.Decision, sequencer.DecisionAccept, sequencer.DecisionReject, ErrBadDecision)
	}
	d.Reason = strings.TrimSpace(d.Reason)
	switch {
	case d.Reason == "":
		return "", fmt.Errorf("review of %s: a reason is required: say why the unit is %s: %w", certNumber, d.OnReview(), ErrBadDecision)
	case strings.ContainsFunc(d.Reason, unicode.IsControl):
		return "", fmt.Errorf("review of %s: the reason has a control character (a line break or tab): write it on one line: %w", certNumber, ErrBadDecision)
	}
	p, err := is.reviewer(d.Reviewer)
	if err != nil {
		return "", fmt.Errorf("review of %s: %w", certNumber, err)
	}
	d.Reviewer = p.Name
	if key != nil {
		if err := keyOf(p, key); err != nil {
			return "", fmt.Errorf("review of %s: %w", certNumber, err)
		}
		d.Authenticated = "key " + key.ID()
	} else if d.Authenticated == "" {
		d.Authenticated = "named, not authenticated"
	}

	held, err := is.held(ctx, certNumber)
	if err != nil {
		return "", err
	}
	if d.At.IsZero() {
		d.At = time.Now()
	}
	d.At = d.At.UTC()
	d.Of, d.OfCertificate, d.Tested = held.RunID, certNumber, held.Finished

	rec := *held
	rec.RunID = sequencer.NewRunID(d.At)
	rec.Started, rec.Finished = d.At, d.At
	rec.Verdict, rec.RetestOf, rec.Disposition = final, held.RunID, &d
	rec.Notes = nil // what the operator had to know once the test was over
	detail := ledger.ReviewDetail{Reason: d.Reason, Authenticated: d.Authenticated}
	if key != nil {
		detail.SignedAt, detail.KeyID = d.At.Format(time.RFC3339Nano), key.ID()
		detail.PublicKey = base64.StdEncoding.EncodeToString(key.Public)
		detail.Signature = base64.StdEncoding.EncodeToString(key.Sign(signing.ReviewMessage(certNumber, d.Decision, d.Reviewer, d.Reason, d.At)))
	}
	cert, err := is.record(ctx, &rec, d.Reviewer, &detail)
	if errors.Is(err, ledger.ErrDecided) {
		// Another decision or a retest came first, after held looked.
		return "", fmt.Errorf("review of %s: %w: %w", certNumber, ErrNotHeld, err)
	}
	return cert, err
}

// held returns the REVIEW run of certificate number, refusing (ErrNotHeld) a
// number the ledger does not know, another station's run, one not held for
// REVIEW, an engineering run and a certificate no longer current.
func (is *Issuer) held(ctx context.Context, number string) (*sequencer.Record, error) {
	rec, _, err := is.Ledger.RunByCertificate(ctx, number)
	if errors.Is(err, ledger.ErrNotFound) {
		return nil, fmt.Errorf("review of %s: no certificate with that number in the ledger: %w", number, ErrNotHeld)
	}
	if err != nil {
		return nil, err
	}
	switch {
	case rec.Station != is.Station.ID:
		return nil, fmt.Errorf("review of %s: it is a certificate of station %s, not of %s: its station decides on it: %w", number, rec.Station, is.Station.ID, ErrNotHeld)
	case rec.Verdict != sequencer.Review:
		how := ""
		if rec.Disposition != nil {
			how = " (" + rec.Disposition.OnReview() + " by " + rec.Disposition.Reviewer + ")"
		}
		return nil, fmt.Errorf("review of %s: serial %s is %s%s, not held for REVIEW: %w", number, rec.Serial, rec.Verdict, how, ErrNotHeld)
	case rec.Engineering:
		return nil, fmt.Errorf("review of %s: an engineering run never ships: there is nothing to decide: %w", number, ErrNotHeld)
	case is.Engineering:
		// Its certificates come from the engineering series: a production unit's
		// final certificate must not.
		return nil, fmt.Errorf("review of %s: an engineering session decides on no production unit: decide from a production session: %w", number, ErrNotHeld)
	}
	st, err := is.Ledger.CertificateStatus(ctx, number)
	if err != nil {
		return nil, err
	}
	switch {
	case st.Voided:
		return nil, fmt.Errorf("review of %s: the certificate was voided (%s): %w", number, st.VoidReason, ErrNotHeld)
	case st.Superseded:
		return nil, fmt.Errorf("review of %s: superseded by %s: serial %s was retested or decided on already: %w", number, st.SupersededBy, rec.Serial, ErrNotHeld)
	}
	return rec, nil
}

// reviewer returns the person of the station's people whose badge, else name,
// is id (sequencer.Station.Person), when they hold the review right.
func (is *Issuer) reviewer(id string) (sequencer.Person, error) {
	where := is.Station.File.Name
	if where == "" {
		where = "the station file"
	}
	if strings.TrimSpace(id) == "" {
		return sequencer.Person{}, fmt.Errorf("no reviewer named: %w", ErrNotReviewer)
	}
	p, ok := is.Station.Person(id)
	if !ok {
		return sequencer.Person{}, fmt.Errorf("%s lists nobody named %q among its people: %w", where, id, ErrNotReviewer)
	}
	if !p.Can(sequencer.RightReview) {
		return sequencer.Person{}, fmt.Errorf("%s may not decide on units held for REVIEW: %s does not give them %q (may: %s): %w",
			p.Name, where, sequencer.RightReview, strings.Join(p.May, ", "), ErrNotReviewer)
	}
	return p, nil
}

// keyOf checks that key is the private key of p's public key file.
func keyOf(p sequencer.Person, key *signing.Key) error {
	if p.Key == "" {
		return fmt.Errorf("%s has no key: in the station's people, so no key can sign for them: %w", p.Name, ErrNotReviewer)
	}
	pub, err := signing.LoadPublic(p.Key)
	if err != nil {
		return fmt.Errorf("%s's key %s: %w", p.Name, p.Key, err)
	}
	if !bytes.Equal(pub, key.Public) {
		return fmt.Errorf("the key %s is not %s's (their key: %s is %s): %w", key.ID(), p.Name, p.Key, signing.KeyID(pub), ErrNotReviewer)
	}
	return nil
}
