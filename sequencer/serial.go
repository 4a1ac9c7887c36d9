package sequencer

import (
	"errors"
	"fmt"
	"regexp"
	"regexp/syntax"
	"strings"
	"unicode"
	"unicode/utf8"

	"trimline/instruments/files"
)

// ErrBadSerial is what CheckSerial's errors wrap: a serial number that no run may
// use. It is bad input (the operator scanned or typed it), never a station fault;
// test with errors.Is and read the *SerialError for the serial and the rule.
var ErrBadSerial = errors.New("serial number refused")

// MaxSerialLen is the longest serial number accepted, in bytes. Serials name
// certificate files and ledger rows; 64 leaves room for any maker's scheme.
const MaxSerialLen = 64

// DefaultSerialPattern is the serial rule of a sequence file without a
// serial_pattern key: a letter or digit, then letters, digits, '.', '_' or '-'.
const DefaultSerialPattern = `[A-Za-z0-9][A-Za-z0-9._-]*`

// defaultSerialRE is DefaultSerialPattern anchored in full.
var defaultSerialRE = regexp.MustCompile(anchor(DefaultSerialPattern))

// SerialError is a refused serial number: the serial and the rule it breaks, in
// words an operator can act on.
type SerialError struct {
	Serial string // as given (Error shows it quoted and cut at MaxSerialLen)
	Rule   string // the rule it breaks
}

func (e *SerialError) Error() string {
	s := e.Serial
	if len(s) > MaxSerialLen {
		s = strings.ToValidUTF8(s[:MaxSerialLen], "") + "…"
	}
	return fmt.Sprintf("serial %q refused: %s", s, e.Rule)
}

// Unwrap returns ErrBadSerial.
func (e *SerialError) Unwrap() error { return ErrBadSerial }

// notInFileNames are the characters a serial never holds, whatever the pattern:
// path separators and the characters Windows refuses in file names (a serial
// names its certificate's file).
const notInFileNames = `/\:*?"<>|`

// CheckSerial says whether serial may be run with this sequence: nil, or a
// *SerialError (wrapping ErrBadSerial) naming the serial and the rule. Whatever
// the sequence file says, a serial is refused when it is empty, "-", longer than
// MaxSerialLen bytes, not UTF-8, or holds whitespace, a control character, a path
// separator or another character a file name cannot hold; then it must match the
// file's serial_pattern in full (DefaultSerialPattern when the key is absent).
// Safe for concurrent use.
func (s *Sequence) CheckSerial(serial string) error {
	bad := func(format string, args ...any) error {
		return &SerialError{Serial: serial, Rule: fmt.Sprintf(format, args...)}
	}
	switch {
	case serial == "":
		return bad("a serial number is required")
	case serial == "-":
		return bad(`"-" is not a serial number`)
	case len(serial) > MaxSerialLen:
		return bad("%d bytes long, at most %d are allowed", len(serial), MaxSerialLen)
	case !utf8.ValidString(serial):
		return bad("not valid UTF-8 text")
	case strings.ContainsFunc(serial, unicode.IsSpace):
		return bad("serial numbers hold no whitespace")
	case strings.ContainsFunc(serial, unicode.IsControl):
		return bad("serial numbers hold no control characters")
	case strings.ContainsAny(serial, notInFileNames):
		return bad("serial numbers hold no path separators or characters a file name cannot hold (%s)", notInFileNames)
	}
	if s == nil || s.serialRE == nil {
		if !defaultSerialRE.MatchString(serial) {
			return bad("it does not match the default serial rule %s (a letter or digit, then letters, digits, '.', '_' or '-'; the sequence file has no serial_pattern)", DefaultSerialPattern)
		}
		return nil
	}
	if !s.serialRE.MatchString(serial) {
		return bad("it does not match the %s serial pattern %s (serial_pattern in %s)", s.Product, s.SerialPattern, s.File.Name)
	}
	return nil
}

// CheckSerials checks every serial of a batch (CheckSerial) before any runs and
// returns every refusal at once, joined; nil when all may run.
func (s *Sequence) CheckSerials(serials []string) error {
	var errs []error
	for _, sn := range serials {
		if err := s.CheckSerial(sn); err != nil {
			errs = append(errs, err)
		}
	}
	return errors.Join(errs...)
}

// anchor makes pattern match a whole serial only.
func anchor(pattern string) string { return `^(?:` + pattern + `)$` }

// serialPattern compiles the sequence file's serial_pattern ("" = the default
// rule) into s; a pattern that does not compile is an error at the key.
func serialPattern(doc *files.Doc, s *Sequence, pattern *string, errs *files.List) {
	if pattern == nil {
		return
	}
	if strings.TrimSpace(*pattern) == "" {
		*errs = append(*errs, doc.Errorf("$.serial_pattern", "expected a regular expression for the whole serial number, e.g. \"BRX-[0-9]{5}\""))
		return
	}
	re, err := regexp.Compile(anchor(*pattern))
	if err != nil {
		msg := err.Error()
		var re2 *syntax.Error
		if errors.As(err, &re2) {
			msg = fmt.Sprintf("%s: %q", re2.Code, re2.Expr)
		}
		*errs = append(*errs, doc.Errorf("$.serial_pattern", "not a regular expression: %s", msg))
		return
	}
	s.SerialPattern, s.serialRE = *pattern, re
}
