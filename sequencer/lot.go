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
func CheckLot(lot string) error {
	switch {
	case lot == "":
		return nil
	case len(lot) > MaxLotLen:
		return fmt.Errorf("lot %q…: %d bytes long, at most %d are allowed", strings.ToValidUTF8(lot[:MaxLotLen], ""), len(lot), MaxLotLen)
	case !utf8.ValidString(lot):
		return fmt.Errorf("lot id is not valid UTF-8 text")
	case strings.ContainsFunc(lot, unicode.IsControl):
		return fmt.Errorf("lot %q: lot ids hold no control characters", lot)
	case strings.TrimSpace(lot) != lot:
		return fmt.Errorf("lot %q: no spaces before or after the lot id", lot)
	}
	return nil
}
