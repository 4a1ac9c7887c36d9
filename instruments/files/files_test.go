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
