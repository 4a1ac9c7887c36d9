package limits_test

import (
	"bytes"
	"strconv"
	"strings"
	"testing"

	"trimline/limits"
)

// setOf loads lintHeader + body.
func setOf(t testing.TB, body string) *limits.Set {
	t.Helper()
	s, err := limits.Load("t.yaml", []byte(lintHeader+body), catalog)
	if err != nil {
		t.Fatalf("Load: %s\n%s", detail(err), body)
	}
	return s
}

// offsetLimit is a limit entry named name on post_offset with the given unit and
// key lines (tolerance or expr and any rule keys).
func offsetLimit(name, unit string, keys ...string) string {
	s := "  - name: " + name + "\n    description: Output error at zero input after trim.\n    unit: " + unit +
		"\n    uses: [post_offset]\n"
	for _, k := range keys {
		s += "    " + k + "\n"
	}
	return s
}

type wantChange struct {
	limit, kind, result string
	oldLo, oldHi        *float64 // SI
	newLo, newHi        *float64
	detail              string // a part of Detail
}

func f(v float64) *float64 { return &v }

func TestDiff(t *testing.T) {
	tol := func(lo, hi string) string { return "tolerance: {lower: " + lo + ", upper: " + hi + "}" }
	tests := []struct {
		name     string
		old, new string
		want     []wantChange
		source   string
	}{
		{"tightened", offsetLimit("offset", "uV", tol("-800", "800")), offsetLimit("offset", "uV", tol("-600", "600")),
			[]wantChange{{"offset", "tightened", "post_offset", f(-800e-6), f(800e-6), f(-600e-6), f(600e-6), "lower −800 → −600 µV, upper 800 → 600 µV"}},
			"hand-made pair: ±600 ⊂ ±800 µV"},
		{"loosened, across units", offsetLimit("offset", "uV", tol("-800", "800")), offsetLimit("Offset", "mV", tol("-1", "1")),
			[]wantChange{{"Offset", "loosened", "post_offset", f(-800e-6), f(800e-6), f(-1e-3), f(1e-3), "unit uV → mV"}},
			"hand-made pair: ±800 µV ⊂ ±1 mV; names match ignoring case"},
		{"same bounds in another unit", offsetLimit("offset", "uV", tol("-800", "800")), offsetLimit("offset", "mV", tol("-0.8", "0.8")),
			nil, "hand-made pair: 0.8 mV = 800 µV exactly, compared in SI"},
		{"shifted", offsetLimit("offset", "uV", tol("-800", "800")), offsetLimit("offset", "uV", tol("-700", "900")),
			[]wantChange{{"offset", "shifted", "post_offset", f(-800e-6), f(800e-6), f(-700e-6), f(900e-6), "lower −800 → −700 µV, upper 800 → 900 µV"}},
			"hand-made pair: neither interval inside the other"},
		{"one-sided tightened", offsetLimit("offset", "uV", "tolerance: {upper: 800}"), offsetLimit("offset", "uV", "tolerance: {upper: 700}"),
			[]wantChange{{"offset", "tightened", "post_offset", nil, f(800e-6), nil, f(700e-6), "upper 800 → 700 µV"}},
			"hand-made pair: ≤ 700 ⊂ ≤ 800"},
		{"one-sided to two-sided", offsetLimit("offset", "uV", "tolerance: {upper: 800}"), offsetLimit("offset", "uV", tol("-800", "800")),
			[]wantChange{{"offset", "changed shape", "post_offset", nil, f(800e-6), f(-800e-6), f(800e-6), "upper only → two-sided"}},
			"hand-made pair: a side was added"},
		{"toleranced to expression", offsetLimit("offset", "uV", tol("-800", "800")), offsetLimit("offset", "uV", "expr: abs(post_offset) <= 800"),
			[]wantChange{{"offset", "changed shape", "post_offset", f(-800e-6), f(800e-6), f(-800e-6), f(800e-6), "toleranced → expression: tolerance −800 … 800 µV, simple, binary → expr abs(post_offset) <= 800 (uV) (same bounds)"}},
			"hand-made pair: the decision rule is gone though the bounds are the same"},
		{"another result", offsetLimit("offset", "uV", tol("-800", "800")),
			"  - name: offset\n    description: Output error at zero input before trim.\n    unit: uV\n    uses: [pre_offset]\n    tolerance: {lower: -800, upper: 800}\n",
			[]wantChange{{"offset", "changed shape", "pre_offset", f(-800e-6), f(800e-6), f(-800e-6), f(800e-6), "results post_offset → pre_offset"}},
			"hand-made pair: same bounds on another result"},
		{"added and removed", offsetLimit("offset", "uV", tol("-800", "800")), offsetLimit("offset after trim", "uV", tol("-800", "800")),
			[]wantChange{
				{"offset after trim", "added", "post_offset", nil, nil, f(-800e-6), f(800e-6), "tolerance −800 … 800 µV"},
				{"offset", "removed", "post_offset", f(-800e-6), f(800e-6), nil, nil, ""},
			}, "hand-made pair: renamed, which Diff does not guess: added then removed"},
		{"rule changed", offsetLimit("offset", "uV", tol("-800", "800")), offsetLimit("offset", "uV", tol("-800", "800"), "rule: guarded", "guard_factor: 2", "statements: non-binary"),
			[]wantChange{{"offset", "rule changed", "post_offset", nil, nil, nil, nil, "rule simple → guarded; statements binary → non-binary"}},
			"hand-made pair: bounds the same, the rule not"},
		{"guard factor changed", offsetLimit("offset", "uV", tol("-800", "800"), "rule: guarded"), offsetLimit("offset", "uV", tol("-800", "800"), "rule: guarded", "guard_factor: 2"),
			[]wantChange{{"offset", "rule changed", "post_offset", nil, nil, nil, nil, "guard_factor 1 → 2"}},
			"hand-made pair"},
		{"decision section", offsetLimit("offset", "uV", tol("-800", "800")) + "decision: {coverage: 95.45 %, min_tur: 4}\n",
			offsetLimit("offset", "uV", tol("-800", "800")) + "decision: {coverage: 95 %, min_tur: \"3:1\", conditional_pass: ship, tur_policy: refuse}\n",
			[]wantChange{{"", "rule changed", "", nil, nil, nil, nil, "decision section: coverage 95.45 % → 95 %; conditional_pass review → ship; min_tur 4:1 → 3:1; tur_policy warn → refuse"}},
			"hand-made pair"},
		{"expression bounds: abs to within", offsetLimit("offset", "uV", "expr: abs(post_offset) <= 60"), offsetLimit("offset", "uV", "expr: within(post_offset, -50, 50)"),
			[]wantChange{{"offset", "tightened", "post_offset", f(-60e-6), f(60e-6), f(-50e-6), f(50e-6), "upper 60 → 50 µV (expr abs(post_offset) <= 60 → within(post_offset, -50, 50))"}},
			"hand-made pair: ±50 ⊂ ±60"},
		{"expression bounds: conjunction", offsetLimit("offset", "uV", "expr: post_offset <= 60"), offsetLimit("offset", "uV", "expr: -60 <= post_offset && post_offset <= 80"),
			[]wantChange{{"offset", "changed shape", "post_offset", nil, f(60e-6), f(-60e-6), f(80e-6), "upper only → two-sided"}},
			"hand-made pair: a <= x && x <= b read as −60 … 80"},
		{"expression bounds: both sides", offsetLimit("offset", "uV", "expr: post_offset >= -60 and post_offset < 60"), offsetLimit("offset", "mV", "expr: within(post_offset, -0.07, 0.05)"),
			[]wantChange{{"offset", "shifted", "post_offset", f(-60e-6), f(60e-6), f(-70e-6), f(50e-6), "lower −0.06 → −0.07 mV, upper 0.06 → 0.05 mV"}},
			"hand-made pair: bounds shown in the new unit"},
		{"expression bounds cannot be read", offsetLimit("offset", "uV", "expr: abs(post_offset) <= 60"), offsetLimit("offset", "uV", "expr: post_offset * post_offset <= 3600"),
			[]wantChange{{"offset", "changed shape", "post_offset", nil, nil, nil, nil, "expr abs(post_offset) <= 60 → post_offset * post_offset <= 3600"}},
			"hand-made pair: x·x ≤ 3600 is not a simple form"},
		{"same expression", offsetLimit("offset", "uV", "expr: abs(post_offset) <= 60"), offsetLimit("OFFSET", "uV", "expr: abs(post_offset)   <= 60"),
			nil, "hand-made pair: the same text up to spaces"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got := limits.Diff(setOf(t, tc.old), setOf(t, tc.new))
			if len(got) != len(tc.want) {
				var b bytes.Buffer
				limits.FormatDiff(&b, got)
				t.Fatalf("%d changes, want %d (%s):\n%s", len(got), len(tc.want), tc.source, b.String())
			}
			for i, w := range tc.want {
				g := got[i]
				if g.Limit != w.limit || g.Kind != w.kind || g.Result != w.result || !strings.Contains(g.Detail, w.detail) ||
					!samePtr(g.OldLower, w.oldLo) || !samePtr(g.OldUpper, w.oldHi) || !samePtr(g.NewLower, w.newLo) || !samePtr(g.NewUpper, w.newHi) {
					t.Errorf("change %d = %+v\n  bounds %s %s → %s %s\nwant %+v (%s)", i, g, p(g.OldLower), p(g.OldUpper), p(g.NewLower), p(g.NewUpper), w, tc.source)
				}
			}
		})
	}
}

func samePtr(a, b *float64) bool {
	if a == nil || b == nil {
		return a == b
	}
	return within(*a, *b, 1e-12) || *a == *b
}

func p(v *float64) string {
	if v == nil {
		return "nil"
	}
	return strconv.FormatFloat(*v, 'g', -1, 64)
}

// TestDiffDemoRevisions compares the demo file (rev 6) with the hand-made rev 7,
// whose header comment lists what changed, and checks the table FormatDiff prints.
func TestDiffDemoRevisions(t *testing.T) {
	old, err := limits.LoadFile("../sequences/brx200-limits.yaml", catalog)
	if err != nil {
		t.Fatal(detail(err))
	}
	new, err := limits.LoadFile("../testdata/limits/brx200-rev7.yaml", catalog)
	if err != nil {
		t.Fatal(detail(err))
	}
	changes := limits.Diff(old, new)
	want := []struct{ limit, kind string }{
		{"", "rule changed"},
		{"Untrimmed  gain in range", "loosened"},
		{"offset after trim", "tightened"},
		{"gain after trim", "shifted"},
		{"linearity after trim", "changed shape"},
		{"total error after trim", "rule changed"},
		{"output noise", "changed shape"},
		{"trim headroom", "tightened"},
		{"untrimmed nonlinearity plausible", "added"},
	}
	if len(changes) != len(want) {
		var b bytes.Buffer
		limits.FormatDiff(&b, changes)
		t.Fatalf("%d changes, want %d (hand-made pair: brx200-rev7.yaml's header):\n%s", len(changes), len(want), b.String())
	}
	for i, w := range want {
		if changes[i].Limit != w.limit || changes[i].Kind != w.kind {
			t.Errorf("change %d = %q %s, want %q %s (hand-made pair: brx200-rev7.yaml's header)", i, changes[i].Limit, changes[i].Kind, w.limit, w.kind)
		}
	}
	var b bytes.Buffer
	limits.FormatDiff(&b, changes)
	lines := strings.Split(strings.TrimRight(b.String(), "\n"), "\n")
	if len(lines) != len(want)+1 || !strings.HasPrefix(lines[0], "LIMIT") {
		t.Fatalf("table:\n%s\nwant a header and %d rows", b.String(), len(want))
	}
	for _, row := range []string{
		"offset after trim                 tightened      post_offset             −800 … 800 µV   −600 … 600 µV   lower −800 → −600 µV, upper 800 → 600 µV",
		"(decision)                        rule changed   —                       —               —               decision section: conditional_pass review → fail; min_tur 4:1 → 3:1",
		"untrimmed nonlinearity plausible  added          pre_nonlinearity        (none)          ≤ 0.5 %         expr pre_nonlinearity <= 0.5 (%)",
	} {
		if !strings.Contains(b.String(), row+"\n") {
			t.Errorf("table lacks the row\n%s\ngot:\n%s", row, b.String())
		}
	}
	var e bytes.Buffer
	limits.FormatDiff(&e, nil)
	if e.String() != "no changes\n" {
		t.Errorf("FormatDiff(nil) = %q, want \"no changes\\n\"", e.String())
	}
}
