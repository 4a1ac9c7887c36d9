package limits_test

import (
	"strings"
	"testing"

	"trimline/instruments/files"
	"trimline/limits"
)

// tolEntry is a toleranced limit entry on post_offset with extra lines; its
// "- name:" is line 6 when it follows header + "limits:\n", and the extra lines
// start at line 10.
func tolEntry(extra ...string) string {
	return entry(append([]string{"name: offset", "description: d", "unit: uV", "uses: [post_offset]"}, extra...)...)
}

// decisionFile is header, a decision section with the given lines (from line 6),
// and one good toleranced limit.
func decisionFile(lines ...string) string {
	var b strings.Builder
	b.WriteString(header + "decision:\n")
	for _, l := range lines {
		b.WriteString("  " + l + "\n")
	}
	return b.String() + "limits:\n" + tolEntry("tolerance: {lower: -50, upper: 50}")
}

// Positions are hand-counted: in "    tolerance: {lower: 50, upper: -50}" the
// "{" is column 16 and the lower value column 24; a decision value after
// "  key: " starts at column len(key) + 5.
func TestLoadDecisionErrors(t *testing.T) {
	tests := []struct {
		name, src, want, msg string
	}{
		{"both expr and tolerance", header + "limits:\n" + tolEntry("expr: abs(post_offset) <= 60", "tolerance: {upper: 60}"),
			"f.yaml:11:5: ", `a limit has either "expr" or "tolerance", not both`},
		{"neither expr nor tolerance", header + "limits:\n" + tolEntry(),
			"f.yaml:6:3: ", `missing required key "expr" or "tolerance"`},
		{"tolerance with two uses", header + "limits:\n" + entry("name: offset", "description: d", "unit: uV",
			"uses: [post_offset, post_noise]", "tolerance: {upper: 60}"),
			"f.yaml:9:11: ", "a toleranced limit judges exactly one result, but uses lists 2 (post_offset, post_noise)"},
		{"lower above upper", header + "limits:\n" + tolEntry("tolerance: {lower: 50, upper: -50}"),
			"f.yaml:10:24: ", "tolerance lower 50 must be below upper -50"},
		{"lower equal to upper", header + "limits:\n" + tolEntry("tolerance: {lower: 50, upper: 50}"),
			"f.yaml:10:24: ", "tolerance lower 50 must be below upper 50"},
		{"tolerance without bounds", header + "limits:\n" + tolEntry("tolerance: {}"),
			"f.yaml:10:16: ", "tolerance needs lower, upper or both"},
		{"tolerance with no value", header + "limits:\n" + tolEntry("tolerance:"),
			"f.yaml:10:5: ", `"tolerance" has no value`},
		{"bound with a unit", header + "limits:\n" + tolEntry("tolerance: {upper: 60 uV}"),
			"f.yaml:10:24: ", `tolerance upper "60 uV" is not a number: write a plain number in the limit's unit (uV)`},
		{"infinite bound", header + "limits:\n" + tolEntry("tolerance: {upper: .inf}"),
			"f.yaml:10:24: ", `tolerance upper "+Inf" is not a number`},
		{"unknown key in tolerance", header + "limits:\n" + tolEntry("tolerance: {uper: 60}"),
			"f.yaml:10:17: ", `unknown field "uper"`},
		{"bad rule in a limit", header + "limits:\n" + tolEntry("tolerance: {upper: 60}", "rule: gaurded"),
			"f.yaml:11:11: ", `unknown rule "gaurded": expected simple or guarded`},
		{"bad statements in a limit", header + "limits:\n" + tolEntry("tolerance: {upper: 60}", "statements: yes-no"),
			"f.yaml:11:17: ", `unknown statements "yes-no": expected binary or non-binary`},
		{"guard factor with the simple rule", header + "limits:\n" + tolEntry("tolerance: {upper: 60}", "rule: simple", "guard_factor: 2"),
			"f.yaml:12:5: ", "guard_factor applies to rule: guarded only, and this limit's rule is simple"},
		{"guard factor zero in a limit", header + "limits:\n" + tolEntry("tolerance: {upper: 60}", "rule: guarded", "guard_factor: 0"),
			"f.yaml:12:19: ", "guard_factor 0 must be a number above 0"},
		{"rule on an expression limit", header + "limits:\n" + tolEntry("expr: abs(post_offset) <= 60", "rule: guarded"),
			"f.yaml:11:5: ", `"rule" applies only to a toleranced limit`},
		{"statements on an expression limit", header + "limits:\n" + tolEntry("expr: abs(post_offset) <= 60", "statements: binary"),
			"f.yaml:11:5: ", `"statements" applies only to a toleranced limit`},
		{"bad file rule", decisionFile("rule: gaurded"),
			"f.yaml:6:9: ", `unknown rule "gaurded": expected simple or guarded`},
		{"bad file statements", decisionFile("statements: two-valued"),
			"f.yaml:6:15: ", `unknown statements "two-valued": expected binary or non-binary`},
		{"bad conditional_pass", decisionFile("conditional_pass: maybe"),
			"f.yaml:6:21: ", `unknown conditional_pass "maybe": expected ship, review or fail`},
		{"ship is no conditional_fail policy", decisionFile("conditional_fail: ship"),
			"f.yaml:6:21: ", `unknown conditional_fail "ship": expected fail or review`},
		{"bad tur_policy", decisionFile("tur_policy: stop"),
			"f.yaml:6:15: ", `unknown tur_policy "stop": expected warn or refuse`},
		{"min_tur zero", decisionFile("min_tur: 0"),
			"f.yaml:6:12: ", "min_tur 0 must be above 0"},
		{"min_tur negative", decisionFile("min_tur: -4"),
			"f.yaml:6:12: ", "min_tur -4 must be above 0"},
		{"min_tur not a number", decisionFile("min_tur: four"),
			"f.yaml:6:12: ", `min_tur "four" is not a number`},
		{"coverage without %", decisionFile("coverage: 95.45"),
			"f.yaml:6:13: ", `coverage "95.45" is not a percentage`},
		{"coverage 100 %", decisionFile("coverage: 100 %"),
			"f.yaml:6:13: ", "coverage 100 % must be above 0 % and below 100 %"},
		{"file guard factor negative", decisionFile("guard_factor: -1"),
			"f.yaml:6:17: ", "guard_factor -1 must be a number above 0"},
		{"unknown decision key", decisionFile("rules: guarded"),
			"f.yaml:6:3: ", `unknown field "rules"`},
		{"decision with no value", header + "decision:\nlimits:\n" + tolEntry("tolerance: {upper: 60}"),
			"f.yaml:5:1: ", `"decision" has no value`},
		{"guard_factor with no value", header + "limits:\n" + tolEntry("tolerance: {upper: 60}", "guard_factor:"),
			"f.yaml:11:5: ", `"guard_factor" has no value`},
		{"lower with no value", header + "limits:\n" + tolEntry("tolerance:", "  lower:", "  upper: 5"),
			"f.yaml:11:7: ", `"lower" has no value`},
		{"rule with no value", decisionFile("rule:"),
			"f.yaml:6:3: ", `"rule" has no value`},
		{"tolerance on a result of another dimension", header + "limits:\n" + entry("name: offset", "description: d",
			"unit: ppm", "uses: [post_offset]", "tolerance: {upper: 60}"),
			"f.yaml:8:11: ", `unit "ppm" is a ratio (ppm or %), but result "post_offset" (uses item 1) is a voltage (V)`},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			set, err := limits.Load("f.yaml", []byte(tc.src), catalog)
			if err == nil {
				t.Fatalf("loaded %+v, want an error", set)
			}
			if set != nil {
				t.Error("a Set came back with the error")
			}
			errs := files.Errs(err)
			if len(errs) != 1 {
				t.Errorf("%d errors, want 1:%s", len(errs), detail(err))
			}
			e := errs[0]
			if got := e.Error(); !strings.HasPrefix(got, tc.want) || !strings.Contains(got, tc.msg) {
				t.Errorf("error\n  %s\nwant prefix %q containing %q (hand-counted)\n%s", got, tc.want, tc.msg, e.Detail())
			}
			if e.Line > 0 && e.Excerpt == "" {
				t.Error("no excerpt")
			}
		})
	}
}

// A decoding problem in the decision section does not hide problems in the limits,
// and the other way round.
func TestLoadDecisionErrorsAllAtOnce(t *testing.T) {
	src := header + "decision:\n  rule: guarded\n  colour: red\n" + "limits:\n" + // lines 5-8
		entry("name: offset", "description: d", "unit: uV", "uses: [post_offset]", "tolerance: {lower: 9, upper: 1}") + // lines 9-13
		entry("name: noise", "description: d", "unit: uV", "uses: [post_noise]", "tolerance: {upper: 60}", "statements: many") // lines 14-19
	_, err := limits.Load("f.yaml", []byte(src), catalog)
	want := []string{ // hand-counted
		`f.yaml:7:3: unknown field "colour"`,
		"f.yaml:13:24: tolerance lower 9 must be below upper 1",
		`f.yaml:19:17: unknown statements "many"`,
	}
	errs := files.Errs(err)
	if len(errs) != len(want) {
		t.Fatalf("%d errors, want %d:%s", len(errs), len(want), detail(err))
	}
	for i, w := range want {
		if !strings.HasPrefix(errs[i].Error(), w) {
			t.Errorf("error %d = %q, want prefix %q", i, errs[i].Error(), w)
		}
	}
}
