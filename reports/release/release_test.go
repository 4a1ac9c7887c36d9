package release_test

import (
	"context"
	"errors"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"trimline/reports/ledger"
	"trimline/reports/release"
	"trimline/reports/signing"
	"trimline/sequencer"
)

// The signed message is part of the ledger format: released files in existing
// ledgers verify only while its bytes stay the same (hand-worked).
func TestMessageBytes(t *testing.T) {
	r := release.Release{SHA256: "ab12", By: "A. Quality", Meaning: "approved",
		At: time.Date(2026, 3, 4, 5, 6, 7, 800, time.FixedZone("x", 3600))}
	want := "trimline-release-v1\nab12\nA. Quality\napproved\n2026-03-04T04:06:07.0000008Z"
	if got := string(release.Message(r)); got != want {
		t.Errorf("message %q, want %q", got, want)
	}
}

// Only a release signed by a trusted key lets production run.
func TestCheck(t *testing.T) {
	ctx := context.Background()
	dir := t.TempDir()
	led, err := ledger.Open(ctx, filepath.Join(dir, "ledger.db"))
	if err != nil {
		t.Fatal(err)
	}
	defer led.Close()
	keys := filepath.Join(dir, "approvers")
	priv, _, err := signing.Init(keys, "qe")
	if err != nil {
		t.Fatal(err)
	}
	key, err := signing.Load(priv)
	if err != nil {
		t.Fatal(err)
	}
	seqData, limData := []byte("sequence: x\n"), []byte("limit_set: y\n")
	ref := func(kind, name string, data []byte) sequencer.FileRef {
		r, err := release.Record(ctx, led, nil, name, kind, data, "nobody", "draft") // unsigned: never counts
		if err != nil {
			t.Fatal(err)
		}
		return sequencer.FileRef{Kind: kind, Name: name, SHA256: r.SHA256}
	}
	st := &sequencer.Station{ReleaseKeys: keys}
	seq := &sequencer.Sequence{File: ref("sequence", "s.yaml", seqData), LimitsFile: ref("limits", "l.yaml", limData)}

	err = release.Check(ctx, led, st, seq)
	var nr *release.NotReleasedError
	if !errors.Is(err, release.ErrNotReleased) || !errors.As(err, &nr) || len(nr.Missing) != 2 ||
		!strings.Contains(err.Error(), "not released by a trusted approver") {
		t.Fatalf("unsigned releases: %v", err)
	}
	if _, err := release.Record(ctx, led, key, "s.yaml", release.KindSequence, seqData, "A. Quality", "approved"); err != nil {
		t.Fatal(err)
	}
	if err := release.Check(ctx, led, st, seq); !errors.As(err, &nr) || len(nr.Missing) != 1 || !strings.Contains(nr.Missing[0], "l.yaml") {
		t.Fatalf("sequence released: %v", err)
	}
	if _, err := release.Record(ctx, led, key, "l.yaml", release.KindLimits, limData, "A. Quality", "approved"); err != nil {
		t.Fatal(err)
	}
	if err := release.Check(ctx, led, st, seq); err != nil {
		t.Fatalf("both released: %v", err)
	}
	st.ReleaseKeys = filepath.Join(dir, "missing")
	if err := release.Check(ctx, led, st, seq); !errors.Is(err, release.ErrReleaseKeys) {
		t.Errorf("unreadable keys folder: %v", err)
	}
	if _, err := release.Record(ctx, led, key, "x.yaml", "station", nil, "A", "approved"); !errors.Is(err, release.ErrNotReleasable) {
		t.Errorf("a station file was released: %v", err)
	}
}
