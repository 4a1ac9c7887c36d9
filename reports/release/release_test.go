package release_test

import (
	"context"
	"crypto/sha256"
	"encoding/base64"
	"encoding/hex"
	"encoding/json"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"trimline/reports/ledger"
	"trimline/reports/release"
	"trimline/reports/signing"
	"trimline/sequencer"
)

// The signed messages are part of the ledger format: released files in existing
// ledgers verify only while their bytes stay the same (hand-worked).
func TestMessageBytes(t *testing.T) {
	r := release.Release{SHA256: "ab12", By: "A. Quality", Meaning: "approved",
		At: time.Date(2026, 3, 4, 5, 6, 7, 800, time.FixedZone("x", 3600))}
	want := "trimline-release-v1\nab12\nA. Quality\napproved\n2026-03-04T04:06:07.0000008Z"
	if got := string(release.Message(r)); got != want {
		t.Errorf("message %q, want %q", got, want)
	}
	r.Decision = release.Withdraw
	want = "trimline-release-v2\nab12\nwithdraw\nA. Quality\napproved\n2026-03-04T04:06:07.0000008Z"
	if got := string(release.Message(r)); got != want {
		t.Errorf("decision message %q, want %q", got, want)
	}
}

// fixture is a ledger, an approver trusted to release ("A. Quality", by a trust
// folder of NAME.pub files), and a key nobody trusts.
type fixture struct {
	ctx       context.Context
	led       *ledger.Ledger
	keys      string // the approvers' folder, as a station's release_keys
	trust     *signing.Trust
	qe, other *signing.Key
}

func newFixture(t *testing.T) *fixture {
	t.Helper()
	f := &fixture{ctx: context.Background()}
	dir := t.TempDir()
	var err error
	if f.led, err = ledger.Open(f.ctx, filepath.Join(dir, "ledger.db")); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { f.led.Close() })
	f.keys = filepath.Join(dir, "approvers")
	f.qe = keyIn(t, f.keys, "A. Quality")
	f.other = keyIn(t, filepath.Join(dir, "elsewhere"), "intruder")
	if f.trust, err = release.Approvers(f.keys); err != nil {
		t.Fatal(err)
	}
	return f
}

func keyIn(t *testing.T, dir, name string) *signing.Key {
	t.Helper()
	priv, _, err := signing.Init(dir, name)
	if err != nil {
		t.Fatal(err)
	}
	k, err := signing.Load(priv)
	if err != nil {
		t.Fatal(err)
	}
	return k
}

func hexSHA(data []byte) string {
	sum := sha256.Sum256(data)
	return hex.EncodeToString(sum[:])
}

// raw writes a release entry as any writer of the ledger could: key nil leaves
// it unsigned; a Release without Decision is signed with the original layout.
func (f *fixture) raw(t *testing.T, key *signing.Key, r release.Release) {
	t.Helper()
	if r.At.IsZero() {
		r.At = time.Now().UTC()
	}
	if key != nil {
		r.KeyID, r.Signature = key.ID(), base64.StdEncoding.EncodeToString(key.Sign(release.Message(r)))
	}
	detail, _ := json.Marshal(r)
	if err := f.led.Audit(f.ctx, "someone", release.Action, r.SHA256, string(detail)); err != nil {
		t.Fatal(err)
	}
}

func (f *fixture) inForce(t *testing.T, data []byte) bool {
	t.Helper()
	rel, err := release.By(f.ctx, f.led, f.trust)
	if err != nil {
		t.Fatal(err)
	}
	_, ok := rel[hexSHA(data)]
	return ok
}

func (f *fixture) decide(t *testing.T, data []byte, decision string) release.Release {
	t.Helper()
	r, err := release.Record(f.ctx, f.led, "s.yaml", release.KindSequence, data, release.Request{Key: f.qe, Trust: f.trust, Decision: decision})
	if err != nil {
		t.Fatal(err)
	}
	return r
}

// Only a release signed by a trusted key lets production run.
func TestCheck(t *testing.T) {
	f := newFixture(t)
	seqData, limData := []byte("sequence: x\n"), []byte("limit_set: y\n")
	f.raw(t, nil, release.Release{File: "s.yaml", Kind: release.KindSequence, SHA256: hexSHA(seqData), By: "nobody", Meaning: "approved"})
	st := &sequencer.Station{ReleaseKeys: f.keys}
	seq := &sequencer.Sequence{File: sequencer.FileRef{Kind: "sequence", Name: "s.yaml", SHA256: hexSHA(seqData)},
		LimitsFile: sequencer.FileRef{Kind: "limits", Name: "l.yaml", SHA256: hexSHA(limData)}}

	err := release.Check(f.ctx, f.led, st, seq)
	var nr *release.NotReleasedError
	if !errors.Is(err, release.ErrNotReleased) || !errors.As(err, &nr) || len(nr.Missing) != 2 ||
		!strings.Contains(err.Error(), "not released by a trusted approver") {
		t.Fatalf("unsigned releases: %v", err)
	}
	f.decide(t, seqData, release.Approve)
	if err := release.Check(f.ctx, f.led, st, seq); !errors.As(err, &nr) || len(nr.Missing) != 1 || !strings.Contains(nr.Missing[0], "l.yaml") {
		t.Fatalf("sequence released: %v", err)
	}
	f.raw(t, f.qe, release.Release{File: "l.yaml", Kind: release.KindLimits, SHA256: hexSHA(limData), By: "A. Quality", Meaning: "approved"})
	if err := release.Check(f.ctx, f.led, st, seq); err != nil {
		t.Fatalf("both released (the limits by a release signed before decisions): %v", err)
	}
	st.ReleaseKeys = filepath.Join(filepath.Dir(f.keys), "missing")
	if err := release.Check(f.ctx, f.led, st, seq); !errors.Is(err, release.ErrReleaseKeys) {
		t.Errorf("unreadable keys folder: %v", err)
	}
	if _, err := release.Record(f.ctx, f.led, "x.yaml", "station", nil, release.Request{Key: f.qe, Trust: f.trust, Decision: release.Approve}); !errors.Is(err, release.ErrNotReleasable) {
		t.Errorf("a station file was released: %v", err)
	}
}

// A signed release whose meaning says "rejected" never put a file in force.
func TestRejectedMeaningIsNoRelease(t *testing.T) {
	f := newFixture(t)
	data := []byte("sequence: rejected\n")
	f.raw(t, f.qe, release.Release{File: "s.yaml", Kind: release.KindSequence, SHA256: hexSHA(data), By: "A. Quality", Meaning: "rejected"})
	if f.inForce(t, data) {
		t.Error("a signed release meaning rejected put the file in force")
	}
	f.raw(t, f.qe, release.Release{File: "s.yaml", Kind: release.KindSequence, SHA256: hexSHA(data), By: "A. Quality", Meaning: "looked at it"})
	if f.inForce(t, data) {
		t.Error("a meaning that states no decision put the file in force")
	}
}

// An unsigned entry, or one signed by an untrusted key, written after a trusted
// approval changes nothing: the file stays in force.
func TestLaterUnsignedEntryChangesNothing(t *testing.T) {
	f := newFixture(t)
	data := []byte("sequence: approved\n")
	f.decide(t, data, release.Approve)
	f.raw(t, nil, release.Release{File: "s.yaml", Kind: release.KindSequence, SHA256: hexSHA(data), By: "A. Quality", Decision: release.Withdraw, Meaning: "withdrawn"})
	f.raw(t, f.other, release.Release{File: "s.yaml", Kind: release.KindSequence, SHA256: hexSHA(data), By: "A. Quality", Decision: release.Reject, Meaning: "rejected"})
	f.raw(t, nil, release.Release{File: "s.yaml", Kind: release.KindSequence, SHA256: hexSHA(data), By: "A. Quality", Meaning: "draft"})
	if !f.inForce(t, data) {
		t.Error("a later unsigned or untrusted entry took a trusted approval out of force")
	}
	other := []byte("sequence: never approved\n")
	f.raw(t, f.other, release.Release{File: "s.yaml", Kind: release.KindSequence, SHA256: hexSHA(other), By: "A. Quality", Decision: release.Approve, Meaning: "approved"})
	if f.inForce(t, other) {
		t.Error("an approval signed by an untrusted key put a file in force")
	}
}

// A later signed rejection or withdrawal by a trusted approver revokes an
// approval; a later approval puts the file back in force.
func TestSignedRejectionRevokes(t *testing.T) {
	for _, d := range []string{release.Reject, release.Withdraw} {
		f := newFixture(t)
		data := []byte("sequence: " + d + "\n")
		f.decide(t, data, release.Approve)
		if !f.inForce(t, data) {
			t.Fatal("approved file not in force")
		}
		r := f.decide(t, data, d)
		if r.By != "A. Quality" || r.Meaning != release.DefaultMeaning(d) {
			t.Errorf("%s recorded as %+v", d, r)
		}
		if f.inForce(t, data) {
			t.Errorf("a signed %s left the file in force", d)
		}
		f.decide(t, data, release.Approve)
		if !f.inForce(t, data) {
			t.Errorf("approved again after %s: not in force", d)
		}
	}
}

// Record refuses a key no trust names, an approver who may not release, and a
// decision it does not know; the name recorded is the trust entry's.
func TestRecordTrust(t *testing.T) {
	f := newFixture(t)
	data := []byte("sequence: x\n")
	req := release.Request{Key: f.other, Trust: f.trust, Decision: release.Approve}
	if _, err := release.Record(f.ctx, f.led, "s.yaml", release.KindSequence, data, req); !errors.Is(err, release.ErrUntrusted) ||
		!strings.Contains(err.Error(), f.other.ID()) {
		t.Errorf("untrusted key: %v", err)
	}
	req.Key, req.Decision = f.qe, "approved"
	if _, err := release.Record(f.ctx, f.led, "s.yaml", release.KindSequence, data, req); !errors.Is(err, release.ErrDecision) {
		t.Errorf("unknown decision: %v", err)
	}
	dir := t.TempDir()
	keyIn(t, filepath.Join(dir, "approvers"), "qe") // the trust file's approver, by its public key
	voider := filepath.Join(dir, "trust.yaml")
	writeFile(t, voider, "trust:\n  approvers:\n    - {name: Vera Voider, public_key: approvers/qe.pub, may: [void]}\n")
	tr, err := release.Approvers(voider)
	if err != nil {
		t.Fatal(err)
	}
	k, err := signing.Load(filepath.Join(dir, "approvers", "qe.key"))
	if err != nil {
		t.Fatal(err)
	}
	if _, err := release.Record(f.ctx, f.led, "s.yaml", release.KindSequence, data, release.Request{Key: k, Trust: tr, Decision: release.Approve}); !errors.Is(err, release.ErrUntrusted) ||
		!strings.Contains(err.Error(), "Vera Voider") {
		t.Errorf("an approver who may only void released: %v", err)
	}
}

// A limit file that lint finds errors in is not approved; it may be rejected.
func TestRecordLintsLimits(t *testing.T) {
	f := newFixture(t)
	bad := []byte(`limit_set: {name: T, revision: "1", product: P}
limits:
  - name: noise
    description: Output noise after trim.
    unit: uV
    uses: [post_noise]
    tolerance: {upper: -1}
`)
	ranges := map[string][2]float64{"post_noise": {0, 1}}
	req := release.Request{Key: f.qe, Trust: f.trust, Decision: release.Approve, Ranges: ranges}
	_, err := release.Record(f.ctx, f.led, "l.yaml", release.KindLimits, bad, req)
	var le *release.LintError
	if !errors.Is(err, release.ErrLint) || !errors.As(err, &le) || len(le.Findings) != 1 || !strings.Contains(err.Error(), "never pass") {
		t.Fatalf("a limit file that can never pass: %v", err)
	}
	req.Decision = release.Reject
	if _, err := release.Record(f.ctx, f.led, "l.yaml", release.KindLimits, bad, req); err != nil {
		t.Errorf("rejecting it: %v", err)
	}
}

func writeFile(t *testing.T, path, text string) {
	t.Helper()
	if err := os.WriteFile(path, []byte(text), 0o600); err != nil {
		t.Fatal(err)
	}
}
