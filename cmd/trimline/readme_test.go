package main

import (
	"bufio"
	"bytes"
	"context"
	"fmt"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"
)

// A README example is a command a reader pastes. The rule:
//
//   - in a fenced block whose info string is "sh", every line that starts with
//     "go run ./cmd/trimline " or "trimline " runs as pasted, in the README's order,
//     from one working folder, the way a reader goes through it; a trailing comment
//     "# exit N" says the exit code it ends with (0 otherwise);
//   - outside fenced blocks, a backticked span that starts with
//     "go run ./cmd/trimline " is an example too and runs the same way;
//   - a block marked "sh template" holds templates with placeholders: its lines,
//     like every backticked span that starts with "trimline " (usage lines and
//     commands named in the prose), are not run, but must name a command that
//     exists.
//
// Words are split as a POSIX shell splits them (quotes, an unquoted # starts a
// comment) and unquoted words with *, ? or [ are expanded as globs.
type readmeExample struct {
	line int      // 1-based line in README.md
	text string   // as written
	args []string // after the program name
	exit int      // the exit code it ends with
	run  bool     // false: a template or a command named in prose; only its name is checked
}

var (
	inlineCode = regexp.MustCompile("`([^`]+)`")
	exitNote   = regexp.MustCompile(`\bexit (\d)\b`)
)

// readmeExamples extracts the examples of a README by the rule above.
func readmeExamples(t *testing.T, readme []byte) []readmeExample {
	t.Helper()
	var out []readmeExample
	fence, info := false, ""
	sc := bufio.NewScanner(bytes.NewReader(readme))
	for n := 1; sc.Scan(); n++ {
		line := sc.Text()
		if trimmed := strings.TrimSpace(line); strings.HasPrefix(trimmed, "```") {
			fence, info = !fence, strings.Join(strings.Fields(strings.TrimPrefix(trimmed, "```")), " ")
			continue
		}
		if fence {
			if info != "sh" && info != "sh template" {
				continue
			}
			cmd := strings.TrimSpace(line)
			if !strings.HasPrefix(cmd, "go run ./cmd/trimline ") && !strings.HasPrefix(cmd, "trimline ") {
				continue
			}
			args, comment := shellWords(t, n, cmd)
			ex := readmeExample{line: n, text: cmd, args: args[1:], run: info == "sh"}
			if args[0] == "go" {
				ex.args = args[3:]
			}
			if m := exitNote.FindStringSubmatch(comment); m != nil {
				ex.exit, _ = strconv.Atoi(m[1])
			}
			out = append(out, ex)
			continue
		}
		for _, m := range inlineCode.FindAllStringSubmatch(line, -1) {
			span := strings.ReplaceAll(m[1], `\|`, "|") // a | inside a table cell
			switch {
			case strings.HasPrefix(span, "go run ./cmd/trimline "):
				args, _ := shellWords(t, n, span)
				out = append(out, readmeExample{line: n, text: span, args: args[3:], run: true})
			case strings.HasPrefix(span, "trimline "):
				out = append(out, readmeExample{line: n, text: span, args: strings.Fields(span)[1:]})
			}
		}
	}
	return out
}

// shellWords splits s as a POSIX shell would (no variables or substitutions):
// blanks separate words, quotes group, an unquoted # at a word's start begins the
// comment, which it returns.
func shellWords(t *testing.T, line int, s string) (words []string, comment string) {
	t.Helper()
	var w strings.Builder
	inWord, quote := false, rune(0)
	for i, r := range s {
		switch {
		case quote != 0:
			if r == quote {
				quote = 0
			} else {
				w.WriteRune(r)
			}
		case r == '\'' || r == '"':
			quote, inWord = r, true
		case r == ' ' || r == '\t':
			if inWord {
				words = append(words, w.String())
				w.Reset()
				inWord = false
			}
		case r == '#' && !inWord:
			return words, s[i:]
		default:
			w.WriteRune(r)
			inWord = true
		}
	}
	if quote != 0 {
		t.Fatalf("README.md:%d: unterminated quote in %s", line, s)
	}
	if inWord {
		words = append(words, w.String())
	}
	return words, ""
}

// expandGlobs expands the words with glob characters in the working folder, as a
// shell does; a pattern that matches nothing stays as it is.
func expandGlobs(args []string) []string {
	var out []string
	for _, a := range args {
		if strings.ContainsAny(a, "*?[") {
			if m, _ := filepath.Glob(a); len(m) > 0 {
				out = append(out, m...)
				continue
			}
		}
		out = append(out, a)
	}
	return out
}

// Issue 12, item 1: the README's examples failed as pasted (a run on the demo
// station refused "production runs need released files": its ledger was in
// out/, the demo's releases in the demo folder). Every example of the README runs,
// in order, from a fresh working folder as a reader's would be, and ends with
// exit code 0 or the one its comment documents; every command the README names
// exists.
func TestReadmeExamplesRunAsPasted(t *testing.T) {
	if testing.Short() {
		t.Skip("runs the demo with 25 units")
	}
	readme, err := os.ReadFile(filepath.Join("..", "..", "README.md"))
	if err != nil {
		t.Fatal(err)
	}
	examples := readmeExamples(t, readme)
	root := trimline()
	ran := 0
	var dir string
	for _, ex := range examples {
		top := root.sub(ex.args[0])
		if top == nil && (ex.args[0] == "help" || ex.args[0] == "version") {
			top = root // runEnv answers these itself
		}
		if top == nil {
			t.Errorf("README.md:%d: %s: no command %q", ex.line, ex.text, ex.args[0])
			continue
		}
		if top != root && len(top.Commands) > 0 {
			if c, _ := top.lookup(ex.args[1:]); c == top && len(ex.args) > 1 && !strings.HasPrefix(ex.args[1], "-") && !strings.HasPrefix(ex.args[1], "<") {
				t.Errorf("README.md:%d: %s: %q has no subcommand %q", ex.line, ex.text, ex.args[0], ex.args[1])
			}
		}
		if !ex.run {
			continue
		}
		if dir == "" {
			dir = t.TempDir()
			t.Chdir(dir)
		}
		var o, e bytes.Buffer
		code := runEnv(context.Background(), expandGlobs(ex.args), &env{stdout: &o, stderr: &e})
		ran++
		if code != ex.exit {
			t.Errorf("README.md:%d: %s\nexit %d, the README says %d\n%s%s", ex.line, ex.text, code, ex.exit, tail(o.String()), e.String())
		}
	}
	if ran < 10 {
		t.Errorf("only %d runnable examples found in README.md; the rule finds none?", ran)
	}
	t.Logf("%d README examples run, %d command names checked", ran, len(examples)-ran)
}

// tail is the last lines of s, enough to see why a command ended as it did.
func tail(s string) string {
	lines := strings.Split(strings.TrimRight(s, "\n"), "\n")
	if len(lines) > 12 {
		lines = append([]string{fmt.Sprintf("… %d lines", len(lines)-12)}, lines[len(lines)-12:]...)
	}
	return strings.Join(lines, "\n") + "\n"
}
