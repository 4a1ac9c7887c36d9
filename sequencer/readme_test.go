package sequencer_test

import (
	"bufio"
	"bytes"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strings"
	"testing"

	"trimline/sequencer"
)

// readmeBlock is one fenced block of a section of README.md or DEVELOPERS.md.
type readmeBlock struct {
	line int    // 1-based line of its first line in the file
	text string // the block's lines, without the fences
	sub  string // the "### " heading it is under, "" for none
}

// fencedBlocks returns the blocks with info string info of the section heading
// of the file name in the repository's root.
func fencedBlocks(t *testing.T, name, heading, info string) []readmeBlock {
	t.Helper()
	readme, err := os.ReadFile(filepath.Join("..", name))
	if err != nil {
		t.Fatal(err)
	}
	var out []readmeBlock
	in, fence := false, false
	var cur *readmeBlock
	sub := ""
	sc := bufio.NewScanner(bytes.NewReader(readme))
	for n := 1; sc.Scan(); n++ {
		line := sc.Text()
		if !fence && strings.HasPrefix(line, "## ") {
			in, sub = line == heading, ""
			continue
		}
		if !fence && strings.HasPrefix(line, "### ") {
			sub = line
		}
		if !in {
			continue
		}
		if strings.HasPrefix(line, "```") {
			if fence = !fence; fence && strings.TrimSpace(strings.TrimPrefix(line, "```")) == info {
				cur = &readmeBlock{line: n + 1, sub: sub}
			} else if !fence && cur != nil {
				out = append(out, *cur)
				cur = nil
			}
			continue
		}
		if cur != nil {
			cur.text += line + "\n"
		}
	}
	if len(out) == 0 {
		t.Fatalf("%s has no %s blocks under %q", name, info, heading)
	}
	return out
}

var (
	namedFile = regexp.MustCompile(`^# (ofx10-[a-z]+\.yaml):`)
	topKey    = regexp.MustCompile(`^([a-z_]+):`)
	stepKind  = regexp.MustCompile(`(?m)^- kind: ([a-z_]+)`)
)

// withTopKey returns the YAML file doc with its top-level key replaced by block
// (a block starting with that key), or with block added when doc has no such key.
func withTopKey(doc, key, block string) string {
	lines := strings.SplitAfter(doc, "\n")
	start, end := -1, len(lines)
	for i, l := range lines {
		switch {
		case start < 0 && strings.HasPrefix(l, key+":"):
			start = i
		case start >= 0 && l != "" && l[0] != ' ' && l[0] != '#' && l[0] != '\n':
			end = i
		}
		if start >= 0 && end < len(lines) {
			break
		}
	}
	if start < 0 {
		return doc + "\n" + block
	}
	return strings.Join(lines[:start], "") + block + strings.Join(lines[end:], "")
}

// withSteps returns the demo sequence with the steps of block appended to its
// steps: list, which is the file's last key.
func withSteps(t *testing.T, doc, block string) string {
	t.Helper()
	tail := doc[strings.Index(doc, "\nsteps:\n"):]
	for _, l := range strings.Split(tail, "\n")[2:] {
		if l != "" && l[0] != ' ' && l[0] != '#' {
			t.Fatalf("the demo sequence has %q after steps: the README test appends steps at its end", l)
		}
	}
	var b strings.Builder
	b.WriteString(strings.TrimRight(doc, "\n") + "\n")
	for _, l := range strings.SplitAfter(block, "\n") {
		if strings.TrimSpace(l) != "" {
			b.WriteString("  ")
		}
		b.WriteString(l)
	}
	return b.String()
}

// The README's "Writing a sequence" cannot rot: every yaml example in it loads.
// A block that starts with "- kind:" is appended to the demo sequence's steps, a
// block that starts with a top-level key replaces that key of the demo sequence,
// and a block headed "# ofx10-….yaml:" is that file of testdata/ofx10 byte for
// byte (TestSecondProductRunsOnTheSimulator runs them). A "- kind:" block loads
// with the top-level blocks shown before it under the same "###" heading (a step
// that needs a section the demo has not, such as coefficients:). Every registered
// step kind has an example.
func TestReadmeSequenceExamplesLoad(t *testing.T) {
	demo := demoFile(t, "brx200-sequence.yaml")
	shown := map[string]bool{}
	named := 0
	var tops []readmeBlock // top-level blocks of the current ### section
	for _, b := range fencedBlocks(t, "README.md", "## Writing a sequence", "yaml") {
		if len(tops) > 0 && tops[0].sub != b.sub {
			tops = nil
		}
		first, _, _ := strings.Cut(b.text, "\n")
		var doc string
		switch {
		case namedFile.MatchString(first):
			name := namedFile.FindStringSubmatch(first)[1]
			want, err := os.ReadFile(filepath.Join("testdata", "ofx10", name))
			if err != nil {
				t.Errorf("README.md:%d: %v", b.line, err)
			} else if string(want) != b.text {
				t.Errorf("README.md:%d: the block differs from testdata/ofx10/%s: copy the file into the README again", b.line, name)
			}
			named++
			for _, m := range stepKind.FindAllStringSubmatch(strings.ReplaceAll(b.text, "\n  - kind:", "\n- kind:"), -1) {
				shown[m[1]] = true
			}
			continue
		case strings.HasPrefix(first, "- kind:"):
			doc = withSteps(t, demo, b.text)
			for _, tb := range tops {
				tfirst, _, _ := strings.Cut(tb.text, "\n")
				doc = withTopKey(doc, topKey.FindStringSubmatch(tfirst)[1], tb.text)
			}
		case topKey.MatchString(first):
			doc = withTopKey(demo, topKey.FindStringSubmatch(first)[1], b.text)
			tops = append(tops, b)
		default:
			t.Errorf("README.md:%d: a yaml block that is neither steps, a top-level key of a sequence file nor a named example file: %q", b.line, first)
			continue
		}
		for _, m := range stepKind.FindAllStringSubmatch(b.text, -1) {
			shown[m[1]] = true
		}
		if _, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(doc), demoReader(t, nil)); err != nil {
			t.Errorf("README.md:%d: the example does not load in the demo sequence:\n%v", b.line, err)
		}
	}
	if named != 3 {
		t.Errorf("found %d of the worked example's 3 files in the README", named)
	}
	for _, k := range sequencer.StepKinds() {
		if !shown[k.Name] && !slices.Contains(testKinds, k.Name) {
			t.Errorf("step kind %q has no example in README.md, Writing a sequence", k.Name)
		}
	}
}

// testKinds are step kinds registered by this package's tests, not by the engine.
var testKinds = []string{"port_reading", "zero_check_test", "test_soak", "test_temp"} // example_kind_test.go (shown in DEVELOPERS.md), unit_io_test.go, tempco_hooks_test.go

// DEVELOPERS.md's example step kind is the code the tests compile and run: its
// two go blocks are example_kind_test.go and example_kind_run_test.go.
func TestDevelopersStepKindExample(t *testing.T) {
	blocks := fencedBlocks(t, "DEVELOPERS.md", "## How to add a step kind", "go")
	files := []string{"example_kind_test.go", "example_kind_run_test.go"}
	if len(blocks) != len(files) {
		t.Fatalf("DEVELOPERS.md, How to add a step kind, has %d go blocks, want %d: %v", len(blocks), len(files), files)
	}
	for i, b := range blocks {
		want, err := os.ReadFile(files[i])
		if err != nil {
			t.Fatal(err)
		}
		if b.text != string(want) {
			t.Errorf("DEVELOPERS.md:%d: the block differs from sequencer/%s: copy the file into DEVELOPERS.md again", b.line, files[i])
		}
	}
}

// The short demo sequence in README's "The three files" is the demo's file written
// compactly: it loads and declares the same steps and results.
func TestReadmeShortDemoIsTheDemo(t *testing.T) {
	var short string
	for _, b := range fencedBlocks(t, "README.md", "## The three files", "yaml") {
		if strings.Contains(b.text, "\nsteps:\n") {
			short = b.text
		}
	}
	if short == "" {
		t.Fatal("no sequence file with steps: under The three files")
	}
	got, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(short), demoReader(t, nil))
	if err != nil {
		t.Fatal(err)
	}
	_, want := demoFiles(t, nil)
	summary := func(s *sequencer.Sequence) string {
		var b strings.Builder
		for _, d := range s.Steps {
			b.WriteString(d.Name + "/" + d.Kind + "/" + d.Stage.String() + ":")
			for _, r := range d.Results {
				b.WriteString(" " + r.Name)
			}
			b.WriteString("\n")
		}
		for _, d := range s.DACs {
			b.WriteString(strings.Join([]string{d.Name, d.Adjusts, d.Write, d.Read}, " ") + "\n")
		}
		return b.String()
	}
	if g, w := summary(got), summary(want); g != w {
		t.Errorf("README's short demo:\n%s\nthe demo file:\n%s", g, w)
	}
}
