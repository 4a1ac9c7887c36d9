// Package files decodes trimline's hand-edited YAML files (station, sequence, limit)
// strictly: unknown keys, duplicate keys, wrong types, malformed units and missing
// required keys are all rejected with the file name, line and column, and an excerpt
// of the source with a caret under the culprit.
package files

import (
	"cmp"
	"errors"
	"fmt"
	"slices"
	"strings"

	"github.com/goccy/go-yaml"
	"github.com/goccy/go-yaml/ast"
	"github.com/goccy/go-yaml/parser"
	"github.com/goccy/go-yaml/token"

	"trimline/instruments/units"
)

// Error is one positioned problem in a file, for a person to read.
type Error struct {
	File      string
	Line, Col int // 1-based; 0 when the position is unknown
	Msg       string
	Excerpt   string // source lines around Line with a caret, may be empty
	// Warning marks a problem a person should see that does not make the file
	// unusable (a calibration due soon); loaders never return one.
	Warning bool
}

// Error returns "file:line:col: message", with "warning: " before the message of
// a warning.
func (e *Error) Error() string {
	msg := e.Msg
	if e.Warning {
		msg = "warning: " + msg
	}
	if e.Line == 0 {
		return fmt.Sprintf("%s: %s", e.File, msg)
	}
	return fmt.Sprintf("%s:%d:%d: %s", e.File, e.Line, e.Col, msg)
}

// Detail returns Error() followed by the excerpt.
func (e *Error) Detail() string {
	if e.Excerpt == "" {
		return e.Error()
	}
	return e.Error() + "\n" + e.Excerpt
}

// List is several problems in one or more files; it is itself an error.
type List []*Error

func (l List) Error() string {
	s := make([]string, len(l))
	for i, e := range l {
		s[i] = e.Error()
	}
	return strings.Join(s, "\n")
}

// Sort orders the problems as a person reads them: by file name, then by line and
// column, a problem without a position (line 0) after the positioned ones of its
// file. Problems at one position keep their order. Every loader sorts with it.
func (l List) Sort() {
	SortByPosition(l, func(e *Error) (string, int, int) { return e.File, e.Line, e.Col })
}

// SortByPosition sorts s stably in the order of List.Sort, pos giving each
// element's file, line and column: for problems kept in a type of their own (lint
// findings).
func SortByPosition[T any](s []T, pos func(T) (file string, line, col int)) {
	slices.SortStableFunc(s, func(a, b T) int {
		fa, la, ca := pos(a)
		fb, lb, cb := pos(b)
		if c := strings.Compare(fa, fb); c != 0 {
			return c
		}
		if (la == 0) != (lb == 0) {
			if la == 0 {
				return 1
			}
			return -1
		}
		if c := cmp.Compare(la, lb); c != 0 {
			return c
		}
		return cmp.Compare(ca, cb)
	})
}

// Errs returns every *Error inside err (a List, a single *Error or a wrapped one).
func Errs(err error) []*Error {
	var l List
	if errors.As(err, &l) {
		return l
	}
	var e *Error
	if errors.As(err, &e) {
		return []*Error{e}
	}
	return nil
}

// Doc is one parsed YAML file.
type Doc struct {
	Name  string // the file name used in messages
	Data  []byte
	ast   *ast.File
	lines []string
}

// Parse parses data as YAML; syntax errors come back as *Error. A file outside
// the bounds Check sets (size, nesting, keys of a mapping, documents) is refused
// before the YAML library sees it (an *Error too), so no file costs more than a
// bounded time and memory.
func Parse(name string, data []byte) (doc *Doc, err error) {
	if err := Check(name, data); err != nil {
		return nil, err
	}
	defer recoverYAML(name, &err)
	d := &Doc{Name: name, Data: data, lines: strings.Split(string(data), "\n")}
	f, err := parser.ParseBytes(data, 0)
	if err != nil {
		return nil, d.convert(err)
	}
	d.ast = f
	return d, nil
}

// Decode decodes the document into v strictly. Problems come back as *Error.
//
// A file of one document whose top is a mapping (every trimline file) is decoded
// from the tree Parse built; anything else is decoded from Data as the YAML
// library would, so that empty and multi-document files behave as they always did.
func (d *Doc) Decode(v any) (err error) {
	defer recoverYAML(d.Name, &err)
	if m := d.Root(); m != nil && len(d.ast.Docs) == 1 {
		err = yaml.NodeToValue(d.ast.Docs[0].Body, v, yaml.Strict())
	} else {
		err = yaml.UnmarshalWithOptions(d.Data, v, yaml.Strict())
	}
	if err != nil {
		return d.convert(err)
	}
	return nil
}

// File returns the syntax tree Parse built, for a loader that needs more than
// Decode and the positions (the layout of entries, the source of a value). It must
// not be changed.
func (d *Doc) File() *ast.File { return d.ast }

// Root returns the mapping at the top of the first document, or nil when the file
// does not start with one.
func (d *Doc) Root() *ast.MappingNode {
	if d.ast == nil || len(d.ast.Docs) == 0 || d.ast.Docs[0] == nil {
		return nil
	}
	switch n := d.ast.Docs[0].Body.(type) {
	case *ast.MappingNode:
		return n
	case *ast.MappingValueNode:
		return &ast.MappingNode{BaseNode: &ast.BaseNode{}, Values: []*ast.MappingValueNode{n}}
	}
	return nil
}

// recoverYAML turns a panic inside the YAML library (seen on some malformed tags)
// into an error naming the file, so a bad file can never crash the station.
func recoverYAML(name string, err *error) {
	if p := recover(); p != nil {
		*err = &Error{File: name, Msg: fmt.Sprintf("cannot read this YAML (the parser failed: %v)", p)}
	}
}

// At returns an *Error positioned at line and column.
func (d *Doc) At(line, col int, format string, args ...any) *Error {
	return &Error{File: d.Name, Line: line, Col: col, Msg: fmt.Sprintf(format, args...), Excerpt: d.excerpt(line, col)}
}

// Errorf returns an *Error positioned at the value found at path (a YAML path such
// as "$.instruments.meter.address"). When nothing is at path, it points at the key
// of the nearest existing parent, which is where a missing key belongs.
func (d *Doc) Errorf(path string, format string, args ...any) *Error {
	if !d.Has(path) {
		p := parent(path)
		for p != "" && p != "$" && !d.Has(p) {
			p = parent(p)
		}
		if p != "" && p != "$" {
			line, col := d.keyPos(p)
			return d.At(line, col, format, args...)
		}
	}
	line, col := d.Pos(path)
	return d.At(line, col, format, args...)
}

// KeyErrorf is like Errorf but points at the key of a mapping entry rather than its
// value, which reads better for "unknown role" and similar messages.
func (d *Doc) KeyErrorf(path string, format string, args ...any) *Error {
	line, col := d.keyPos(path)
	return d.At(line, col, format, args...)
}

// Has reports whether a node exists at path.
func (d *Doc) Has(path string) bool {
	return d.node(path) != nil
}

// Pos returns the line and column of the node at path, or of its nearest parent.
func (d *Doc) Pos(path string) (line, col int) {
	for p := path; p != ""; p = parent(p) {
		if n := d.node(p); n != nil {
			if m, ok := n.(*ast.MappingValueNode); ok {
				n = m.Value
			}
			return tokPos(n.GetToken())
		}
		if p == "$" {
			break
		}
	}
	return 1, 1
}

// StartPos is where the node at path begins as a person reads it: for a mapping,
// its first key (the parser places a mapping at its first colon), else Pos.
func (d *Doc) StartPos(path string) (line, col int) {
	if m, ok := d.node(path).(*ast.MappingNode); ok && len(m.Values) > 0 && m.Values[0].Key != nil {
		return tokPos(m.Values[0].Key.GetToken())
	}
	return d.Pos(path)
}

func (d *Doc) keyPos(path string) (int, int) {
	n := d.node(path)
	if n == nil {
		return d.Pos(path)
	}
	// The value's token sits after "key:"; find the key by walking the parent mapping.
	par := d.node(parent(path))
	key := lastKey(path)
	if par != nil {
		var found ast.Node
		ast.Walk(visitor(func(x ast.Node) bool {
			if mv, ok := x.(*ast.MappingValueNode); ok && found == nil {
				if mv.Key != nil && mv.Key.String() == key {
					found = mv.Key
					return false
				}
			}
			return found == nil
		}), par)
		if found != nil {
			return tokPos(found.GetToken())
		}
	}
	return tokPos(n.GetToken())
}

type visitor func(ast.Node) bool

func (v visitor) Visit(n ast.Node) ast.Visitor {
	if v(n) {
		return v
	}
	return nil
}

func (d *Doc) node(path string) ast.Node {
	if d.ast == nil || len(d.ast.Docs) == 0 {
		return nil
	}
	p, err := yaml.PathString(path)
	if err != nil {
		return nil
	}
	n, err := p.FilterFile(d.ast)
	if err != nil || n == nil {
		return nil
	}
	return n
}

func parent(path string) string {
	if path == "$" || path == "" {
		return ""
	}
	i := strings.LastIndexAny(path, ".[")
	if i <= 0 {
		return "$"
	}
	return path[:i]
}

func lastKey(path string) string {
	i := strings.LastIndexAny(path, ".")
	s := path[i+1:]
	s = strings.Trim(s, "'\"")
	return s
}

func tokPos(tk *token.Token) (int, int) {
	if tk == nil || tk.Position == nil {
		return 1, 1
	}
	return tk.Position.Line, tk.Position.Column
}

func (d *Doc) excerpt(line, col int) string {
	if line < 1 || line > len(d.lines) {
		return ""
	}
	var b strings.Builder
	from := max(1, line-2)
	for i := from; i <= line; i++ {
		fmt.Fprintf(&b, "%5d | %s\n", i, strings.TrimRight(d.lines[i-1], "\r"))
	}
	fmt.Fprintf(&b, "      | %s^", strings.Repeat(" ", max(0, col-1)))
	return b.String()
}

// convert turns a go-yaml or units error into *Error.
func (d *Doc) convert(err error) error {
	var ne *units.NodeError
	if errors.As(err, &ne) {
		return d.At(ne.Line, ne.Col, "%s", ne.Msg)
	}
	var ye yaml.Error
	if errors.As(err, &ye) {
		line, col := tokPos(ye.GetToken())
		return d.At(line, col, "%s", tidy(ye.GetMessage()))
	}
	return &Error{File: d.Name, Msg: err.Error()}
}

// tidy rewrites go-yaml's Go-flavoured messages into words for a file's author.
func tidy(msg string) string {
	if strings.HasPrefix(msg, "cannot unmarshal ") {
		// "cannot unmarshal string into Go struct field Cfg.B of type int"
		rest := strings.TrimPrefix(msg, "cannot unmarshal ")
		src, after, _ := strings.Cut(rest, " into ")
		typ := after[strings.LastIndex(after, " ")+1:]
		want := map[string]string{"int": "a whole number", "float64": "a number", "string": "text",
			"bool": "true or false"}[typ]
		if strings.HasPrefix(typ, "[]") {
			want = "a list"
		} else if strings.HasPrefix(typ, "map[") || want == "" {
			want = "a mapping (key: value lines)"
		}
		return fmt.Sprintf("wrong type: expected %s, found %s", want, map[string]string{
			"string": "text", "uint64": "a number", "int64": "a number", "float64": "a number", "bool": "a boolean",
			"map[string]interface {}": "a mapping", "[]interface {}": "a list"}[src]+orEmpty(src))
	}
	if strings.HasPrefix(msg, "mapping key") && strings.Contains(msg, "already defined") {
		return "duplicate key: " + msg
	}
	return msg
}

func orEmpty(src string) string {
	switch src {
	case "string", "uint64", "int64", "float64", "bool", "map[string]interface {}", "[]interface {}":
		return ""
	}
	return src
}
