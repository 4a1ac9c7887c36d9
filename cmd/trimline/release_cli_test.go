package main

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"trimline/reports/signing"
)

// releaseFixture writes the demo files into a fresh folder: the station (whose
// release_keys is the demo's trust file), the sequence, the limit file and the
// demo approver's key.
func releaseFixture(t *testing.T) (dir, station, sequence, limits, qeKey string) {
	t.Helper()
	dir = t.TempDir()
	station, sequence, err := writeDemoFiles(dir, 1, testNow())
	if err != nil {
		t.Fatal(err)
	}
	return dir, station, sequence, filepath.Join(dir, "brx200-limits.yaml"), filepath.Join(dir, "keys", "approvers", "demo-qe.key")
}

func approveBoth(t *testing.T, station, sequence, limits, key string) {
	t.Helper()
	for _, f := range []string{sequence, limits} {
		if code, out, errOut := runCLI(t, "limits", "release", f, "--decision", "approve", "--key", key, "--station", station); code != 0 {
			t.Fatalf("approve %s: exit %d\n%s%s", f, code, out, errOut)
		}
	}
}

// A rejection is not a release: production refuses a file whose last signed
// decision rejects or withdraws it, and a meaning that contradicts the decision
// is refused.
func TestReleaseRejectedIsNotInForce(t *testing.T) {
	_, station, sequence, limits, key := releaseFixture(t)
	if code, _, errOut := runCLI(t, "limits", "release", limits, "--decision", "approve", "--meaning", "rejected", "--key", key, "--station", station); code != exitUsage ||
		!strings.Contains(errOut, "says reject") {
		t.Fatalf("approve meaning rejected: exit %d %s", code, errOut)
	}
	approveBoth(t, station, sequence, limits, key)
	if code, out, errOut := runCLI(t, "run", "--station", station, "--sequence", sequence, "--serial", "BRX-00011"); code != 0 {
		t.Fatalf("approved: exit %d\n%s%s", code, out, errOut)
	}
	for i, d := range []string{"reject", "withdraw"} {
		code, out, errOut := runCLI(t, "limits", "release", limits, "--decision", d, "--key", key, "--station", station)
		if code != 0 || !strings.Contains(out, "not in force") {
			t.Fatalf("%s: exit %d\n%s%s", d, code, out, errOut)
		}
		code, _, errOut = runCLI(t, "run", "--station", station, "--sequence", sequence, "--serial", "BRX-0002"+string(rune('0'+i)))
		if code != exitUsage || !strings.Contains(errOut, "not released by a trusted approver") || !strings.Contains(errOut, "brx200-limits.yaml") {
			t.Fatalf("production ran on a file after %s: exit %d %s", d, code, errOut)
		}
		approveBoth(t, station, sequence, limits, key)
	}
}

// release lints a limit file, with the sequence's physical ranges: a file that
// can never pass is not approved, and nothing is recorded.
func TestReleaseRefusesLintErrors(t *testing.T) {
	dir, station, sequence, limits, key := releaseFixture(t)
	data, _ := os.ReadFile(limits)
	data = bytes.Replace(data, []byte("tolerance: {lower: -20, upper: 20}"), []byte("tolerance: {lower: 20000, upper: 30000}"), 1)
	data = bytes.Replace(data, []byte("tolerance: {upper: 0.01}"), []byte("tolerance: {upper: -1}"), 1)
	bad := filepath.Join(dir, "bad-limits.yaml")
	if err := os.WriteFile(bad, data, 0o644); err != nil {
		t.Fatal(err)
	}
	code, out, errOut := runCLI(t, "limits", "release", bad, "--decision", "approve", "--key", key, "--station", station, "--sequence", sequence)
	if code != exitUsage || !strings.Contains(errOut, "2 error(s)") || strings.Count(errOut, "can never pass") != 2 {
		t.Fatalf("a limit file that can never pass: exit %d\n%s%s", code, out, errOut)
	}
	if code, out, errOut := runCLI(t, "limits", "release", bad, "--decision", "reject", "--key", key, "--station", station); code != 0 {
		t.Errorf("rejecting it: exit %d\n%s%s", code, out, errOut)
	}
}

// A key that no trust names is refused when it signs, with a message that says
// so; so is an approver whose --by disagrees with their trust entry, and the
// name recorded is the trust entry's.
func TestReleaseTrustAndName(t *testing.T) {
	dir, station, _, limits, key := releaseFixture(t)
	stranger, _, err := signing.Init(filepath.Join(dir, "elsewhere"), "stranger")
	if err != nil {
		t.Fatal(err)
	}
	code, _, errOut := runCLI(t, "limits", "release", limits, "--decision", "approve", "--key", stranger, "--station", station)
	if code != exitUsage || !strings.Contains(errOut, "not an approver's") || !strings.Contains(errOut, "trust.yaml") {
		t.Fatalf("untrusted key: exit %d %s", code, errOut)
	}
	code, _, errOut = runCLI(t, "limits", "release", limits, "--decision", "approve", "--key", key, "--station", station, "--by", "Someone Else")
	if code != exitUsage || !strings.Contains(errOut, "Demo Quality Engineer") {
		t.Fatalf("--by disagreeing with the trust entry: exit %d %s", code, errOut)
	}
	code, out, errOut := runCLI(t, "limits", "release", limits, "--decision", "approve", "--key", key, "--station", station, "--by", "Demo Quality Engineer")
	if code != 0 || !strings.Contains(out, "Demo Quality Engineer — approved") {
		t.Fatalf("--by agreeing: exit %d\n%s%s", code, out, errOut)
	}
	// Without a station, the approvers come from --trust; without either, nobody is trusted.
	lp := filepath.Join(dir, "other.db")
	if code, _, errOut := runCLI(t, "limits", "release", limits, "--decision", "approve", "--key", key, "--ledger", lp); code != exitUsage || !strings.Contains(errOut, "--trust") {
		t.Fatalf("no trust: exit %d %s", code, errOut)
	}
	if code, out, errOut := runCLI(t, "limits", "release", limits, "--decision", "approve", "--key", key, "--ledger", lp, "--trust", filepath.Join(dir, "keys", "trust.yaml")); code != 0 {
		t.Fatalf("--trust: exit %d\n%s%s", code, out, errOut)
	}
}
