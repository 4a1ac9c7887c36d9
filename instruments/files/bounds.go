package files

import (
	"fmt"
	"io"
	"os"
	"strings"
)

// Bounds on what Parse hands to the YAML library. The library's cost grows with
// the square of the nesting depth, of the number of keys in one block mapping and
// of the number of documents (a 200 KB file nested 100 000 deep took 24 GB), and it
// cannot be interrupted, so Check refuses such files with a cheap line scan first.
// Beyond that, its cost is about 1 to 2 KB of memory per node, so the size bound
// is what keeps a file cheap: within these bounds the worst file measured (128 KiB
// of nested flow brackets) takes under a second and about 200 MB of heap at its
// peak (BenchmarkWorstAcceptedFile). The demo's files are 2 to 4 KB and the
// deepest nests 6 levels; 500 limits of five lines each fit in under 100 KB.
const (
	MaxFileSize    = 128 << 10 // bytes of one station, sequence or limit file
	MaxDepth       = 32        // nesting levels: block indentation, "- " entries and [ { brackets together
	MaxMappingKeys = 256       // keys of one block mapping
	MaxDocuments   = 16        // YAML documents in one file ("---")
)

// ReadFile reads the file at path as Parse accepts it: at most MaxFileSize bytes
// are read, and a longer file is refused with an *Error that says so (a file that
// cannot be opened or read gives the os error). It never reads more than
// MaxFileSize+1 bytes, whatever the file is (a device, a pipe, a growing file).
func ReadFile(path string) ([]byte, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	return Read(path, f)
}

// Read is ReadFile on an open reader; name is used in messages.
func Read(name string, r io.Reader) ([]byte, error) {
	data, err := io.ReadAll(io.LimitReader(r, MaxFileSize+1))
	if err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	if err := checkSize(name, data); err != nil {
		return nil, err
	}
	return data, nil
}

func checkSize(name string, data []byte) error {
	if len(data) <= MaxFileSize {
		return nil
	}
	// Point at the first byte past the bound.
	before := data[:MaxFileSize]
	line := 1 + strings.Count(string(before), "\n")
	col := MaxFileSize - strings.LastIndexByte(string(before), '\n')
	return &Error{File: name, Line: line, Col: col, Msg: fmt.Sprintf(
		"file too large: expected at most %d KiB (%d bytes) in a station, sequence or limit file; refused before parsing", MaxFileSize>>10, MaxFileSize)}
}

// Check refuses, before any parsing, a file larger than MaxFileSize, nested deeper
// than MaxDepth, with a block mapping of more than MaxMappingKeys keys or with more
// than MaxDocuments documents. The scan reads each byte once and allocates nothing
// per line. It estimates the nesting from indentation, "- " and "? " indicators and
// flow brackets outside quotes and comments; block scalars (| and >) are skipped.
// The estimate may count a level too many (a plain scalar continued on an indented
// line) but never misses one that costs the parser. The error is an *Error at the
// line and column where the bound is crossed.
func Check(name string, data []byte) error {
	if err := checkSize(name, data); err != nil {
		return err
	}
	s := scanner{name: name, blockScalar: noBlockScalar}
	src := string(data)
	for lineNo := 1; len(src) > 0 || lineNo == 1; lineNo++ {
		line := src
		if i := strings.IndexByte(src, '\n'); i >= 0 {
			line, src = src[:i], src[i+1:]
		} else {
			src = ""
		}
		line = strings.TrimSuffix(line, "\r")
		if err := s.line(lineNo, line); err != nil {
			return err
		}
		if src == "" {
			break
		}
	}
	return nil
}

const noBlockScalar = -2

type frame struct {
	indent int
	keys   int
}

type scanner struct {
	name        string
	stack       []frame
	flow        int  // open [ and { brackets
	quote       byte // the quote of a scalar continued from an earlier line, or 0
	blockScalar int  // lines indented more than this belong to a block scalar; noBlockScalar = none
	docs        int
	content     bool // a node seen in the current document
	lineNo      int
}

func (s *scanner) errAt(col int, format string, args ...any) *Error {
	return &Error{File: s.name, Line: s.lineNo, Col: col, Msg: fmt.Sprintf(format, args...)}
}

func (s *scanner) depthErr(col int) *Error {
	if d := len(s.stack) + s.flow; d > MaxDepth {
		return s.errAt(col, "nested too deep: expected at most %d levels of nesting, found %d here; refused before parsing", MaxDepth, d)
	}
	return nil
}

func isMarker(line, m string) bool {
	return strings.HasPrefix(line, m) && (len(line) == 3 || line[3] == ' ' || line[3] == '\t')
}

func indentOf(line string) int {
	n := 0
	for n < len(line) && line[n] == ' ' {
		n++
	}
	return n
}

func blank(rest string) bool {
	t := strings.TrimLeft(rest, " \t")
	return t == "" || t[0] == '#'
}

func (s *scanner) line(lineNo int, line string) *Error {
	s.lineNo = lineNo
	if s.quote == 0 && s.flow == 0 && (isMarker(line, "---") || isMarker(line, "...")) {
		s.blockScalar = noBlockScalar
		s.stack = s.stack[:0]
		if line[0] == '-' {
			s.docs++
			s.content = false
			if s.docs > MaxDocuments {
				return s.errAt(1, "too many YAML documents: expected at most %d in one file; refused before parsing", MaxDocuments)
			}
			if !blank(line[3:]) {
				s.noteContent()
				return s.value(3, line, -1)
			}
		}
		return nil
	}
	ind := indentOf(line)
	if s.blockScalar != noBlockScalar {
		if ind > s.blockScalar || strings.TrimSpace(line) == "" {
			return nil
		}
		s.blockScalar = noBlockScalar
	}
	pos := 0
	if s.quote != 0 {
		end := closeQuote(line, 0, s.quote)
		if end < 0 {
			return nil
		}
		s.quote = 0
		pos = end
		if s.flow > 0 {
			return s.flowScan(line, pos)
		}
		return nil
	}
	if s.flow > 0 {
		return s.flowScan(line, 0)
	}
	if blank(line) {
		return nil
	}
	if docs := s.noteContent(); docs > MaxDocuments {
		return s.errAt(1, "too many YAML documents: expected at most %d in one file; refused before parsing", MaxDocuments)
	}
	for len(s.stack) > 0 && s.stack[len(s.stack)-1].indent > ind {
		s.stack = s.stack[:len(s.stack)-1]
	}
	if len(s.stack) == 0 || s.stack[len(s.stack)-1].indent < ind {
		s.stack = append(s.stack, frame{indent: ind})
		if err := s.depthErr(ind + 1); err != nil {
			return err
		}
	}
	return s.node(ind, line, ind)
}

// noteContent counts the document a first node opens and returns the count.
func (s *scanner) noteContent() int {
	if !s.content {
		s.content = true
		if s.docs == 0 {
			s.docs = 1
		}
	}
	return s.docs
}

// node scans the block node starting at pos, whose frame (top of the stack) is
// at column owner.
func (s *scanner) node(pos int, line string, owner int) *Error {
	for {
		rest := line[pos:]
		if (rest[0] == '-' || rest[0] == '?') && (len(rest) == 1 || rest[1] == ' ' || rest[1] == '\t') {
			if rest[0] == '?' {
				s.stack[len(s.stack)-1].keys++
				if err := s.keysErr(pos + 1); err != nil {
					return err
				}
			}
			p := pos + 1
			for p < len(line) && (line[p] == ' ' || line[p] == '\t') {
				p++
			}
			if blank(line[p:]) {
				return nil
			}
			if c := line[p]; c == '|' || c == '>' {
				s.blockScalar = pos
				return nil
			}
			s.stack = append(s.stack, frame{indent: p})
			if err := s.depthErr(p + 1); err != nil {
				return err
			}
			pos, owner = p, p
			continue
		}
		break
	}
	// A key (plain or quoted) followed by ": ", or a value.
	key := -1
	if c := line[pos]; c == '"' || c == '\'' {
		end := closeQuote(line, pos+1, c)
		if end < 0 {
			s.quote = c
			return nil
		}
		p := end
		for p < len(line) && (line[p] == ' ' || line[p] == '\t') {
			p++
		}
		if p < len(line) && line[p] == ':' && (p+1 == len(line) || line[p+1] == ' ' || line[p+1] == '\t') {
			key = p
		}
	} else if c != '[' && c != '{' && c != '|' && c != '>' {
		key = keyIndicator(line, pos)
	}
	if key < 0 {
		return s.value(pos, line, owner)
	}
	s.stack[len(s.stack)-1].keys++
	if err := s.keysErr(pos + 1); err != nil {
		return err
	}
	return s.value(key+1, line, owner)
}

func (s *scanner) keysErr(col int) *Error {
	if k := s.stack[len(s.stack)-1].keys; k > MaxMappingKeys {
		return s.errAt(col, "too many keys in one mapping: expected at most %d; refused before parsing", MaxMappingKeys)
	}
	return nil
}

// keyIndicator returns the index of the ':' that ends a plain key on line from
// pos, or -1.
func keyIndicator(line string, pos int) int {
	for i := pos; i < len(line); i++ {
		switch line[i] {
		case ':':
			if i+1 == len(line) || line[i+1] == ' ' || line[i+1] == '\t' {
				return i
			}
		case '#':
			if i > pos && (line[i-1] == ' ' || line[i-1] == '\t') {
				return -1
			}
		}
	}
	return -1
}

// value scans the value that starts at or after pos: a flow collection, a quoted
// scalar, a block scalar owned by the node at column owner, or a plain scalar.
func (s *scanner) value(pos int, line string, owner int) *Error {
	for {
		for pos < len(line) && (line[pos] == ' ' || line[pos] == '\t') {
			pos++
		}
		if pos < len(line) && (line[pos] == '&' || line[pos] == '!') { // an anchor or a tag
			for pos < len(line) && line[pos] != ' ' && line[pos] != '\t' {
				pos++
			}
			continue
		}
		break
	}
	if blank(line[pos:]) {
		return nil
	}
	switch c := line[pos]; c {
	case '[', '{':
		return s.flowScan(line, pos)
	case '"', '\'':
		if closeQuote(line, pos+1, c) < 0 {
			s.quote = c
		}
	case '|', '>':
		s.blockScalar = owner
	}
	return nil
}

// flowScan scans line from pos inside (or at the start of) a flow collection.
func (s *scanner) flowScan(line string, pos int) *Error {
	tokenStart := true
	for i := pos; i < len(line); i++ {
		c := line[i]
		switch {
		case c == '#' && (i == 0 || line[i-1] == ' ' || line[i-1] == '\t'):
			return nil
		case c == '[' || c == '{':
			s.flow++
			if err := s.depthErr(i + 1); err != nil {
				return err
			}
			tokenStart = true
			continue
		case c == ']' || c == '}':
			if s.flow > 0 {
				s.flow--
			}
			if s.flow == 0 {
				return nil
			}
		case (c == '"' || c == '\'') && tokenStart:
			end := closeQuote(line, i+1, c)
			if end < 0 {
				s.quote = c
				return nil
			}
			i = end - 1
		}
		tokenStart = c == ',' || c == ' ' || c == '\t' || c == ':' || c == '[' || c == '{'
	}
	return nil
}

// closeQuote returns the index just past the quote that closes a scalar opened by
// q, searching line from pos, or -1 when the scalar goes on to the next line.
func closeQuote(line string, pos int, q byte) int {
	for i := pos; i < len(line); i++ {
		switch {
		case q == '"' && line[i] == '\\':
			i++
		case line[i] == q:
			if q == '\'' && i+1 < len(line) && line[i+1] == '\'' {
				i++
				continue
			}
			return i + 1
		}
	}
	return -1
}
