package limits_test

import (
	"os"
	"strings"
	"testing"

	"trimline/limits"
)

// lintHeader is lines 1–2 of every hand-made file below; the first entry's "-" is
// on line 3, column 3.
const lintHeader = "limit_set: {name: T, revision: \"1\", product: P}\nlimits:\n"

// lintRanges are physical ranges in SI: ±5 V outputs, noise up to 1 V rms, 12-bit
// codes, ratios ±100 %.
var lintRanges = map[string][2]float64{
	"pre_offset": {-5, 5}, "post_offset": {-5, 5}, "post_max_error": {0, 5}, "post_noise": {0, 1},
	"offset_code": {0, 4095}, "gain_code": {0, 4095},
	"pre_gain_error": {-1, 1}, "post_gain_error": {-1, 1}, "pre_nonlinearity": {0, 1}, "post_nonlinearity": {0, 1},
}

type wantFinding struct {
	line, col int
	severity  string
	code      string
	msg       string // a part of the message
}

func TestLint(t *testing.T) {
	turOnly := limits.LintOptions{TUR: map[string]limits.Value{"post_offset": {U: 30e-6, K: 2}}}
	ranges := limits.LintOptions{Ranges: lintRanges}
	tests := []struct {
		name   string
		body   string // after lintHeader
		opt    limits.LintOptions
		want   []wantFinding
		source string
	}{
		{"unknown result", `
  - name: offset
    description: Offset after trim, output-referred.
    unit: uV
    uses: [post_ofset]
    expr: abs(post_ofset) <= 60
`[1:], ranges, []wantFinding{{6, 12, "error", "unknown-result", `unknown result name "post_ofset"`}},
			"hand-made: line 6 `    uses: [post_ofset]`, the name after [ at column 12"},
		{"unit does not fit", `
  - name: code
    description: Offset trim code written.
    unit: mV
    uses: [offset_code]
    expr: offset_code <= 4000
`[1:], ranges, []wantFinding{{5, 11, "error", "unit-mismatch", `unit "mV" is a voltage`}},
			"hand-made: line 5 `    unit: mV`, the value at column 11"},
		{"empty and missing description", `
  - name: a
    description: ""
    unit: uV
    uses: [post_offset]
    expr: abs(post_offset) <= 60
  - name: b
    unit: uV
    uses: [post_offset]
    expr: abs(post_offset) <= 70
`[1:], limits.LintOptions{}, []wantFinding{
			{4, 18, "error", "no-description", `"description" is empty`},
			{8, 3, "error", "no-description", `missing required key "description"`},
		}, "hand-made: the empty string at line 4 column 18; entry b's \"-\" at line 8 column 3"},
		{"tolerance below the range", `
  - name: noise
    description: Output noise after trim.
    unit: uV
    uses: [post_noise]
    tolerance: {upper: -1}
`[1:], ranges, []wantFinding{{7, 24, "error", "never-passes", "upper tolerance −1 µV is below the physical range of post_noise"}},
			"hand-worked: −1 µV < 0 V; `    tolerance: {upper: -1}` has -1 at column 24"},
		{"tolerance above the range", `
  - name: offset
    description: Output error at zero input after trim.
    unit: mV
    uses: [post_offset]
    tolerance: {lower: 6000}
`[1:], ranges, []wantFinding{{7, 24, "error", "never-passes", "lower tolerance 6000 mV is above the physical range"}},
			"hand-worked: 6000 mV = 6 V > 5 V; 6000 at column 24"},
		{"tolerance covers the range", `
  - name: offset
    description: Output error at zero input after trim.
    unit: V
    uses: [post_offset]
    tolerance: {lower: -10, upper: 10}
`[1:], ranges, []wantFinding{{7, 16, "warning", "never-fails", "tolerance −10 … 10 V covers the whole physical range of post_offset (−5 … 5 V)"}},
			"hand-worked: −10 … 10 V ⊇ −5 … 5 V; the { at column 16"},
		{"no range, no reach check", `
  - name: offset
    description: Output error at zero input after trim.
    unit: V
    uses: [post_offset]
    tolerance: {lower: -10, upper: 10}
`[1:], limits.LintOptions{}, nil, "contract: the reach checks need Ranges"},
		{"expression false everywhere", `
  - name: code
    description: Offset trim code written.
    unit: code
    uses: [offset_code]
    expr: offset_code > 5000
`[1:], ranges, []wantFinding{{7, 11, "error", "never-passes", "offset_code > 5000 is false everywhere over the physical range (offset_code 0 … 4095 code)"}},
			"hand-worked: every code ≤ 4095; the expression at column 11"},
		{"expression over two results true everywhere", `
  - name: codes
    description: Trim codes written.
    unit: code
    uses: [offset_code, gain_code]
    expr: offset_code >= 0 && gain_code <= 4095
`[1:], ranges, []wantFinding{{7, 11, "warning", "never-fails", "true everywhere"}},
			"hand-worked: true on all of 0 … 4095 × 0 … 4095"},
		{"expression true at one value only is not constant", `
  - name: code
    description: The offset code is exactly mid-scale.
    unit: code
    uses: [offset_code]
    expr: offset_code == 512
`[1:], ranges, nil, "hand-worked: 512 is not on the 201-point grid (step 20.475) but is a constant of the expression"},
		{"contradictory tolerances", `
  - name: offset
    description: Output error at zero input after trim.
    unit: uV
    uses: [post_offset]
    tolerance: {lower: -50, upper: 50}
  - name: offset high
    description: Output error at zero input after trim, must be high.
    unit: uV
    uses: [post_offset]
    tolerance: {lower: 60, upper: 100}
`[1:], limits.LintOptions{}, []wantFinding{{8, 3, "error", "contradictory", "no value passes both"}},
			"hand-worked: −50 … 50 ∩ 60 … 100 = ∅; second entry at line 8"},
		{"nested: expression read as bounds", `
  - name: offset
    description: Output error at zero input after trim.
    unit: uV
    uses: [post_offset]
    tolerance: {lower: -50, upper: 50}
  - name: offset coarse
    description: Output error at zero input after trim, coarse.
    unit: mV
    uses: [post_offset]
    expr: abs(post_offset) <= 0.8
`[1:], limits.LintOptions{}, []wantFinding{{8, 3, "warning", "redundant", `limit "offset coarse" (line 8, −0.8 … 0.8 mV) on post_offset contains "offset"`}},
			"hand-worked: −50 … 50 µV ⊂ −800 … 800 µV"},
		{"same bounds twice", `
  - name: offset
    description: Output error at zero input after trim.
    unit: uV
    uses: [post_offset]
    tolerance: {lower: -50, upper: 50}
  - name: offset again
    description: Output error at zero input after trim, in mV.
    unit: mV
    uses: [post_offset]
    tolerance: {lower: -0.05, upper: 0.05}
    rule: guarded
`[1:], limits.LintOptions{}, []wantFinding{{8, 3, "warning", "redundant", "repeats the bounds"}},
			"hand-worked: 0.05 mV = 50 µV; their rules differ (simple, guarded)"},
		{"partial overlap", `
  - name: offset
    description: Output error at zero input after trim.
    unit: uV
    uses: [post_offset]
    tolerance: {lower: -50, upper: 50}
  - name: offset positive
    description: Output error at zero input after trim, positive.
    unit: uV
    uses: [post_offset]
    tolerance: {lower: 0, upper: 100}
`[1:], limits.LintOptions{}, []wantFinding{{8, 3, "warning", "overlap", "only 0 … 50 µV passes both"}},
			"hand-worked: −50 … 50 ∩ 0 … 100 = 0 … 50"},
		{"TUR below the minimum", `
  - name: offset
    description: Output error at zero input after trim.
    unit: uV
    uses: [post_offset]
    tolerance: {lower: -50, upper: 50}
`[1:], turOnly, []wantFinding{{7, 16, "warning", "tur-low", "TUR 1.70:1 with U95 = 29.4 µV, below the minimum 4:1"}},
			"hand-worked: U = 30 µV at k = 2, u = 15 µV, U95 = 1.96·15 = 29.4 µV, TUR = 100/58.8 = 1.70 < 4"},
		{"TUR below the minimum, refuse", `
  - name: offset
    description: Output error at zero input after trim.
    unit: uV
    uses: [post_offset]
    tolerance: {lower: -50, upper: 50}
decision: {tur_policy: refuse}
`[1:], turOnly, []wantFinding{{7, 16, "error", "tur-low", "tur_policy: refuse"}},
			"hand-worked: as above, tur_policy refuse makes it an error"},
		{"TUR without uncertainty for the result", `
  - name: offset
    description: Output error at zero input after trim.
    unit: uV
    uses: [post_offset]
    tolerance: {lower: -50, upper: 50}
`[1:], limits.LintOptions{TUR: map[string]limits.Value{"post_noise": {U: 1e-6, K: 2}}}, nil,
			"contract: only results listed in TUR are checked"},
		{"weak description and bare ratio", `
  - name: gain
    description: gain
    unit: ""
    uses: [post_gain_error]
    expr: abs(post_gain_error) <= 0.0005
`[1:], limits.LintOptions{}, []wantFinding{
			{4, 18, "warning", "weak-description", `description "gain" does not say`},
			{5, 11, "warning", "bare-ratio", "as a plain fraction"},
		}, "hand-made: description at line 4 column 18, unit at line 5 column 11"},
		{"a broken entry does not hide the others", `
  - name: offset
    description: Output error at zero input after trim.
    unit: uV
    uses: [post_ofset]
    expr: abs(post_ofset) <= 60
  - name: noise
    description: Output noise after trim.
    unit: uV
    uses: [post_noise]
    tolerance: {upper: -1}
`[1:], ranges, []wantFinding{
			{6, 12, "error", "unknown-result", "unknown result name"},
			{12, 24, "error", "never-passes", "can never pass"},
		}, "hand-made: entry 1 does not load; entry 2 is still checked"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			src := lintHeader + tc.body
			got := limits.Lint("t.yaml", []byte(src), catalog, tc.opt)
			if len(got) != len(tc.want) {
				t.Fatalf("%d findings, want %d (%s):\n%s", len(got), len(tc.want), tc.source, findings(got))
			}
			for i, w := range tc.want {
				g := got[i]
				if g.File != "t.yaml" || g.Line != w.line || g.Col != w.col || g.Severity != w.severity || g.Code != w.code || !strings.Contains(g.Msg, w.msg) {
					t.Errorf("finding %d = %s [%s]\nwant t.yaml:%d:%d: %s [%s] containing %q (%s)", i, g.Error(), g.Code, w.line, w.col, w.severity, w.code, w.msg, tc.source)
				}
			}
		})
	}
}

func findings(fs []limits.Finding) string {
	var b strings.Builder
	for _, f := range fs {
		b.WriteString("  " + f.Error() + " [" + f.Code + "]\n")
	}
	return b.String()
}

func TestLintNotALimitFile(t *testing.T) {
	got := limits.Lint("s.yaml", []byte("station: {name: x}\n"), catalog, limits.LintOptions{})
	if len(got) != 1 || got[0].Line != 1 || got[0].Col != 1 || got[0].Severity != "error" || got[0].Code != "load" ||
		!strings.Contains(got[0].Msg, "not a limit file") {
		t.Fatalf("got:\n%s\nwant one load error at 1:1 (contract: Load's single error)", findings(got))
	}
}

func TestFindingError(t *testing.T) {
	f := limits.Finding{File: "a.yaml", Line: 7, Col: 16, Severity: "warning", Code: "tur-low", Msg: "too tight"}
	if got, want := f.Error(), "a.yaml:7:16: warning: too tight"; got != want {
		t.Errorf("Error() = %q, want %q (contract: file:line:col: severity: msg)", got, want)
	}
}

// The demo limit file is clean over realistic ranges and the uncertainties its
// comments give (U(post_offset) ≈ 150 µV at k = 2, and so on).
func TestLintDemoFileClean(t *testing.T) {
	data, err := os.ReadFile("../sequences/brx200-limits.yaml")
	if err != nil {
		t.Fatal(err)
	}
	opt := limits.LintOptions{Ranges: lintRanges, TUR: map[string]limits.Value{
		"pre_offset": {U: 20e-6, K: 2}, "pre_gain_error": {U: 50e-6, K: 2},
		"post_offset": {U: 150e-6, K: 2}, "post_gain_error": {U: 40e-6, K: 2},
	}}
	if got := limits.Lint("brx200-limits.yaml", data, catalog, opt); len(got) != 0 {
		t.Errorf("findings on the demo file, want none (hand-worked: TUR ≥ 5.4:1, every tolerance inside its range):\n%s", findings(got))
	}
}
