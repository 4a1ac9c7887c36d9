package console

import (
	"regexp"
	"strings"
)

// A number and its unit, a relation sign and its number, the ends of a range:
// on the operator's screen none of them may be split across two lines ("limit
// ≤ 1" on one line and "mV" alone on the next), so the console joins them with
// a no-break space (U+00A0). The sentences themselves (sequencer.ForOperator)
// keep plain spaces: the certificate and the CLI set them.
var (
	numberUnit = regexp.MustCompile(`(\d) ((?:[pnµumkMG]?(?:V|A|Ω|Hz|s)|%|ppm|counts?|LSB|°C|dB)(?:$|[^\p{L}\p{N}]))`)
	signNumber = regexp.MustCompile(`([≤≥<>±=]) ([−+\-]?\d)`)
	hyphenNeg  = regexp.MustCompile(`(^|[\s(:,=])-(\d)`)
)

// keepTogether joins with a no-break space what must stay on one line:
// "limit ≤ 1 mV" → "limit ≤\u00a01\u00a0mV", "−0.2 … +0.8 mV" →
// "−0.2\u00a0…\u00a0+0.8\u00a0mV". A number's minus sign written as a hyphen
// becomes U+2212, as the certificate writes it.
func keepTogether(s string) string {
	s = hyphenNeg.ReplaceAllString(s, "${1}−${2}")
	s = strings.ReplaceAll(s, " … ", "\u00a0…\u00a0")
	s = signNumber.ReplaceAllString(s, "${1}\u00a0${2}")
	// Twice: a match consumes the character after the unit, so "1 V 2 V"
	// needs a second pass for its second pair.
	for range 2 {
		s = numberUnit.ReplaceAllString(s, "${1}\u00a0${2}")
	}
	return s
}

// keepAllTogether is lines with keepTogether applied to each, in a new slice.
func keepAllTogether(lines []string) []string {
	out := make([]string, len(lines))
	for i, l := range lines {
		out[i] = keepTogether(l)
	}
	return out
}
