package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

// copyWith copies src to dst with each old string of pairs replaced by the new.
func copyWith(t *testing.T, src, dst string, pairs ...string) string {
	t.Helper()
	data, err := os.ReadFile(src)
	if err != nil {
		t.Fatal(err)
	}
	text := string(data)
	for i := 0; i < len(pairs); i += 2 {
		if !strings.Contains(text, pairs[i]) {
			t.Fatalf("%s lacks %q", src, pairs[i])
		}
		text = strings.Replace(text, pairs[i], pairs[i+1], 1)
	}
	if err := os.MkdirAll(filepath.Dir(dst), 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(dst, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	return dst
}

// Lint's result catalogue comes from the product's steps: the sequence given with
// --sequence, else the sequences beside the limit file that name it, else the
// first layout's with a note on stderr.
func TestLintCatalogueComesFromTheSteps(t *testing.T) {
	dir := t.TempDir()
	station, sequence, err := writeDemoFiles(filepath.Join(dir, "demo"), 1, time.Now())
	if err != nil {
		t.Fatal(err)
	}
	demoLimits := filepath.Join(dir, "demo", "brx200-limits.yaml")

	// Beside its sequence: found, no note.
	code, out, errOut := runCLI(t, "limits", "lint", demoLimits)
	if code != 0 || out != "ok  "+demoLimits+"\n" || errOut != "" {
		t.Fatalf("demo limit file beside its sequence: exit %d\nstdout:\n%s\nstderr:\n%s", code, out, errOut)
	}

	// Alone in a folder: the first layout's names, and a note that says so.
	alone := copyWith(t, demoLimits, filepath.Join(dir, "alone", "brx200-limits.yaml"))
	code, out, errOut = runCLI(t, "limits", "lint", alone)
	if code != 0 || !strings.Contains(errOut, "note: no sequence file beside brx200-limits.yaml names it") ||
		!strings.Contains(errOut, "give --sequence") || strings.Contains(out, "note:") {
		t.Fatalf("limit file alone: exit %d\nstdout:\n%s\nstderr:\n%s", code, out, errOut)
	}

	// A result only a custom sequence's step declares: known with --sequence, an
	// unknown name without.
	custom := copyWith(t, sequence, filepath.Join(dir, "custom", "custom-sequence.yaml"),
		"      noise: post_noise", "      noise: output_noise_rms",
		"limits: brx200-limits.yaml", "limits: custom-limits.yaml")
	customLimits := copyWith(t, demoLimits, filepath.Join(dir, "limits-only", "custom-limits.yaml"),
		"uses: [post_noise]", "uses: [output_noise_rms]")
	code, out, errOut = runCLI(t, "limits", "lint", "--sequence", custom, customLimits)
	if code != 0 || out != "ok  "+customLimits+"\n" || errOut != "" {
		t.Fatalf("custom result with --sequence: exit %d\nstdout:\n%s\nstderr:\n%s", code, out, errOut)
	}
	code, out, errOut = runCLI(t, "limits", "lint", customLimits)
	if code != exitUsage || !strings.Contains(out, "custom-limits.yaml:78:") || !strings.Contains(out, "output_noise_rms") ||
		!strings.Contains(errOut, "note: no sequence file beside custom-limits.yaml names it") {
		t.Fatalf("custom result without --sequence: exit %d\nstdout:\n%s\nstderr:\n%s", code, out, errOut)
	}

	// The sequence's own limit file, broken: lint still reads the sequence's steps
	// (with the station, for the TUR) and reports the limit file's problems.
	broken := copyWith(t, demoLimits, filepath.Join(dir, "broken", "brx200-limits.yaml"),
		"uses: [post_offset]", "uses: [post_ofset]")
	brokenSeq := copyWith(t, sequence, filepath.Join(dir, "broken", "brx200-sequence.yaml"))
	code, out, errOut = runCLI(t, "limits", "lint", "--sequence", brokenSeq, "--station", station, broken)
	if code != exitUsage || !strings.Contains(out, "brx200-limits.yaml:58:") || !strings.Contains(out, "post_ofset") {
		t.Fatalf("lint of the sequence's own broken limit file: exit %d\nstdout:\n%s\nstderr:\n%s", code, out, errOut)
	}

	// The TUR the station reaches is predicted from the steps (with the demo's
	// zero check in place of the source's offset spec: 20 µV / (2 · 96.2 µV)).
	tight := copyWith(t, demoLimits, filepath.Join(dir, "tight", "brx200-limits.yaml"),
		"tolerance: {lower: -800, upper: 800}", "tolerance: {lower: -10, upper: 10}")
	// The TUR three significant digits, rounded down below the minimum (units.FormatTUR).
	code, out, errOut = runCLI(t, "limits", "lint", "--sequence", sequence, "--station", station, tight)
	if code != 0 || !strings.Contains(out, `brx200-limits.yaml:59:16: warning: limit "offset after trim": tolerance −10 … 10 µV is tighter than the station can verify: TUR 0.103:1`) {
		t.Fatalf("TUR from the steps: exit %d\nstdout:\n%s\nstderr:\n%s", code, out, errOut)
	}
}

// check says, as lint does, when a limit file's names are checked against the
// first layout's because no sequence beside it names it.
func TestCheckNotesALimitFileAlone(t *testing.T) {
	dir := t.TempDir()
	if _, _, err := writeDemoFiles(filepath.Join(dir, "demo"), 1, time.Now()); err != nil {
		t.Fatal(err)
	}
	demoLimits := filepath.Join(dir, "demo", "brx200-limits.yaml")
	if code, out, errOut := runCLI(t, "check", demoLimits); code != 0 || errOut != "" {
		t.Fatalf("beside its sequence: exit %d\n%s\n%s", code, out, errOut)
	}
	alone := copyWith(t, demoLimits, filepath.Join(dir, "alone", "brx200-limits.yaml"))
	code, out, errOut := runCLI(t, "check", alone)
	if code != 0 || out != "ok  "+alone+" (limits)\n" || !strings.HasPrefix(errOut, "note: no sequence file beside brx200-limits.yaml names it") {
		t.Fatalf("alone: exit %d\nstdout:\n%s\nstderr:\n%s", code, out, errOut)
	}
}
