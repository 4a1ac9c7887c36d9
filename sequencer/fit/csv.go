package fit

import (
	"bufio"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
)

// InputError reports a problem in the content of a table read by ReadXY.
// Line and Col are 1-based; Col is a byte column within the line (after
// removal of a leading UTF-8 byte-order mark on line 1). Line or Col is 0
// when the problem has no more precise position.
type InputError struct {
	File      string // name passed to ReadXY
	Line, Col int
	Msg       string
}

// Error formats the error as "file:line:col: msg", leaving out the column
// when Col is 0 and both line and column when Line is 0.
func (e *InputError) Error() string {
	switch {
	case e.Line <= 0:
		return fmt.Sprintf("%s: %s", e.File, e.Msg)
	case e.Col <= 0:
		return fmt.Sprintf("%s:%d: %s", e.File, e.Line, e.Msg)
	}
	return fmt.Sprintf("%s:%d:%d: %s", e.File, e.Line, e.Col, e.Msg)
}

// Bounds on what ReadXY reads, so that no input costs more than a few MB: a
// characterisation has hundreds of points, a long logged sweep thousands.
const (
	maxLine  = 1 << 20  // bytes of one line
	MaxRows  = 100_000  // data rows
	MaxBytes = 16 << 20 // bytes of the whole input, comments included
)

// ReadXY reads a table of two or three numeric columns from r: x, y and
// optionally the per-point standard uncertainty u of y (in units of y). u is
// nil when the table has two columns. name is used only in error messages.
//
// Format:
//   - Blank lines and lines whose first non-blank character is '#' are
//     skipped. A trailing "\r" (CRLF line ends) and a leading UTF-8
//     byte-order mark are ignored.
//   - The separator is fixed by the first non-skipped line: ';' if it
//     contains a semicolon, else ',' if it contains a comma, else runs of
//     spaces and tabs. Blanks around ';' and ',' separators are ignored.
//     (So in a semicolon file a decimal comma is reported as an error, never
//     silently split.)
//   - The first non-skipped line is a header if none of its fields is a
//     number; it is skipped and its column count is not checked.
//   - Every data row must have the same number of columns, 2 or 3. Values
//     are parsed with strconv.ParseFloat and must be finite; u must be
//     positive.
//   - At most MaxRows data rows, lines of at most 1 MiB and MaxBytes in all:
//     ReadXY never reads more than MaxBytes+1 bytes of r.
//
// Errors about the content are of type *InputError and name file, line and
// column, e.g. `name:7:5: expected a number, found "abc"`. An input with no
// data rows is an *InputError too. A read error from r is returned wrapped
// (not as *InputError) with the file name and line number. ReadXY is safe
// for concurrent use with distinct readers.
func ReadXY(name string, r io.Reader) (x, y, u []float64, err error) {
	lr := &io.LimitedReader{R: r, N: MaxBytes + 1}
	sc := bufio.NewScanner(lr)
	sc.Buffer(make([]byte, 0, 4096), maxLine)
	var (
		lineNo   int
		first    = true // no non-skipped line seen yet
		sep      byte   // ';', ',' or 0 for blanks
		ncol     int    // columns per data row, once known
		ncolLine int    // line that fixed ncol
		fields   []field
	)
	fail := func(col int, format string, args ...any) (x, y, u []float64, err error) {
		return nil, nil, nil, &InputError{File: name, Line: lineNo, Col: col, Msg: fmt.Sprintf(format, args...)}
	}
	for sc.Scan() {
		lineNo++
		if lr.N <= 0 { // this line may be cut short: the input is over the bound
			return fail(0, "input larger than %d MiB: expected at most %d MiB of data", MaxBytes>>20, MaxBytes>>20)
		}
		line := sc.Text()
		if lineNo == 1 {
			line = strings.TrimPrefix(line, "\uFEFF")
		}
		line = strings.TrimSuffix(line, "\r")
		trimmed := strings.TrimLeft(line, " \t")
		if trimmed == "" || trimmed[0] == '#' {
			continue
		}
		if first {
			switch {
			case strings.IndexByte(line, ';') >= 0:
				sep = ';'
			case strings.IndexByte(line, ',') >= 0:
				sep = ','
			}
		}
		fields = splitFields(fields[:0], line, sep)
		if first {
			first = false
			if isHeader(fields) {
				continue
			}
		}
		var vals [3]float64
		for i, f := range fields {
			v, perr := strconv.ParseFloat(f.s, 64)
			switch {
			case perr != nil && errors.Is(perr, strconv.ErrRange):
				return fail(f.col, "number out of range, found %s", quote(f.s))
			case perr != nil:
				return fail(f.col, "expected a number, found %s", quote(f.s))
			case math.IsNaN(v) || math.IsInf(v, 0):
				return fail(f.col, "expected a finite number, found %s", quote(f.s))
			case i == 2 && !(v > 0):
				return fail(f.col, "standard uncertainty must be positive, found %s", quote(f.s))
			}
			if i < len(vals) {
				vals[i] = v
			}
		}
		switch {
		case ncol == 0 && (len(fields) < 2 || len(fields) > 3):
			col := len(line) + 1
			if len(fields) > 3 {
				col = fields[3].col
			}
			return fail(col, "expected 2 or 3 columns (x, y[, u]), found %d", len(fields))
		case ncol == 0:
			ncol, ncolLine = len(fields), lineNo
		case len(fields) != ncol:
			col := len(line) + 1
			if len(fields) > ncol {
				col = fields[ncol].col
			}
			return fail(col, "expected %d columns as on line %d, found %d", ncol, ncolLine, len(fields))
		}
		if len(x) == MaxRows {
			return fail(1, "expected at most %d data rows", MaxRows)
		}
		x = append(x, vals[0])
		y = append(y, vals[1])
		if ncol == 3 {
			u = append(u, vals[2])
		}
	}
	if serr := sc.Err(); serr != nil {
		if errors.Is(serr, bufio.ErrTooLong) && lr.N <= 0 {
			lineNo++
			return fail(0, "input larger than %d MiB: expected at most %d MiB of data", MaxBytes>>20, MaxBytes>>20)
		}
		if errors.Is(serr, bufio.ErrTooLong) {
			lineNo++
			return fail(0, "line longer than %d bytes", maxLine)
		}
		return nil, nil, nil, fmt.Errorf("%s:%d: reading: %w", name, lineNo+1, serr)
	}
	if len(x) == 0 {
		return nil, nil, nil, &InputError{File: name, Msg: "no data rows"}
	}
	return x, y, u, nil
}

// field is one field of a line and the 1-based byte column where it starts.
type field struct {
	s   string
	col int
}

func isBlank(c byte) bool { return c == ' ' || c == '\t' }

// splitFields appends the fields of line to dst. With sep ';' or ',' every
// separator ends a field (fields may be empty) and blanks around fields are
// dropped; with sep 0 fields are maximal runs of non-blank bytes.
func splitFields(dst []field, line string, sep byte) []field {
	if sep == 0 {
		for i := 0; i < len(line); {
			if isBlank(line[i]) {
				i++
				continue
			}
			j := i
			for j < len(line) && !isBlank(line[j]) {
				j++
			}
			dst = append(dst, field{line[i:j], i + 1})
			i = j
		}
		return dst
	}
	for start := 0; ; {
		end := strings.IndexByte(line[start:], sep)
		if end < 0 {
			end = len(line)
		} else {
			end += start
		}
		i, j := start, end
		for i < j && isBlank(line[i]) {
			i++
		}
		for j > i && isBlank(line[j-1]) {
			j--
		}
		dst = append(dst, field{line[i:j], i + 1})
		if end == len(line) {
			return dst
		}
		start = end + 1
	}
}

// isHeader reports whether no field of a line parses as a number (values out
// of range, NaN and Inf count as numbers, so they are reported as errors).
func isHeader(fields []field) bool {
	for _, f := range fields {
		if _, err := strconv.ParseFloat(f.s, 64); err == nil || errors.Is(err, strconv.ErrRange) {
			return false
		}
	}
	return true
}

// quote quotes s for an error message, shortening very long fields.
func quote(s string) string {
	const maxQuote = 40
	if len(s) > maxQuote {
		return strconv.Quote(s[:maxQuote]) + "..."
	}
	return strconv.Quote(s)
}
