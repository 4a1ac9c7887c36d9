package limits_test

import (
	"strings"
	"testing"

	"trimline/instruments/files"
	"trimline/limits"
)

// header is lines 1-4 of every test file; "limits:" is then line 5 and the first
// entry's "- name:" line 6.
const header = `limit_set:
  name: test limits
  revision: A
  product: P-1
`

// entry returns one limit entry; each argument is a line, indented 4 spaces
// except the first ("- name: ...", indented 2).
func entry(lines ...string) string {
	var b strings.Builder
	for i, l := range lines {
		if i == 0 {
			b.WriteString("  - " + l + "\n")
		} else {
			b.WriteString("    " + l + "\n")
		}
	}
	return b.String()
}

// Positions are hand-counted: a value after "    key: " starts at column 11, so
// "    expr: abs(post_offset) <= 60" has post_offset at column 15.
func TestLoadErrors(t *testing.T) {
	tests := []struct {
		name string
		src  string
		want string // "file:line:col: " prefix and a part of the message
		msg  string
	}{
		{"unknown key", header + "limits:\n" + entry("name: offset", "description: d", "limt: 3",
			"unit: uV", "uses: [post_offset]", "expr: abs(post_offset) <= 60"),
			"f.yaml:8:5: ", `unknown field "limt"`},
		{"wrong type", header + "limits:\n" + entry("name: offset", "description: d", "unit: uV",
			"uses: post_offset", "expr: abs(post_offset) <= 60"),
			"f.yaml:9:11: ", "string was used where sequence is expected"},
		{"missing required key", header + "limits:\n" + entry("name: offset", "unit: uV",
			"uses: [post_offset]", "expr: abs(post_offset) <= 60"),
			"f.yaml:6:3: ", `missing required key "description"`},
		{"missing expr", header + "limits:\n" + entry("name: offset", "description: d", "unit: uV",
			"uses: [post_offset]"),
			"f.yaml:6:3: ", `missing required key "expr"`},
		{"missing key in limit_set", "limit_set:\n  name: t\n  revision: A\nlimits:\n" + entry("name: offset",
			"description: d", "unit: uV", "uses: [post_offset]", "expr: abs(post_offset) <= 60"),
			"f.yaml:1:1: ", `missing required key "product"`},
		{"duplicate key", header + "limits:\n" + entry("name: offset", "description: d", "unit: uV",
			"unit: mV", "uses: [post_offset]", "expr: abs(post_offset) <= 60"),
			"f.yaml:9:5: ", "duplicate key"},
		{"bad unit", header + "limits:\n" + entry("name: offset", "description: d", "unit: uX",
			"uses: [post_offset]", "expr: abs(post_offset) <= 60"),
			"f.yaml:8:11: ", `unknown unit "uX"`},
		{"unit with a number", header + "limits:\n" + entry("name: offset", "description: d", "unit: 10uV",
			"uses: [post_offset]", "expr: abs(post_offset) <= 60"),
			"f.yaml:8:11: ", `unknown unit "10uV"`},
		{"unit of the wrong dimension", header + "limits:\n" + entry("name: offset", "description: d", "unit: ppm",
			"uses: [post_offset]", "expr: abs(post_offset) <= 60"),
			"f.yaml:8:11: ", `unit "ppm" is a ratio (ppm or %), but result "post_offset" (uses item 1) is a voltage (V)`},
		{"empty unit for a voltage", header + "limits:\n" + entry("name: offset", "description: d", `unit: ""`,
			"uses: [post_offset]", "expr: abs(post_offset) <= 60"),
			"f.yaml:8:11: ", `result "post_offset" (uses item 1) is a voltage (V)`},
		{"unknown result name", header + "limits:\n" + entry("name: offset", "description: d", "unit: uV",
			"uses: [post_offset, post_ofset]", "expr: abs(post_offset) <= 60"),
			"f.yaml:9:25: ", `unknown result name "post_ofset" (known: gain_code, offset_code, post_gain_error, post_max_error, post_noise, post_nonlinearity, post_offset, pre_gain_error, pre_nonlinearity, pre_offset)`},
		{"name used but not in uses", header + "limits:\n" + entry("name: offset", "description: d", "unit: uV",
			"uses: [post_offset]", "expr: abs(post_offset) <= 60 && post_noise < 5"),
			"f.yaml:10:37: ", `expression uses result "post_noise", which is not listed in uses`},
		{"name that is no result", header + "limits:\n" + entry("name: offset", "description: d", "unit: uV",
			"uses: [post_offset]", "expr: abs(post_ofset) <= 60"),
			"f.yaml:10:15: ", `expression uses unknown name "post_ofset"`},
		{"syntax error", header + "limits:\n" + entry("name: offset", "description: d", "unit: uV",
			"uses: [post_offset]", "expr: abs(post_offset) <== 60"),
			"f.yaml:10:30: ", `invalid expression: unexpected token Operator("=")`},
		{"type error", header + "limits:\n" + entry("name: offset", "description: d", "unit: uV",
			"uses: [post_offset]", `expr: post_offset + "a"`),
			"f.yaml:10:23: ", "invalid expression: invalid operation: + (mismatched types float64 and string)"},
		{"non-boolean", header + "limits:\n" + entry("name: offset", "description: d", "unit: uV",
			"uses: [post_offset]", "expr: post_offset * 2"),
			"f.yaml:10:11: ", "expression must give true or false (a comparison such as x <= 60), but it gives a number"},
		{"duplicate limit name", header + "limits:\n" + entry("name: offset", "description: d", "unit: uV",
			"uses: [post_offset]", "expr: abs(post_offset) <= 60") + entry("name: Offset", "description: d",
			"unit: uV", "uses: [post_offset]", "expr: abs(post_offset) <= 70"),
			"f.yaml:11:11: ", `duplicate limit name "Offset" (also the name of the limit at line 6)`},
		{"listed in uses but not used", header + "limits:\n" + entry("name: offset", "description: d", "unit: uV",
			"uses: [post_offset, post_noise]", "expr: abs(post_offset) <= 60"),
			"f.yaml:9:25: ", `result "post_noise" is listed in uses but the expression does not use it`},
		{"listed twice in uses", header + "limits:\n" + entry("name: offset", "description: d", "unit: uV",
			"uses: [post_offset, post_offset]", "expr: abs(post_offset) <= 60"),
			"f.yaml:9:25: ", `result "post_offset" is listed twice in uses (also item 1)`},
		{"empty uses", header + "limits:\n" + entry("name: offset", "description: d", "unit: uV",
			"uses: []", "expr: 1 < 2"),
			"f.yaml:9:11: ", `"uses" is empty`},
		{"within with lo above hi", header + "limits:\n" + entry("name: offset", "description: d", "unit: uV",
			"uses: [post_offset]", "expr: within(post_offset, 60, -60)"),
			"f.yaml:10:11: ", "within(x, lo, hi) needs lo ≤ hi, found lo = 60 above hi = -60"},
		{"double-quoted expression", header + "limits:\n" + entry("name: offset", "description: d", "unit: uV",
			"uses: [post_offset]", `expr: "abs(post_ofset) <= 60"`),
			"f.yaml:10:16: ", `expression uses unknown name "post_ofset"`},
		{"literal block expression", header + "limits:\n" + entry("name: offset", "description: d", "unit: uV",
			"uses: [post_offset]", "expr: |", "  abs(post_offset) <= 60 &&", "    post_noise < 5"),
			"f.yaml:12:9: ", `expression uses result "post_noise", which is not listed in uses`},
		{"folded block expression", header + "limits:\n" + entry("name: offset", "description: d", "unit: uV",
			"uses: [post_offset]", "expr: >-", "  abs(post_offset) <= 60", "  && post_noise < 5"),
			"f.yaml:12:10: ", `expression uses result "post_noise", which is not listed in uses`},
		{"empty description", header + "limits:\n" + entry("name: offset", `description: ""`, "unit: uV",
			"uses: [post_offset]", "expr: abs(post_offset) <= 60"),
			"f.yaml:7:18: ", `"description" is empty`},
		{"no limits", header + "limits: []\n", "f.yaml:5:9: ", `"limits" is empty`},
		{"not a limit file", "limits:\n" + entry("name: offset", "description: d", "unit: uV",
			"uses: [post_offset]", "expr: abs(post_offset) <= 60"),
			"f.yaml:1:1: ", "not a limit file"},
		{"single-quoted expression", header + "limits:\n" + entry("name: offset", "description: d", "unit: uV",
			"uses: [post_offset]", "expr: '!(post_ofset > 60)'"),
			"f.yaml:10:14: ", `expression uses unknown name "post_ofset"`},
		{"escapes in a quoted expression: the value's start", header + "limits:\n" + entry("name: offset",
			"description: d", "unit: uV", "uses: [post_offset]", `expr: "abs(post_offset) <= 60 \u0026\u0026 post_noise < 5"`),
			"f.yaml:10:11: ", `expression uses result "post_noise", which is not listed in uses`},
		{"CRLF line ends", strings.ReplaceAll(header+"limits:\n"+entry("name: offset", "description: d", "unit: uV",
			"uses: [post_offset]", "expr: |", "  abs(post_offset) <= 60 &&", "    post_noise < 5"), "\n", "\r\n"),
			"f.yaml:12:9: ", `expression uses result "post_noise", which is not listed in uses`},
		{"clock function", header + "limits:\n" + entry("name: offset", "description: d", "unit: uV",
			"uses: [post_offset]", "expr: post_offset < 60 && now().Year() > 2000"),
			"f.yaml:10:31: ", `expression uses unknown name "now"`},
		{"empty entry", header + "limits:\n  -\n", "f.yaml:6:3: ", "empty limit entry"},
		{"some other file", "station:\n  name: bench 3\nlimits: x.yaml\n", "f.yaml:1:1: ",
			`not a limit file: expected a top-level "limit_set" key (name, revision, product), found "station", "limits"`},
		{"YAML syntax", header + "limits:\n  - name: [offset\n", "f.yaml:6:11: ", "']' not found"},
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
			if _, ok := err.(files.List); !ok {
				t.Errorf("error is %T, want files.List", err)
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

// Several problems in one file all come back at once, sorted by line, including
// decoding problems in more than one place.
func TestLoadErrorsAllAtOnce(t *testing.T) {
	src := header + "  colour: red\n" + "limits:\n" +
		entry("name: offset", "description: d", "unit: uX", "uses: [post_offset]", "expr: abs(post_offset) <= 60") + // lines 7-11
		entry("name: gain", "description: d", "unit: ppm", "uses: post_gain_error", "expr: post_gain_error < 1") + // lines 12-16
		entry("name: offset", "description: d", "unit: uV", "uses: [post_offset]", "expr: post_offset <== 1") + // lines 17-21
		entry("name: noise", "description: d", "unit: uV", "uses: [post_noise]", "expr: post_noise < 1", "colour: blue") // lines 22-27
	_, err := limits.Load("f.yaml", []byte(src), catalog)
	want := []string{ // hand-counted
		`f.yaml:5:3: unknown field "colour"`,
		`f.yaml:9:11: unknown unit "uX"`,
		"f.yaml:15:11: ",
		`f.yaml:17:11: duplicate limit name "offset"`,
		`f.yaml:21:25: invalid expression: unexpected token Operator("=")`,
		`f.yaml:27:5: unknown field "colour"`,
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

func TestLoadErrorExcerpt(t *testing.T) {
	src := header + "limits:\n" + entry("name: offset", "description: d", "unit: uV",
		"uses: [post_offset]", "expr: abs(post_offset) <= 60 && post_noise < 5")
	_, err := limits.Load("f.yaml", []byte(src), catalog)
	errs := files.Errs(err)
	if len(errs) != 1 {
		t.Fatalf("errors: %v", err)
	}
	// The caret sits under the "p" of post_noise: column 37.
	want := "   10 |     expr: abs(post_offset) <= 60 && post_noise < 5\n      | " + strings.Repeat(" ", 36) + "^"
	if !strings.HasSuffix(errs[0].Excerpt, want) {
		t.Errorf("excerpt\n%s\nwant it to end\n%s", errs[0].Excerpt, want)
	}
}
