package sequencer_test

import (
	"errors"
	"fmt"
	"io/fs"
	"strings"
	"testing"

	"trimline/instruments/files"
	_ "trimline/instruments/sim"
	"trimline/sequencer"
	"trimline/sequences"
)

func demoFile(t testing.TB, name string) string {
	t.Helper()
	b, err := fs.ReadFile(sequences.Demo, name)
	if err != nil {
		t.Fatal(err)
	}
	return string(b)
}

// demoReader serves the demo files by base name, with optional replacements.
func demoReader(t testing.TB, over map[string]string) func(string) ([]byte, error) {
	return func(p string) ([]byte, error) {
		name := p[strings.LastIndexAny(p, `/\`)+1:]
		if s, ok := over[name]; ok {
			return []byte(s), nil
		}
		return fs.ReadFile(sequences.Demo, name)
	}
}

// demoFiles parses the demo station and sequence files, the files the sequence
// names served by demoReader with the replacements in over.
func demoFiles(t testing.TB, over map[string]string) (*sequencer.Station, *sequencer.Sequence) {
	t.Helper()
	st, err := sequencer.ParseStation("brx200-station.yaml", []byte(demoFile(t, "brx200-station.yaml")))
	if err != nil {
		t.Fatal(err)
	}
	seq, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(demoFile(t, "brx200-sequence.yaml")), demoReader(t, over))
	if err != nil {
		t.Fatal(err)
	}
	return st, seq
}

// lineOf returns the 1-based line of the first occurrence of needle in text.
func lineOf(t *testing.T, text, needle string) int {
	t.Helper()
	i := strings.Index(text, needle)
	if i < 0 {
		t.Fatalf("%q not in text", needle)
	}
	return strings.Count(text[:i], "\n") + 1
}

func TestDemoFilesLoad(t *testing.T) {
	st, seq := demoFiles(t, nil)
	if err := sequencer.CheckCaps(st, seq); err != nil {
		t.Fatal(err)
	}
	// Units parsed once at the boundary (hand-read from the demo files).
	near(t, "max source voltage", st.MaxSourceVolts, 0.05, 1e-15)
	near(t, "max source current", st.MaxSourceAmps, 0.01, 1e-15)
	near(t, "meter of_reading", st.Instruments["meter"].Accuracy.OfReading, 30e-6, 1e-18)
	ofs, _ := seq.DAC("offset")
	gain, _ := seq.DAC("gain")
	pre, _ := seq.Sweep(sequencer.SweepPreTrim)
	near(t, "offset LSB", ofs.LSB, 12.2e-6, 1e-18)
	near(t, "gain LSB", gain.LSB, 10e-6, 1e-18)
	near(t, "from", pre.From, -0.01, 1e-15)
	if pre.Settle.Milliseconds() != 20 || pre.Points != 11 || seq.Limits == nil || len(seq.Limits.Limits) != 8 {
		t.Errorf("sequence parsed wrong: %+v", pre)
	}
	var kinds []string
	for _, d := range seq.Steps {
		kinds = append(kinds, d.Kind)
	}
	if got := strings.Join(kinds, " "); got != "identify clear_trim zero_check sweep fit trim store sweep fit" {
		t.Errorf("steps %s", got)
	}
	if got := strings.Join(seq.Requires, " "); got != "source meter dut" {
		t.Errorf("requires %s", got)
	}
	if len(st.File.SHA256) != 64 || len(seq.File.SHA256) != 64 {
		t.Error("file hashes missing")
	}
}

// Every error a person can cause in a station or sequence file gets a message that
// names file, line and column.
func TestFileErrorsArePositioned(t *testing.T) {
	station := demoFile(t, "brx200-station.yaml")
	sequence := demoFile(t, "brx200-sequence.yaml")
	cases := []struct {
		name       string
		file       string // "station" or "sequence"
		from, to   string // replacement in the demo file
		needle     string // text on the line the error must point at
		col        int
		msgContain string
	}{
		{"unknown key", "station", "  name: Demo line", "  nmae: Demo line", "nmae:", 3, "unknown field \"nmae\""},
		{"wrong type", "sequence", "    points: 11\n    settle: 20 ms                # wait", "    points: eleven\n    settle: 20 ms                # wait", "points: eleven", 13, "expected a whole number"},
		{"missing required key", "station", "    asset: DMM-0203\n", "", "  meter:", 0, "missing required key \"asset\""},
		{"duplicate key", "station", "    asset: STD-0117 ", "    asset: STD-0118\n    asset: STD-0117 ", "asset: STD-0117 ", 5, "duplicate key"},
		{"bad unit", "station", "max_source_voltage: 50 mV", "max_source_voltage: 50 mX", "50 mX", 23, "unknown unit \"mX\""},
		{"wrong dimension", "sequence", "    settle: 20 ms                # wait", "    settle: 20 mV                # wait", "settle: 20 mV", 13, "expected a time"},
		{"role without a kind", "station", "  dut:", "  fixture_dut:", "fixture_dut:", 3, "missing required key \"kind\" for role \"fixture_dut\""},
		{"unknown instrument kind", "station", "  dut:", "  dut:\n    kind: dut_socket", "kind: dut_socket", 11, "unknown instrument kind \"dut_socket\""},
		{"role the steps use but requires omits", "sequence", "requires: [source, meter, dut]", "requires: [source, meter, dvm]", "requires:", 11, "the steps use the \"dut\" role, which requires does not list"},
		{"unknown step kind", "sequence", "  - kind: store", "  - kind: save", "kind: save", 11, "unknown step kind \"save\" (expected one of clear_trim, coefficients, command, fit, identify, "},
		{"fit of a sweep that comes later", "sequence", "    sweep: pre-trim\n", "    sweep: verify\n", "sweep: verify", 12, "no earlier sweep step called \"verify\""},
		{"unknown DAC in a trim", "sequence", "      gain: gain_code", "      gian: gain_code", "gian: gain_code", 13, "no trim DAC \"gian\""},
		{"skip_if over a later result", "sequence", "    command: \"NV STORE\"\n", "    command: \"NV STORE\"\n    skip_if: post_offset > 0\n", "skip_if: post_offset", 14, "unknown name post_offset"},
		{"bad DAC template", "sequence", `write: "TRIM OFS {code}"`, `write: "TRIM OFS"`, `write: "TRIM OFS"`, 12, "{code}"},
		{"bad date", "station", "cal_due: 2027-12-31         # last", "cal_due: 31.12.2027         # last", "31.12.2027", 14, "YYYY-MM-DD"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			src := station
			name := "brx200-station.yaml"
			if c.file == "sequence" {
				src, name = sequence, "brx200-sequence.yaml"
			}
			if !strings.Contains(src, c.from) {
				t.Fatalf("demo file lacks %q", c.from)
			}
			mut := strings.Replace(src, c.from, c.to, 1)
			var err error
			if c.file == "station" {
				_, err = sequencer.ParseStation(name, []byte(mut))
			} else {
				_, err = sequencer.ParseSequence(name, []byte(mut), demoReader(t, nil))
			}
			errs := files.Errs(err)
			if len(errs) == 0 {
				t.Fatalf("no positioned error, got %v", err)
			}
			line := lineOf(t, mut, c.needle)
			found := false
			for _, e := range errs {
				prefix := fmt.Sprintf("%s:%d:", name, line)
				if c.col > 0 {
					prefix = fmt.Sprintf("%s:%d:%d:", name, line, c.col)
				}
				if strings.HasPrefix(e.Error(), prefix) && strings.Contains(e.Msg, c.msgContain) {
					found = true
					if e.Excerpt == "" {
						t.Error("no excerpt")
					}
				}
			}
			if !found {
				t.Errorf("want an error at %s line %d col %d containing %q, got:\n%v", name, line, c.col, c.msgContain, err)
			}
		})
	}
}

func TestLimitFileErrorsSurfaceThroughSequence(t *testing.T) {
	lim := demoFile(t, "brx200-limits.yaml")
	mut := strings.Replace(lim, "uses: [post_offset]", "uses: [post_ofset]", 1)
	_, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(demoFile(t, "brx200-sequence.yaml")), demoReader(t, map[string]string{"brx200-limits.yaml": mut}))
	errs := files.Errs(err)
	if len(errs) == 0 || !strings.Contains(errs[0].Error(), fmt.Sprintf("brx200-limits.yaml:%d:", lineOf(t, mut, "post_ofset"))) ||
		!strings.Contains(errs[0].Msg, "post_ofset") {
		t.Fatalf("want the limit file's positioned error, got %v", err)
	}
}

func TestCapsRefuseSweepBeyondStation(t *testing.T) {
	st, err := sequencer.ParseStation("s.yaml", []byte(strings.Replace(demoFile(t, "brx200-station.yaml"), "max_source_voltage: 50 mV", "max_source_voltage: 5 mV", 1)))
	if err != nil {
		t.Fatal(err)
	}
	seq, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(demoFile(t, "brx200-sequence.yaml")), demoReader(t, nil))
	if err != nil {
		t.Fatal(err)
	}
	err = sequencer.CheckCaps(st, seq)
	if err == nil || !strings.Contains(err.Error(), "brx200-sequence.yaml:") || !strings.Contains(err.Error(), "above the station cap") {
		t.Fatalf("want a cap refusal naming the sequence file, got %v", err)
	}
}

// A limit file's variant applies by the sequence's revision or by name, and the
// run's files record which.
func TestLimitVariantSelection(t *testing.T) {
	lim := demoFile(t, "brx200-limits.yaml") + `
variants:
  - name: grade-H
    description: High-accuracy grade.
    revisions: [C]
    overrides:
      - name: offset after trim
        tolerance: {lower: -400, upper: 400}
`
	read := demoReader(t, map[string]string{"brx200-limits.yaml": lim})
	seq, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(demoFile(t, "brx200-sequence.yaml")), read)
	if err != nil {
		t.Fatal(err)
	}
	if seq.Limits.VariantName != "grade-H" {
		t.Fatalf("revision C picked variant %q, want grade-H", seq.Limits.VariantName)
	}
	bad := strings.Replace(demoFile(t, "brx200-sequence.yaml"), "limits: brx200-limits.yaml", "limits: brx200-limits.yaml\nlimits_variant: grade-X", 1)
	_, err = sequencer.ParseSequence("brx200-sequence.yaml", []byte(bad), read)
	if e := files.Errs(err); len(e) == 0 || !strings.Contains(e[0].Msg, "grade-X") || !strings.HasPrefix(e[0].Error(), fmt.Sprintf("brx200-sequence.yaml:%d:", lineOf(t, bad, "limits_variant"))) {
		t.Fatalf("unknown variant: %v", err)
	}
}

// A role the station does not bind is a misfit of the files, not a safety cap.
func TestCapsUnboundRoleIsNotASafetyError(t *testing.T) {
	st, seq := demoFiles(t, nil)
	delete(st.Instruments, "meter")
	err := sequencer.CheckCaps(st, seq)
	if !errors.Is(err, sequencer.ErrUnboundRole) || errors.Is(err, sequencer.ErrSafety) || !strings.Contains(err.Error(), `requires the "meter" role`) {
		t.Fatalf("want an unbound-role error that is not a safety cap, got %v", err)
	}
	st.MaxSourceVolts = 1e-3
	if err = sequencer.CheckCaps(st, seq); !errors.Is(err, sequencer.ErrUnboundRole) || !errors.Is(err, sequencer.ErrSafety) {
		t.Fatalf("want both a cap and an unbound role, got %v", err)
	}
}
