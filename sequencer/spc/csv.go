package spc

import (
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"trimline/sequencer/fit"
)

// MaxRows bounds the rows ReadColumn reads (trimline chart): a chart of a shift has
// hundreds of points, a year's log tens of thousands.
const MaxRows = 100_000

// ReadColumn reads one numeric column of a CSV table from r:
// the column headed column, or, when column is "", the first column whose
// first data row holds a number. It returns the values and the header of the
// column read. name is used only in error messages.
//
// Format: the separator is ';' when the first line that is not blank or a
// '#' comment holds one, else ',' when it holds one, else a tab; blank lines
// and '#' comments are skipped; a leading UTF-8 byte-order mark is ignored.
// The first row is a header when none of its fields is a number (as trimline
// fit judges it); without one the columns are named "column 1", "column 2", ….
// Other columns may hold anything (a serial, a date); every cell of the
// column read must be a finite number.
//
// Errors about the content are *fit.InputError, "name:line:col: message",
// as trimline fit gives them.
func ReadColumn(name string, r io.Reader, column string) (xs []float64, header string, err error) {
	data, err := io.ReadAll(io.LimitReader(r, fit.MaxBytes+1))
	if err != nil {
		return nil, "", fmt.Errorf("%s: reading: %w", name, err)
	}
	if len(data) > fit.MaxBytes {
		return nil, "", &fit.InputError{File: name, Msg: fmt.Sprintf("input larger than %d MiB: expected at most %d MiB of data", fit.MaxBytes>>20, fit.MaxBytes>>20)}
	}
	text := strings.TrimPrefix(string(data), "\uFEFF")
	cr := csv.NewReader(strings.NewReader(text))
	cr.Comma = sniffSeparator(text)
	cr.Comment = '#'
	cr.FieldsPerRecord = -1
	cr.TrimLeadingSpace = true
	cr.ReuseRecord = true
	fail := func(line, col int, format string, args ...any) ([]float64, string, error) {
		return nil, "", &fit.InputError{File: name, Line: line, Col: col, Msg: fmt.Sprintf(format, args...)}
	}
	var names []string
	idx := -1
	for {
		rec, rerr := cr.Read()
		if rerr == io.EOF {
			break
		}
		var pe *csv.ParseError
		if errors.As(rerr, &pe) {
			return fail(pe.Line, pe.Column, "%v", pe.Err)
		}
		if rerr != nil {
			return nil, "", fmt.Errorf("%s: reading: %w", name, rerr)
		}
		if names == nil {
			names = make([]string, len(rec))
			hasHeader := true // no field of a header is a number, as trimline fit judges
			for i, s := range rec {
				names[i] = strings.TrimSpace(s)
				if _, perr := strconv.ParseFloat(names[i], 64); perr == nil || errors.Is(perr, strconv.ErrRange) {
					hasHeader = false
				}
			}
			if !hasHeader {
				clear(names)
			}
			if column != "" {
				for i, s := range names {
					if s == column {
						idx = i
						break
					}
				}
				if idx < 0 {
					line, _ := cr.FieldPos(0)
					if !hasHeader {
						return fail(line, 1, "no column headed %q: the first row holds numbers, not a header", column)
					}
					return fail(line, 1, "no column headed %q: expected one of %s", column, quoteList(names))
				}
			}
			if hasHeader {
				continue
			}
		}
		line, _ := cr.FieldPos(0)
		if idx < 0 { // the first data row picks the first numeric column
			for i, s := range rec {
				if _, perr := strconv.ParseFloat(strings.TrimSpace(s), 64); perr == nil {
					idx = i
					break
				}
			}
			if idx < 0 {
				return fail(line, 1, "expected a numeric column, found none in the first data row (name one with --column)")
			}
		}
		if idx >= len(rec) {
			l, c := cr.FieldPos(len(rec) - 1)
			return fail(l, c+len(rec[len(rec)-1]), "expected a value in column %d (%q), found only %d columns", idx+1, names[min(idx, len(names)-1)], len(rec))
		}
		s := strings.TrimSpace(rec[idx])
		l, c := cr.FieldPos(idx)
		v, perr := strconv.ParseFloat(s, 64)
		switch {
		case s == "":
			return fail(l, c, "expected a number in column %q, found an empty cell", header0(names, idx))
		case perr != nil && errors.Is(perr, strconv.ErrRange):
			return fail(l, c, "number out of range, found %q", s)
		case perr != nil:
			return fail(l, c, "expected a number in column %q, found %q", header0(names, idx), s)
		case math.IsNaN(v) || math.IsInf(v, 0):
			return fail(l, c, "expected a finite number, found %q", s)
		}
		if len(xs) == MaxRows {
			return fail(l, 1, "expected at most %d data rows", MaxRows)
		}
		xs = append(xs, v)
	}
	if len(xs) == 0 {
		return fail(0, 0, "no data rows")
	}
	return xs, header0(names, idx), nil
}

// header0 is the header of column i, or "column i+1" when it is blank or
// missing.
func header0(names []string, i int) string {
	if i < len(names) && names[i] != "" {
		return names[i]
	}
	return fmt.Sprintf("column %d", i+1)
}

// sniffSeparator is the separator of a table, judged by its first line that
// is neither blank nor a '#' comment.
func sniffSeparator(text string) rune {
	for line := range strings.Lines(text) {
		t := strings.TrimSpace(line)
		if t == "" || t[0] == '#' {
			continue
		}
		switch {
		case strings.Contains(line, ";"):
			return ';'
		case strings.Contains(line, ","):
			return ','
		}
		return '\t'
	}
	return ','
}

// quoteList quotes names for a message: "a", "b", "c".
func quoteList(names []string) string {
	q := make([]string, len(names))
	for i, s := range names {
		q[i] = strconv.Quote(s)
	}
	return strings.Join(q, ", ")
}
