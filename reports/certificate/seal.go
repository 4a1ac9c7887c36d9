package certificate

import (
	"bytes"
	"fmt"
	"strings"

	"trimline/reports/internal/pdfdoc"
)

// The seal block sits at the foot of page 1, just above the footer, at the same
// place on every certificate: the station key, the person's signature
// manifestation when there is one, the record's SHA-256 and how to verify on the
// left; the verification code in a box on the right.
const (
	sealGap    = 3.0  // space between the body and the seal block
	sealPad    = 1.6  // padding above and below the lines
	sealLabelW = 27.0 // label column, as in the identification block
	sealCodeW  = 50.0 // verification code box
	sealCodeH  = 13.2 // height of the lines in the box
)

var (
	stSealLabel = stLabel.Sized(7)
	stSealValue = pdfdoc.Body.Sized(7.5)
	stSealMono  = stMono.Sized(6.6)
	stSealNote  = pdfdoc.Small.Sized(6.6)
	stSealCode  = pdfdoc.Style{Family: pdfdoc.Mono, Size: 13, Color: pdfdoc.Ink}
)

// sealed reports whether the certificate carries a seal.
func (d *doc) sealed() bool { return d.opt.KeyID != "" || d.opt.VerificationCode != "" }

// sealLine is one labelled line of the seal block, as wrapped spans.
type sealLine struct {
	label string
	parts []pdfdoc.Span // laid out one after another; a span that does not fit starts a new row
}

// sealLines are the labelled lines of the block.
func (d *doc) sealLines() []sealLine {
	o := d.opt
	var ls []sealLine
	if d.sealed() {
		ls = append(ls, sealLine{"Station seal", []pdfdoc.Span{{Text: "Signed by station key " + dash(o.KeyID), St: stSealValue}}})
	} else {
		ls = append(ls, sealLine{"Station seal", []pdfdoc.Span{{Text: "Unsigned", St: pdfdoc.Bold.Sized(8)},
			{Text: "  This certificate carries no station seal; it cannot be verified.", St: stSealNote}}})
	}
	if s := o.Signer; s != nil {
		name, meaning, when := strings.TrimSpace(s.Name), strings.TrimSpace(s.Meaning), fmtTime(s.Signed)
		if name == "" {
			name = "name not recorded"
		}
		if meaning == "" {
			meaning = "meaning not stated"
		}
		if s.Signed.IsZero() {
			when = "time not recorded"
		}
		ls = append(ls, sealLine{"Signature", []pdfdoc.Span{
			{Text: name, St: pdfdoc.Bold.Sized(7.5)},
			{Text: "  —  " + meaning, St: stSealValue},
			{Text: "  —  " + when, St: stSealValue}}})
	}
	if o.RecordSHA256 != "" || d.sealed() {
		ls = append(ls, sealLine{"Record SHA-256", []pdfdoc.Span{{Text: dash(o.RecordSHA256), St: stSealMono}}})
	}
	if o.ChainLink != "" {
		ls = append(ls, sealLine{"Chain link", []pdfdoc.Span{{Text: o.ChainLink, St: stSealMono},
			{Text: fmt.Sprintf("  run %d of station %s's chain in the ledger", o.ChainSeq, d.rec.Station), St: stSealNote}}})
	}
	if d.sealed() {
		ls = append(ls, sealLine{"To verify", []pdfdoc.Span{{Text: "trimline audit verify FILE.pdf", St: stSealMono},
			{Text: "  needs FILE.pdf.seal and the station's public key", St: stSealNote}}})
	}
	return ls
}

// sealValueW is the width of the values of the seal block.
func (d *doc) sealValueW() float64 {
	w := contentW - sealLabelW - 3
	if d.sealed() {
		w -= sealCodeW + 3
	}
	return w
}

// sealRows breaks a line into rows of spans that fit w: the spans run on while they
// fit, and a span that does not fit starts a row of its own, wrapped.
func (d *doc) sealRows(l sealLine) [][]pdfdoc.Span {
	w := d.sealValueW()
	var rows [][]pdfdoc.Span
	var cur []pdfdoc.Span
	x := 0.0
	for _, sp := range l.parts {
		if sw := d.TextWidth(sp.Text, sp.St); len(cur) > 0 && x+sw <= w {
			cur = append(cur, sp)
			x += sw
			continue
		}
		if len(cur) > 0 {
			rows = append(rows, cur)
			cur, x = nil, 0
		}
		// A span that starts a row drops its separator.
		lines := d.Wrap(strings.TrimLeft(sp.Text, " —"), w, sp.St)
		for _, t := range lines[:len(lines)-1] {
			rows = append(rows, []pdfdoc.Span{{Text: t, St: sp.St}})
		}
		last := pdfdoc.Span{Text: lines[len(lines)-1], St: sp.St}
		cur, x = []pdfdoc.Span{last}, d.TextWidth(last.Text, sp.St)
	}
	if len(cur) > 0 {
		rows = append(rows, cur)
	}
	return rows
}

// sealRowH is the height of one row of the seal block.
const sealRowH = 3.7

// sealHeight is the height of the seal block.
func (d *doc) sealHeight() float64 {
	n := 0
	for _, l := range d.sealLines() {
		n += len(d.sealRows(l))
	}
	h := 2*sealPad + float64(n)*sealRowH
	if d.sealed() {
		h = max(h, sealCodeH+1.4+2*sealPad) // room for the code box
	}
	return h
}

// seal draws the seal block at the foot of page 1.
func (d *doc) seal() {
	d.PDF.SetPage(1)
	top := bottom - d.sealH
	d.Rule(top, pdfdoc.Ink, 0.35)
	y := top + sealPad
	vx := marginL + sealLabelW
	for _, l := range d.sealLines() {
		d.Cell(marginL, y, sealLabelW, sealRowH, l.label, stSealLabel, "L")
		for _, r := range d.sealRows(l) {
			x := vx
			for _, sp := range r {
				d.Cell(x, y, d.sealValueW(), sealRowH, sp.Text, sp.St, "L")
				x += d.TextWidth(sp.Text, sp.St)
			}
			y += sealRowH
		}
	}
	if !d.sealed() {
		return
	}
	bx, by, bh := marginL+contentW-sealCodeW, top+1.4, d.sealH-1.4
	d.FillRect(bx, by, sealCodeW, bh, pdfdoc.HeadFill)
	cy := by + (bh-sealCodeH)/2 // the code's three lines, centred in the box
	d.Cell(bx, cy, sealCodeW, 3.6, "Verification code", stSealLabel, "C")
	d.Cell(bx, cy+3.6, sealCodeW, 6.2, dash(d.opt.VerificationCode), stSealCode, "C")
	d.Cell(bx, cy+9.8, sealCodeW, 3.4, "quote it to identify this certificate", stSealNote, "C")
}

// keywordsTag starts the document's keywords. The full keywords are
// "trimline-certificate NUMBER run RUNID", followed by " chain HASH" when the
// certificate carries its chain link, each field percent-escaped (see
// escapeField), so that the number, the run and the link can be read back from the
// raw PDF bytes: the document information dictionary is not compressed.
const keywordsTag = "trimline-certificate"

func keywords(number, runID, chainLink string) string {
	k := keywordsTag + " " + escapeField(number) + " run " + escapeField(runID)
	if chainLink != "" {
		k += " chain " + escapeField(chainLink)
	}
	return k
}

// escapeField writes s with only ASCII letters, digits and - . _ + : left as they
// are; every other byte (space, parentheses, backslash, non-ASCII) becomes %XX.
// An empty field is written "%", so that the fields stay in place.
func escapeField(s string) string {
	if s == "" {
		return "%"
	}
	const hexd = "0123456789ABCDEF"
	var b strings.Builder
	for i := 0; i < len(s); i++ {
		c := s[i]
		switch {
		case c >= 'a' && c <= 'z', c >= 'A' && c <= 'Z', c >= '0' && c <= '9', strings.IndexByte("-._+:", c) >= 0:
			b.WriteByte(c)
		default:
			b.WriteByte('%')
			b.WriteByte(hexd[c>>4])
			b.WriteByte(hexd[c&15])
		}
	}
	return b.String()
}

func unescapeField(s string) (string, bool) {
	if s == "%" {
		return "", true
	}
	var b []byte
	for i := 0; i < len(s); i++ {
		c := s[i]
		if c != '%' {
			b = append(b, c)
			continue
		}
		if i+2 >= len(s) {
			return "", false
		}
		hi, ok1 := unhex(s[i+1])
		lo, ok2 := unhex(s[i+2])
		if !ok1 || !ok2 {
			return "", false
		}
		b = append(b, hi<<4|lo)
		i += 2
	}
	return string(b), true
}

func unhex(c byte) (byte, bool) {
	switch {
	case c >= '0' && c <= '9':
		return c - '0', true
	case c >= 'A' && c <= 'F':
		return c - 'A' + 10, true
	case c >= 'a' && c <= 'f':
		return c - 'a' + 10, true
	}
	return 0, false
}

// Metadata finds the certificate number and run id a certificate of this package
// carries in its document information (the /Keywords entry
// "trimline-certificate NUMBER run RUNID"), reading the raw PDF bytes: it needs no
// PDF parser and works on a PDF that was altered, as long as that entry was not.
// When the entry occurs more than once (an incremental update appends a new one)
// the last is taken, as PDF readers do. ok is false when there is no such entry.
func Metadata(pdf []byte) (number, runID string, ok bool) {
	f, ok := metadataFields(pdf)
	return f[0], f[1], ok
}

// ChainLink is the chain link the certificate carries in the same entry as
// Metadata's (" chain HASH" after the run id), "" when it carries none
// (certificates made before they carried it, or without a ledger link).
func ChainLink(pdf []byte) string {
	f, _ := metadataFields(pdf)
	return f[2]
}

// metadataFields reads the last well-formed keywords entry: number, run id and
// chain link ("" when absent).
func metadataFields(pdf []byte) (out [3]string, ok bool) {
	marker := []byte("/Keywords (" + keywordsTag + " ")
	for rest := pdf; ; {
		i := bytes.Index(rest, marker)
		if i < 0 {
			return out, ok
		}
		rest = rest[i+len(marker):]
		end := bytes.IndexByte(rest, ')')
		if end < 0 {
			return out, ok
		}
		f := strings.Split(string(rest[:end]), " ")
		if !(len(f) == 3 || len(f) == 5 && f[3] == "chain") || f[1] != "run" {
			continue
		}
		n, ok1 := unescapeField(f[0])
		r, ok2 := unescapeField(f[2])
		c, ok3 := "", true
		if len(f) == 5 {
			c, ok3 = unescapeField(f[4])
		}
		if ok1 && ok2 && ok3 {
			out, ok = [3]string{n, r, c}, true
		}
	}
}
