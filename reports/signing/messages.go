package signing

import (
	"crypto/sha256"
	"encoding/hex"
	"time"
)

// The signed messages: the exact bytes each of the station's Ed25519 signatures
// covers. This file is their only owner; the ledger, the bundle, the seal and the
// release code all build them here, so that a signature made by one verifies in
// the others. Each layout starts with its own tag line, so that a signature over
// one kind of message can never be passed off as one over another. Fields are
// joined with "\n" and there is no final line break. The bytes of every layout
// are pinned by TestMessages: a signature already in a ledger, a seal or a release
// must go on verifying, so a layout is never changed, only a new one (tag v2)
// added beside it.
//
// A certificate's void is signed by the approver voiding it (VoidMessage); voids
// recorded before voids were signed are unsigned entries in the ledger's audit
// trail and count as no approver's void.

// Tags: the first line of each signed layout.
const (
	RecordTag   = "trimline-record-v1"  // RecordMessage
	PDFTag      = "trimline-pdf-v1"     // PDFMessage
	ReleaseTag  = "trimline-release-v1" // ReleaseMessage
	DecisionTag = "trimline-release-v2" // DecisionMessage
	VoidTag     = "trimline-void-v1"    // VoidMessage
	ReviewTag   = "trimline-review-v1"  // ReviewMessage
)

// RecordMessage is the exact message a run's record signature covers, the one
// the ledger stores with the run (ledger.RecordOptions.Sign signs it,
// ledger.ChainOptions.Verify checks it) and a seal carries as RecordSignature:
//
//	"trimline-record-v1\n" + number + "\n" + runID + "\n" + recordSHA256
//
// with number the certificate number ("" for a run without one) and recordSHA256
// the lowercase hex SHA-256 of the record's canonical bytes as the ledger keeps
// them (ledger.RecordSHA256). It binds the certificate number and the run to the
// record, and through the record's hash to the unit.
func RecordMessage(number, runID, recordSHA256 string) []byte {
	return []byte(RecordTag + "\n" + number + "\n" + runID + "\n" + recordSHA256)
}

// PDFMessage is the exact message a document's signature covers, the one the
// ledger stores with a document row and a seal carries as PDFSignature:
//
//	"trimline-pdf-v1\n" + number + "\n" + hex(SHA-256(pdf))
//
// with number the certificate number and the hash of the exact PDF bytes in
// lowercase hex.
func PDFMessage(number string, pdf []byte) []byte {
	sum := sha256.Sum256(pdf)
	return []byte(PDFTag + "\n" + number + "\n" + hex.EncodeToString(sum[:]))
}

// ReleaseMessage is the exact message a release's signature covers: a person's
// release of a limit or sequence file, a 21 CFR 11.50 manifestation (printed
// name, date and time, meaning) bound to the file's hash:
//
//	"trimline-release-v1\n" + fileSHA256 + "\n" + by + "\n" + meaning + "\n" + at
//
// with fileSHA256 the lowercase hex SHA-256 of the released file's bytes, by the
// printed name of the person releasing, meaning what the signature means (e.g.
// "approved") and at the time of release in UTC as time.RFC3339Nano
// ("2026-03-14T09:41:55.123Z"; trailing zeros of the fraction dropped).
func ReleaseMessage(fileSHA256, by, meaning string, at time.Time) []byte {
	return []byte(ReleaseTag + "\n" + fileSHA256 + "\n" + by + "\n" + meaning + "\n" + at.UTC().Format(time.RFC3339Nano))
}

// DecisionMessage is the exact message a release decision's signature covers: an
// approver's decision on a limit or sequence file (approve, reject or withdraw)
// with the words of its meaning, the printed name from the approver's trust entry
// and the time, bound to the file's hash:
//
//	"trimline-release-v2\n" + fileSHA256 + "\n" + decision + "\n" + by + "\n" + meaning + "\n" + at
//
// with the fields as for ReleaseMessage. It stands beside ReleaseMessage, whose
// releases (which carry no decision word) keep verifying as they were signed.
func DecisionMessage(fileSHA256, decision, by, meaning string, at time.Time) []byte {
	return []byte(DecisionTag + "\n" + fileSHA256 + "\n" + decision + "\n" + by + "\n" + meaning + "\n" + at.UTC().Format(time.RFC3339Nano))
}

// VoidMessage is the exact message a void's signature covers: an approver voids
// certificate number for a reason, under the printed name from their trust entry,
// at a time:
//
//	"trimline-void-v1\n" + number + "\n" + by + "\n" + reason + "\n" + at
//
// with at in UTC as time.RFC3339Nano, as for ReleaseMessage.
func VoidMessage(number, by, reason string, at time.Time) []byte {
	return []byte(VoidTag + "\n" + number + "\n" + by + "\n" + reason + "\n" + at.UTC().Format(time.RFC3339Nano))
}

// ReviewMessage is the exact message a reviewer's signature of a review
// decision covers: the reviewer decides on the unit held for REVIEW under
// certificate number (accept or reject, sequencer.DecisionAccept or
// DecisionReject), under their name as the station's people list it, for a
// reason, at a time:
//
//	"trimline-review-v1\n" + number + "\n" + decision + "\n" + by + "\n" + reason + "\n" + at
//
// with at in UTC as time.RFC3339Nano, as for ReleaseMessage.
func ReviewMessage(number, decision, by, reason string, at time.Time) []byte {
	return []byte(ReviewTag + "\n" + number + "\n" + decision + "\n" + by + "\n" + reason + "\n" + at.UTC().Format(time.RFC3339Nano))
}
