package files_test

import (
	"bytes"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"trimline/instruments/files"
)

func nestedFlow(n int) string { return "a: " + strings.Repeat("[", n) + strings.Repeat("]", n) + "\n" }
func nestedMap(n int) string {
	return "a: " + strings.Repeat("{a: ", n) + "1" + strings.Repeat("}", n) + "\n"
}
func nestedDash(n int) string { return "a:\n" + strings.Repeat("- ", n) + "x\n" }
func nestedBlock(n int) string {
	var b strings.Builder
	for i := range n {
		fmt.Fprintf(&b, "%sk:\n", strings.Repeat(" ", i))
	}
	fmt.Fprintf(&b, "%sv: 1\n", strings.Repeat(" ", n))
	return b.String()
}

func manyKeys(n int) string {
	var b strings.Builder
	b.WriteString("m:\n")
	for i := range n {
		fmt.Fprintf(&b, "  k%d: %d\n", i, i)
	}
	return b.String()
}

// Files nested deeper than MaxDepth, with more keys in one mapping than
// MaxMappingKeys, with more documents than MaxDocuments or larger than
// MaxFileSize are refused before the YAML library sees them (its cost grows with
// the square of the first three), at the line and column where the bound is
// crossed. Before this check a 32 KB file nested 16 000 deep cost 866 MB; these
// small ones are accepted by the library, so the test fails without the check.
func TestParseRefusesOutOfBounds(t *testing.T) {
	for _, tc := range []struct {
		name, src string
		pos       string // "line:col" of the error
		msg       string
	}{
		{"flow sequences too deep", nestedFlow(files.MaxDepth + 1), "1:35", "at most 32 levels"},
		{"flow mappings too deep", nestedMap(files.MaxDepth), "1:128", "at most 32 levels"},
		{"block entries too deep", nestedDash(files.MaxDepth + 1), "2:65", "at most 32 levels"},
		{"block mappings too deep", nestedBlock(files.MaxDepth), "33:33", "at most 32 levels"},
		{"257 keys", manyKeys(files.MaxMappingKeys + 1), "258:3", "at most 256"},
		{"17 documents", strings.Repeat("---\na: 1\n", files.MaxDocuments+1), "33:1", "at most 16"},
		{"17 documents, the first unmarked", "a: 1\n" + strings.Repeat("---\na: 1\n", files.MaxDocuments), "32:1", "at most 16"},
		{"larger than 128 KiB", "a: 1\n" + strings.Repeat("# comment line\n", files.MaxFileSize/15+1), "8739:13", "at most 128 KiB"},
	} {
		_, err := files.Parse("f.yaml", []byte(tc.src))
		fe := files.Errs(err)
		if len(fe) != 1 || !strings.Contains(fe[0].Error(), "f.yaml:"+tc.pos+": ") || !strings.Contains(fe[0].Msg, tc.msg) {
			t.Errorf("%s: %v, want f.yaml:%s: …%s…", tc.name, err, tc.pos, tc.msg)
			continue
		}
		t.Logf("%s: %v", tc.name, err)
	}
}

// Everything just inside the bounds, and the shapes the scan must not mistake for
// nesting (brackets in plain scalars, quotes and comments; block scalars), parse.
func TestParseAcceptsWithinBounds(t *testing.T) {
	for _, tc := range []struct{ name, src string }{
		{"flow sequences deepest", nestedFlow(files.MaxDepth - 1)},
		{"flow mappings deepest", nestedMap(files.MaxDepth - 1)},
		{"block entries deepest", nestedDash(files.MaxDepth - 1)},
		{"block mappings deepest", nestedBlock(files.MaxDepth - 1)},
		{"256 keys", manyKeys(files.MaxMappingKeys)},
		{"16 documents", strings.Repeat("---\na: 1\n", files.MaxDocuments)},
		{"templates", "write: TRIM OFS {code}\nread: [ \"a[[[\", 'b{{{', c ]\nx: \"[[[[\n  [[[[\"\ny: '{{{ '' {{'\n# [[[[[[[[\nz: 1 # {{{{{{{{\n"},
		{"block scalar", "a: |\n" + strings.Repeat("  "+strings.Repeat(" ", 200)+"- [[[ {{{ x: y\n", 3) + "b: >-\n  text\n---\nc: 1\n"},
		{"sequence of mappings", "l:\n" + strings.Repeat("  - name: x\n    unit: mV\n    tolerance: {lower: -1, upper: 1}\n", 300)},
		{"plain scalar on more lines", "d: Bridge amplifier card, ±10 mV\n  differential input [typ]\n  on a 5 V supply.\ne: 2\n"},
	} {
		if err := files.Check("f.yaml", []byte(tc.src)); err != nil {
			t.Errorf("%s: %v", tc.name, err)
		}
		if _, err := files.Parse("f.yaml", []byte(tc.src)); err != nil {
			t.Errorf("%s: %v", tc.name, err)
		}
	}
	exact := "a: 1\n" + strings.Repeat("#", files.MaxFileSize-6) + "\n"
	if err := files.Check("f.yaml", []byte(exact)); err != nil || len(exact) != files.MaxFileSize {
		t.Errorf("a file of exactly %d bytes: %v", len(exact), err)
	}
}

// ReadFile reads at most MaxFileSize+1 bytes of anything, so an endless input
// costs no more than a small file.
func TestReadBounded(t *testing.T) {
	var n countingReader
	_, err := files.Read("zero", &n)
	if fe := files.Errs(err); len(fe) != 1 || !strings.Contains(fe[0].Msg, "too large") {
		t.Errorf("endless input: %v", err)
	}
	if n > files.MaxFileSize+1+bytes.MinRead {
		t.Errorf("read %d bytes of an endless input, want at most about %d", n, files.MaxFileSize+1)
	}
	path := filepath.Join(t.TempDir(), "big.yaml")
	os.WriteFile(path, []byte("a: 1\n"+strings.Repeat("#\n", files.MaxFileSize)), 0o644)
	if _, err := files.ReadFile(path); len(files.Errs(err)) != 1 {
		t.Errorf("big file: %v", err)
	}
	if _, err := files.ReadFile(filepath.Join(t.TempDir(), "missing.yaml")); err == nil || files.Errs(err) != nil {
		t.Errorf("missing file: %v", err)
	}
}

// countingReader is an endless stream of spaces that counts what is read.
type countingReader int

func (c *countingReader) Read(p []byte) (int, error) {
	for i := range p {
		p[i] = ' '
	}
	*c += countingReader(len(p))
	return len(p), nil
}

var _ io.Reader = (*countingReader)(nil)

// FuzzCheck: the scan never panics, and what it accepts the parser may refuse
// but never with a panic of its own (Parse recovers those anyway).
func FuzzCheck(f *testing.F) {
	for _, s := range []string{nestedFlow(3), nestedDash(3), nestedBlock(3), manyKeys(3), "a: |\n  x\n", "'a\n b': [\"c\n\", {d: e}]\n", "--- |\n x\n...\n"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		if err := files.Check("f.yaml", []byte(s)); err != nil {
			if fe := files.Errs(err); len(fe) != 1 || fe[0].Line < 1 || fe[0].Col < 1 {
				t.Fatalf("%q: %v", s, err)
			}
		}
	})
}
