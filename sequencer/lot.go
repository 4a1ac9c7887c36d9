package sequencer

import (
	"fmt"
	"strings"
	"unicode"
	"unicode/utf8"
)

// MaxLotLen is the longest lot id accepted, in bytes.
const MaxLotLen = 64

// CheckLot says whether lot may be recorded as a run's production lot: ""
// (no lot) or up to MaxLotLen bytes of UTF-8 text without control characters
// and without leading or trailing spaces.
func CheckLot(lot string) error { return checkLabel("lot", lot) }

// checkLabel applies CheckLot's rule to a label of another kind (what: "lot",
// "site"), which the error names.
func checkLabel(what, s string) error {
	switch {
	case s == "":
		return nil
	case len(s) > MaxLotLen:
		return fmt.Errorf("%s %q…: %d bytes long, at most %d are allowed", what, strings.ToValidUTF8(s[:MaxLotLen], ""), len(s), MaxLotLen)
	case !utf8.ValidString(s):
		return fmt.Errorf("%s id is not valid UTF-8 text", what)
	case strings.ContainsFunc(s, unicode.IsControl):
		return fmt.Errorf("%s %q: %s ids hold no control characters", what, s, what)
	case strings.TrimSpace(s) != s:
		return fmt.Errorf("%s %q: no spaces before or after the %s id", what, s, what)
	}
	return nil
}
