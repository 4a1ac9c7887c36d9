package scpi

import (
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"

	"trimline/instruments"
)

// ErrMalformed is wrapped by every error about a reply that does not have the
// expected form (a garbled number, an identity without four fields, an error-queue
// entry that is not code,"text").
var ErrMalformed = errors.New("malformed reply")

// ErrFlagged is wrapped by QueryFloat when the instrument answered with one of the
// SCPI special values (overload or not-a-number) where a number was needed.
var ErrFlagged = errors.New("flagged value")

// SCPI-1999 special values, Command Reference 7.2.1.5: an overload is ±9.9E37 and
// not-a-number is 9.91E37.
const (
	OverloadValue = 9.9e37
	NaNValue      = 9.91e37
)

// ParseNumber parses one SCPI numeric response (NR1, NR2 or NR3: an optional sign,
// digits with an optional decimal point, an optional exponent), surrounded by
// nothing but spaces or tabs. Anything else (empty, "inf", "nan", hex, trailing
// junk, a value beyond float64) is an error wrapping ErrMalformed.
//
// The special values are flags, never numbers: a magnitude of exactly 9.91E37 gives
// FlagNaN with value NaNValue; any other magnitude of 9.9E37 or more gives
// FlagOverload with value ±OverloadValue (signed like the reply). Callers must not
// use value unless flag is FlagNone.
func ParseNumber(s string) (value float64, flag instruments.Flag, err error) {
	t := strings.Trim(s, " \t")
	if !numeric(t) {
		return 0, instruments.FlagNone, fmt.Errorf("%w: %q is not a number", ErrMalformed, s)
	}
	v, perr := strconv.ParseFloat(t, 64)
	if perr != nil || math.IsInf(v, 0) || math.IsNaN(v) {
		return 0, instruments.FlagNone, fmt.Errorf("%w: %q is out of range", ErrMalformed, s)
	}
	switch a := math.Abs(v); {
	case a == NaNValue:
		return NaNValue, instruments.FlagNaN, nil
	case a >= OverloadValue:
		return math.Copysign(OverloadValue, v), instruments.FlagOverload, nil
	}
	return v, instruments.FlagNone, nil
}

// numeric reports whether t is [+-]? (d+ (. d*)? | . d+) ([eE] [+-]? d+)?.
func numeric(t string) bool {
	i := 0
	if i < len(t) && (t[i] == '+' || t[i] == '-') {
		i++
	}
	mant := 0
	for i < len(t) && isDigit(t[i]) {
		i++
		mant++
	}
	if i < len(t) && t[i] == '.' {
		i++
		for i < len(t) && isDigit(t[i]) {
			i++
			mant++
		}
	}
	if mant == 0 {
		return false
	}
	if i < len(t) && (t[i] == 'e' || t[i] == 'E') {
		i++
		if i < len(t) && (t[i] == '+' || t[i] == '-') {
			i++
		}
		exp := 0
		for i < len(t) && isDigit(t[i]) {
			i++
			exp++
		}
		if exp == 0 {
			return false
		}
	}
	return i == len(t)
}

func isDigit(b byte) bool { return b >= '0' && b <= '9' }

// ParseNumbers parses a comma-separated list of numeric responses with ParseNumber.
// An empty reply or an empty element is an error wrapping ErrMalformed.
func ParseNumbers(s string) ([]float64, []instruments.Flag, error) {
	parts := strings.Split(s, ",")
	vals := make([]float64, len(parts))
	flags := make([]instruments.Flag, len(parts))
	for i, p := range parts {
		v, f, err := ParseNumber(p)
		if err != nil {
			return nil, nil, fmt.Errorf("element %d of %d: %w", i+1, len(parts), err)
		}
		vals[i], flags[i] = v, f
	}
	return vals, flags, nil
}

// ParseIDN parses an IEEE 488.2 *IDN? reply strictly: exactly four comma-separated
// fields (maker, model, serial, firmware), each non-empty after trimming spaces and
// made of printable ASCII other than ';' and '"'. An instrument says "0" for a field
// it does not know; ParseIDN does not invent it. A bad reply wraps ErrMalformed.
func ParseIDN(s string) (instruments.Identity, error) {
	f := strings.Split(s, ",")
	if len(f) != 4 {
		return instruments.Identity{}, fmt.Errorf("%w: identity %q has %d comma-separated fields, want 4 (maker,model,serial,firmware)", ErrMalformed, s, len(f))
	}
	names := [4]string{"maker", "model", "serial", "firmware"}
	for i := range f {
		f[i] = strings.Trim(f[i], " ")
		if f[i] == "" {
			return instruments.Identity{}, fmt.Errorf("%w: identity %q: the %s field is empty", ErrMalformed, s, names[i])
		}
		for j := 0; j < len(f[i]); j++ {
			if c := f[i][j]; c < 0x20 || c > 0x7e || c == ';' || c == '"' {
				return instruments.Identity{}, fmt.Errorf("%w: identity %q: the %s field holds byte %#02x", ErrMalformed, s, names[i], c)
			}
		}
	}
	return instruments.Identity{Maker: f[0], Model: f[1], Serial: f[2], Firmware: f[3]}, nil
}

// ParseErrorEntry parses one SYST:ERR? reply, <code>,"<text>" (a doubled quote in
// the text stands for one). Code 0 means the queue is empty.
func ParseErrorEntry(s string) (code int, text string, err error) {
	t := strings.Trim(s, " \t")
	i := strings.IndexByte(t, ',')
	if i < 0 {
		return 0, "", fmt.Errorf("%w: error-queue entry %q is not code,\"text\"", ErrMalformed, s)
	}
	cs := strings.Trim(t[:i], " ")
	if !numeric(cs) || strings.ContainsAny(cs, ".eE") {
		return 0, "", fmt.Errorf("%w: error-queue entry %q: code %q is not an integer", ErrMalformed, s, cs)
	}
	code, perr := strconv.Atoi(strings.TrimPrefix(cs, "+"))
	if perr != nil {
		return 0, "", fmt.Errorf("%w: error-queue entry %q: code %q is not an integer", ErrMalformed, s, cs)
	}
	q := strings.Trim(t[i+1:], " ")
	if len(q) < 2 || q[0] != '"' || q[len(q)-1] != '"' {
		return 0, "", fmt.Errorf("%w: error-queue entry %q: the text is not quoted", ErrMalformed, s)
	}
	body := q[1 : len(q)-1]
	if strings.Contains(strings.ReplaceAll(body, `""`, ""), `"`) {
		return 0, "", fmt.Errorf("%w: error-queue entry %q: stray quote in the text", ErrMalformed, s)
	}
	return code, strings.ReplaceAll(body, `""`, `"`), nil
}

// Canonical returns the header of a program line in canonical short form: upper
// case, each node cut to its SCPI short form (a node longer than four characters is
// cut to four, or to three when the fourth is a vowel), without a leading colon.
// "syst:error:next?" and "SYST:ERR:NEXT?" both give "SYST:ERR:NEXT?".
func Canonical(line string) string {
	h := strings.TrimSpace(line)
	if i := strings.IndexAny(h, " \t"); i >= 0 {
		h = h[:i]
	}
	h = strings.TrimPrefix(strings.ToUpper(h), ":")
	q := strings.HasSuffix(h, "?")
	h = strings.TrimSuffix(h, "?")
	nodes := strings.Split(h, ":")
	for i, n := range nodes {
		if len(n) > 4 && !strings.HasPrefix(n, "*") {
			digits := strings.TrimLeft(n, "ABCDEFGHIJKLMNOPQRSTUVWXYZ_")
			alpha := n[:len(n)-len(digits)]
			if len(alpha) > 4 {
				alpha = alpha[:4]
				if strings.IndexByte("AEIOU", alpha[3]) >= 0 {
					alpha = alpha[:3]
				}
			}
			nodes[i] = alpha + digits
		}
	}
	h = strings.Join(nodes, ":")
	if q {
		h += "?"
	}
	return h
}

// notIdempotent are canonical header prefixes of queries that change state: reading
// the error queue or an event register consumes it, a self-test or calibration
// query acts, MEASure reconfigures.
var notIdempotent = []string{"SYST:ERR", "*ESR", "*TST", "*CAL", "CAL", "MEAS", "STAT", "*RST", "*CLS"}

// IsIdempotent reports whether a line may be sent again without effect: a single
// query (its header or the whole line ends in '?', no ';') whose header is not one of those that
// consume or change state (SYST:ERR?, *ESR?, *TST?, *CAL?, CALibration…?,
// MEASure…?, STATus…?). Anything else is treated as a command that may have changed
// an output and is never repeated.
func IsIdempotent(line string) bool {
	if strings.Contains(line, ";") {
		return false
	}
	h := Canonical(line)
	if !strings.HasSuffix(h, "?") && !strings.HasSuffix(strings.TrimSpace(line), "?") {
		return false
	}
	for _, p := range notIdempotent {
		if h == p+"?" || strings.HasPrefix(h, p+":") || strings.HasPrefix(h, p+"?") {
			return false
		}
	}
	return true
}
