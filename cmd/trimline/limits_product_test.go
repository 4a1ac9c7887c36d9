package main

import (
	"path/filepath"
	"strings"
	"testing"
)

// ofx10Draft copies the OFX-10 files to a folder with the pre-trim offset renamed
// zero_found (a result name only that product's steps declare), and a draft
// revision of its limit file beside them that no sequence names.
func ofx10Draft(t *testing.T) (dir, released, draft, sequence string) {
	t.Helper()
	dir = t.TempDir()
	src := filepath.Join("..", "..", "sequencer", "testdata", "ofx10")
	copyWith(t, filepath.Join(src, "ofx10-station.yaml"), filepath.Join(dir, "ofx10-station.yaml"))
	sequence = copyWith(t, filepath.Join(src, "ofx10-sequence.yaml"), filepath.Join(dir, "ofx10-sequence.yaml"),
		"offset: pre_offset", "offset: zero_found")
	released = copyWith(t, filepath.Join(src, "ofx10-limits.yaml"), filepath.Join(dir, "ofx10-limits.yaml"),
		"uses: [pre_offset]", "uses: [zero_found]")
	draft = copyWith(t, released, filepath.Join(dir, "ofx10-limits-rev2.yaml"))
	return dir, released, draft, sequence
}

// A draft revision of a product's limits, which no sequence names, is read
// against the steps of the sequence beside it for the same product.
func TestLimitsDiffReadsADraftAgainstItsProduct(t *testing.T) {
	_, released, draft, _ := ofx10Draft(t)
	code, out, errOut := runCLI(t, "limits", "diff", released, draft)
	if code != 0 || !strings.Contains(out, "no semantic change") {
		t.Fatalf("diff of a draft beside its product's sequence: exit %d\nstdout:\n%s\nstderr:\n%s", code, out, errOut)
	}
}

// With --sequence, both files are read against that sequence's steps, wherever
// they lie.
func TestLimitsDiffSequenceFlag(t *testing.T) {
	_, released, draft, sequence := ofx10Draft(t)
	elsewhere := copyWith(t, draft, filepath.Join(t.TempDir(), "draft.yaml"))
	code, out, errOut := runCLI(t, "limits", "diff", released, elsewhere)
	if code != 2 || !strings.Contains(errOut, `"zero_found"`) {
		t.Fatalf("draft away from any sequence, no --sequence: exit %d, want 2 naming zero_found\nstdout:\n%s\nstderr:\n%s", code, out, errOut)
	}
	code, out, errOut = runCLI(t, "limits", "diff", "--sequence", sequence, released, elsewhere)
	if code != 0 || !strings.Contains(out, "no semantic change") {
		t.Fatalf("diff --sequence: exit %d\nstdout:\n%s\nstderr:\n%s", code, out, errOut)
	}
}

// What-if reads the new and old limit files against the product's steps too: it
// gets past loading them to the ledger.
func TestLimitsWhatIfReadsADraftAgainstItsProduct(t *testing.T) {
	dir, released, draft, sequence := ofx10Draft(t)
	ledger := filepath.Join(dir, "none.db")
	for _, args := range [][]string{
		{"limits", "whatif", draft, "--ledger", ledger, "--old", released},
		{"limits", "whatif", copyWith(t, draft, filepath.Join(t.TempDir(), "d.yaml")), "--sequence", sequence, "--ledger", ledger},
	} {
		code, out, errOut := runCLI(t, args...)
		if strings.Contains(errOut, "zero_found") || strings.Contains(errOut, "unknown result") {
			t.Fatalf("%v: exit %d: the limit file was not read against its product\nstdout:\n%s\nstderr:\n%s", args, code, out, errOut)
		}
	}
}

// Check reads a limit file no sequence names against the steps of its product:
// those of a sequence beside it, or given in the same call.
func TestCheckReadsADraftAgainstItsProduct(t *testing.T) {
	dir, _, draft, sequence := ofx10Draft(t)
	code, out, errOut := runCLI(t, "check", dir)
	if code != 0 || !strings.Contains(out, "ok  "+draft+" (limits)") {
		t.Fatalf("check of the folder: exit %d\nstdout:\n%s\nstderr:\n%s", code, out, errOut)
	}
	alone := copyWith(t, draft, filepath.Join(t.TempDir(), "draft.yaml"))
	code, out, errOut = runCLI(t, "check", alone, sequence)
	if code != 0 || !strings.Contains(out, "ok  "+alone+" (limits)") || strings.Contains(errOut, "first layout") {
		t.Fatalf("check of a draft with its product's sequence: exit %d\nstdout:\n%s\nstderr:\n%s", code, out, errOut)
	}
}

// What-if of a draft alone in an empty folder, no --sequence: its result names
// are those the ledger's runs of its product recorded, so it loads and the
// tightened tolerance flips the stored units.
func TestLimitsWhatIfTakesResultNamesFromTheLedger(t *testing.T) {
	dir, _, draft, sequence := ofx10Draft(t)
	args := []string{"run", "--station", filepath.Join(dir, "ofx10-station.yaml"), "--sequence", sequence, "--out", dir}
	for _, sn := range []string{"OFX-0001", "OFX-0002", "OFX-0003"} {
		args = append(args, "--serial", sn)
	}
	if code, out, errOut := runCLI(t, args...); code != 0 {
		t.Fatalf("run: exit %d\n%s%s", code, out, errOut)
	}
	alone := copyWith(t, draft, filepath.Join(t.TempDir(), "draft.yaml"),
		"tolerance: {lower: -1000, upper: 1000}", "tolerance: {lower: -1, upper: 1}")
	code, out, errOut := runCLI(t, "limits", "whatif", alone, "--ledger", filepath.Join(dir, "ledger.db"))
	if code != 0 || !strings.Contains(out, "Units re-judged: 3") || !strings.Contains(out, "pass → review/fail: 3") {
		t.Fatalf("whatif of a draft alone: exit %d\nstdout:\n%s\nstderr:\n%s", code, out, errOut)
	}
}
