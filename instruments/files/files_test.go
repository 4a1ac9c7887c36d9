package files_test

import (
	"strings"
	"testing"

	"trimline/instruments/files"
	"trimline/instruments/units"
)

type cfg struct {
	Level units.Voltage `yaml:"level"`
	Box   struct {
		Count int `yaml:"count"`
	} `yaml:"box"`
	Waits []units.Duration `yaml:"waits"`
}

// Positions below are hand-counted in each source text (line:column, 1-based).
func TestDecodeErrorsArePositioned(t *testing.T) {
	cases := []struct {
		src, want string
	}{
		{"level: 10 mV\nbox:\n  count: x\n", "f.yaml:3:10: wrong type: expected a whole number"},
		{"level: 10mX\n", "f.yaml:1:8: unknown unit \"mX\""},
		{"level: 1V\nwaits: [1ms, 3V]\n", "f.yaml:2:14: \"3V\" is a voltage (V): expected a time (s)"},
		{"level: 5\n", "f.yaml:1:8: \"5\" has no unit: expected a voltage (V), e.g. 10mV"},
		{"level: 1V\nbox:\n  size: 1\n", "f.yaml:3:3: unknown field \"size\""},
	}
	for _, c := range cases {
		d, err := files.Parse("f.yaml", []byte(c.src))
		if err != nil {
			t.Fatalf("%q: %v", c.src, err)
		}
		var v cfg
		err = d.Decode(&v)
		if err == nil || !strings.HasPrefix(err.Error(), c.want) {
			t.Errorf("%q: got %v, want prefix %q", c.src, err, c.want)
		}
		if e := files.Errs(err); len(e) != 1 || !strings.Contains(e[0].Detail(), "^") {
			t.Errorf("%q: no excerpt with a caret", c.src)
		}
	}
}

func TestParseErrors(t *testing.T) {
	for _, c := range []struct{ src, want string }{
		{"level: 1V\nlevel: 2V\n", "f.yaml:2:1: duplicate key"},
		{"level: [1\n", "f.yaml:1:8:"},
	} {
		_, err := files.Parse("f.yaml", []byte(c.src))
		if err == nil || !strings.HasPrefix(err.Error(), c.want) {
			t.Errorf("%q: got %v, want prefix %q", c.src, err, c.want)
		}
	}
}

func TestErrorfPointsAtValueOrParentKey(t *testing.T) {
	src := "level: 1V\nbox:\n  count: 3\n"
	d, err := files.Parse("f.yaml", []byte(src))
	if err != nil {
		t.Fatal(err)
	}
	if got := d.Errorf("$.box.count", "x").Error(); got != "f.yaml:3:10: x" {
		t.Errorf("existing value: %s", got)
	}
	// A missing key is reported at the key of the mapping it belongs in.
	if got := d.Errorf("$.box.colour", "x").Error(); got != "f.yaml:2:1: x" {
		t.Errorf("missing key: %s", got)
	}
	if got := d.KeyErrorf("$.box", "x").Error(); got != "f.yaml:2:1: x" {
		t.Errorf("key: %s", got)
	}
}

func FuzzParseDecode(f *testing.F) {
	f.Add("level: 10 mV\nbox:\n  count: 3\nwaits: [1ms]\n")
	f.Add("uses: !000\n000")
	f.Fuzz(func(t *testing.T, src string) {
		d, err := files.Parse("f.yaml", []byte(src))
		if err != nil {
			return
		}
		var v cfg
		_ = d.Decode(&v)
	})
}

// Sort: by file, then line and column, unpositioned problems last in their file,
// ties in the order given.
func TestSort(t *testing.T) {
	l := files.List{
		{File: "b.yaml", Line: 2, Col: 1, Msg: "b2"},
		{File: "a.yaml", Line: 0, Msg: "a0"},
		{File: "a.yaml", Line: 3, Col: 5, Msg: "a3.5"},
		{File: "a.yaml", Line: 3, Col: 1, Msg: "a3.1 first"},
		{File: "a.yaml", Line: 3, Col: 1, Msg: "a3.1 second"},
		{File: "a.yaml", Line: 1, Col: 9, Msg: "a1"},
	}
	l.Sort()
	var got []string
	for _, e := range l {
		got = append(got, e.Msg)
	}
	if want := "a1, a3.1 first, a3.1 second, a3.5, a0, b2"; strings.Join(got, ", ") != want {
		t.Errorf("sorted %s, want %s", strings.Join(got, ", "), want)
	}
}

// Decode reads the tree Parse built for an ordinary file, and the bytes for an
// empty or multi-document one, with the same results as decoding the bytes.
func TestDecodeFromTree(t *testing.T) {
	for _, src := range []string{"level: 1V\nbox: {count: 3}\n", "", "# nothing\n", "level: 2V\n---\nlevel: 3V\n"} {
		doc, err := files.Parse("f.yaml", []byte(src))
		if err != nil {
			t.Fatalf("%q: %v", src, err)
		}
		var c cfg
		if err := doc.Decode(&c); err != nil {
			t.Errorf("%q: %v", src, err)
		}
		want := map[string]units.Voltage{"level: 1V\nbox: {count: 3}\n": 1, "level: 2V\n---\nlevel: 3V\n": 2}[src]
		if c.Level != want {
			t.Errorf("%q: level %v, want %v", src, c.Level, want)
		}
	}
}

type wide struct {
	Name   string                     `yaml:"name"`
	Level  *units.Voltage             `yaml:"level"`
	Gap    *units.Voltage             `yaml:"gap"`
	Roles  map[string]struct{ A int } `yaml:"roles"`
	Waits  []units.Duration           `yaml:"waits"`
	Labels map[string]string          `yaml:"labels"`
	Inner  *struct {
		Count int `yaml:"count"`
	} `yaml:"inner"`
}

// DecodeAll decodes a sound file exactly as Decode does, and on a bad one reports
// every problem (positions hand-counted), where Decode stops at the first.
func TestDecodeAllReportsEveryProblem(t *testing.T) {
	good := "name: x\nlevel: 5 mV\ngap:\nroles:\n  r1: {a: 3}\nwaits: [1 ms, 2 s]\nlabels: {k: v, n: 8}\ninner: {count: 4}\n"
	var a, b wide
	da, _ := files.Parse("g.yaml", []byte(good))
	db, _ := files.Parse("g.yaml", []byte(good))
	if err := da.Decode(&a); err != nil {
		t.Fatal(err)
	}
	if err := db.DecodeAll(&b); err != nil {
		t.Fatal(err)
	}
	if a.Name != b.Name || *a.Level != *b.Level || b.Gap != nil || a.Roles["r1"] != b.Roles["r1"] || len(b.Waits) != 2 ||
		a.Waits[1] != b.Waits[1] || b.Labels["n"] != "8" || b.Inner == nil || b.Inner.Count != 4 {
		t.Fatalf("Decode %+v, DecodeAll %+v", a, b)
	}
	bad := "name: x\nlevel: 5 mX\nroles:\n  r1: {a: three}\n  r2: {b: 1}\nwaits: [1 ms, 2 V]\nextra: 1\n"
	d, _ := files.Parse("b.yaml", []byte(bad))
	var w wide
	err := d.DecodeAll(&w)
	want := []string{
		`b.yaml:2:8: unknown unit "mX"`,
		`b.yaml:4:11: wrong type: expected a whole number`,
		`b.yaml:5:8: unknown field "b"`,
		`b.yaml:6:15: "2 V" is a voltage (V): expected a time`,
		`b.yaml:7:1: unknown field "extra"`,
	}
	errs := files.Errs(err)
	if len(errs) != len(want) {
		t.Fatalf("%d problems, want %d:\n%v", len(errs), len(want), err)
	}
	for i, e := range errs {
		if !strings.HasPrefix(e.Error(), want[i]) {
			t.Errorf("problem %d: %s, want %s…", i+1, e.Error(), want[i])
		}
	}
	if w.Level == nil || *w.Level != 0 || w.Name != "x" {
		t.Errorf("a bad value leaves a zero value behind a set pointer; the rest decodes: %+v", w)
	}
}

// StartPos places a list's mapping item at its first key, where a person reads
// the item begin, not at the parser's first colon.
func TestStartPosOfAMappingIsItsFirstKey(t *testing.T) {
	src := "steps:\n  - kind: sweep\n    name: verify\n  - {kind: fit, name: f}\n  - plain\n"
	d, err := files.Parse("f.yaml", []byte(src))
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		path      string
		line, col int
	}{
		{"$.steps[0]", 2, 5},
		{"$.steps[1]", 4, 6},
		{"$.steps[2]", 5, 5},
	} {
		if line, col := d.StartPos(c.path); line != c.line || col != c.col {
			t.Errorf("StartPos(%s) = %d:%d, want %d:%d", c.path, line, col, c.line, c.col)
		}
	}
}
