package limits

import (
	"strings"

	"github.com/goccy/go-yaml/ast"
	"github.com/goccy/go-yaml/token"
)

// place is a 1-based line and column (in characters) in the limit file.
type place struct{ line, col int }

// entrySrc is where the keys of one limit are in the file: an entry of the limits
// list or of a variant's add list, or a limits entry with a variant's override on
// top, whose keys then come first.
type entrySrc struct {
	base    string // YAML path of the entry: "$.limits[2]", "$.variants[0].add[1]"
	at      place  // the entry's "-"
	over    string // YAML path of the variant's override entry, or ""
	overAt  place
	gave    map[string]bool // keys the override gives
	dropped map[string]bool // keys of the base entry the override drops (an expr drops the tolerance and its rule)
	variant string          // the variant the limit is part of; "" for the base list
}

// of returns the path of the entry that key (or "key.sub") is read from. A key
// the override dropped is read at the override, where it is absent.
func (s *entrySrc) of(key string) string {
	top, _, _ := strings.Cut(key, ".")
	if s.over != "" && (s.gave[top] || s.dropped[top]) {
		return s.over
	}
	return s.base
}

// path returns the YAML path of key (or "key.sub") of the limit.
func (s *entrySrc) path(key string) string { return s.of(key) + "." + key }

// gives reports whether a variant's override gives key.
func (s *entrySrc) gives(key string) bool { return s.over != "" && s.gave[key] }

// entry returns the position of the limit's entry: the override's when there is
// one, which is where the variant's limit differs from the base.
func (s *entrySrc) entry() place {
	if s.over != "" {
		return s.overAt
	}
	return s.at
}

// scalarText tells where each character of a decoded YAML scalar sits in the file,
// so that a position inside an expression (as expr-lang reports it) can be shown at
// the right character of the file.
type scalarText struct {
	start place   // the value's token: the first character, or the quote, or the | or >
	block bool    // a | or > block scalar
	at    []place // file position of each character of the decoded text; nil when unknown
	end   place   // just past the last character
}

// locateScalar aligns text, the decoded value of node, with the source lines. The
// alignment walks both together, skipping the indentation and line breaks that YAML
// removes or folds; when an escape sequence or anything else makes them disagree it
// gives up and only the token position is known.
func locateScalar(src [][]rune, node ast.Node, text string) scalarText {
	st := scalarText{start: place{1, 1}}
	tk := node.GetToken()
	if tk == nil || tk.Position == nil {
		return st
	}
	st.start = place{tk.Position.Line, tk.Position.Column}
	cur := st.start
	switch node.(type) {
	case *ast.LiteralNode:
		st.block = true
		cur = place{st.start.line + 1, 1}
	case *ast.StringNode:
		if tk.Type == token.DoubleQuoteType || tk.Type == token.SingleQuoteType {
			cur.col++
		}
	}
	// at returns the source character at p: '\n' past the end of a line, 0 past the
	// end of the file.
	charAt := func(p place) rune {
		if p.line < 1 || p.line > len(src) || p.col < 1 {
			return 0
		}
		line := src[p.line-1]
		if p.col <= len(line) {
			return line[p.col-1]
		}
		if p.col == len(line)+1 && p.line < len(src) {
			return '\n'
		}
		return 0
	}
	next := func(p place) place {
		if charAt(p) == '\n' {
			return place{p.line + 1, 1}
		}
		return place{p.line, p.col + 1}
	}
	want := []rune(text)
	at := make([]place, 0, len(want))
	for k := 0; k < len(want); {
		s := charAt(cur)
		switch {
		case s == 0:
			return st
		case s == want[k]:
			at = append(at, cur)
			k++
			cur = next(cur)
		case s == ' ' || s == '\t' || s == '\n' || s == '\r':
			cur = next(cur) // indentation or a folded line break
		case want[k] == ' ' || want[k] == '\n':
			at = append(at, cur) // a space made by folding
			k++
		default:
			return st // an escape sequence: stop guessing
		}
	}
	st.at = at
	if len(at) > 0 {
		last := at[len(at)-1]
		st.end = place{last.line, last.col + 1}
	} else {
		st.end = cur
	}
	return st
}

// pos returns the file position of character from of the decoded text (the value's
// token when from is negative: a problem with the expression as a whole). line and
// col are expr-lang's own 1-based line and 0-based column for it, used when the
// alignment failed: a block scalar's expression line k is then taken to sit on the
// k-th line after the | or >.
func (st scalarText) pos(src [][]rune, from, line, col int) place {
	if from < 0 {
		return st.start
	}
	if st.at != nil {
		if from < len(st.at) {
			return st.at[from]
		}
		return st.end
	}
	if st.block && line > 0 {
		l := st.start.line + line
		if l <= len(src) {
			indent := 0
			for indent < len(src[l-1]) && (src[l-1][indent] == ' ' || src[l-1][indent] == '\t') {
				indent++
			}
			return place{l, indent + col + 1}
		}
	}
	return st.start
}
