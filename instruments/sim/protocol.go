package sim

import (
	"fmt"
	"strconv"
	"strings"
)

// Coding is how a trim DAC's register code maps to its correction.
type Coding string

const (
	// CodingBinaryOffset: codes 0..2^n−1, no correction at 2^(n−1) (the demo card).
	CodingBinaryOffset Coding = "binary_offset"
	// CodingTwosComplement: the register holds the n-bit pattern of a signed value
	// −2^(n−1)..2^(n−1)−1, no correction at 0.
	CodingTwosComplement Coding = "twos_complement"
)

// CodeFormat is how the trim port writes and reads codes.
type CodeFormat string

const (
	// CodeDecimal: decimal codes; the signed value for two's complement (the demo card).
	CodeDecimal CodeFormat = "decimal"
	// CodeHex: the register pattern in hex, written with or without 0x, answered in
	// upper case without 0x and padded to ceil(bits/4) digits.
	CodeHex CodeFormat = "hex"
)

// CodePlaceholder stands for the code in a write template.
const CodePlaceholder = "{code}"

// Protocol is the trim port's command set as templates: each is the command line the
// port answers (tokens separated by single spaces, case-sensitive); the two write
// templates hold CodePlaceholder where the code goes. An empty field is the demo
// card's command, except Unlock, where empty means the card has no lock.
type Protocol struct {
	Serial      string // answered with the unit's serial; "SN?"
	Firmware    string // answered with the firmware id; "FW?"
	OffsetWrite string // writes the offset register; "TRIM OFS {code}"
	OffsetRead  string // answered with the offset register; "TRIM OFS?"
	GainWrite   string // writes the gain register; "TRIM GAIN {code}"
	GainRead    string // answered with the gain register; "TRIM GAIN?"
	Store       string // stores the registers in non-volatile memory; "NV STORE"
	Unlock      string // unlocks trim writes and store until the unit is reloaded; "" = no lock
}

// DefaultProtocol returns the demo card's command set.
func DefaultProtocol() Protocol {
	return Protocol{
		Serial:      "SN?",
		Firmware:    "FW?",
		OffsetWrite: "TRIM OFS " + CodePlaceholder,
		OffsetRead:  "TRIM OFS?",
		GainWrite:   "TRIM GAIN " + CodePlaceholder,
		GainRead:    "TRIM GAIN?",
		Store:       "NV STORE",
	}
}

// withDefaults returns p with its empty commands (but Unlock) set to the demo card's.
func (p Protocol) withDefaults() Protocol {
	d := DefaultProtocol()
	for _, f := range []struct{ got, def *string }{
		{&p.Serial, &d.Serial}, {&p.Firmware, &d.Firmware}, {&p.OffsetWrite, &d.OffsetWrite},
		{&p.OffsetRead, &d.OffsetRead}, {&p.GainWrite, &d.GainWrite}, {&p.GainRead, &d.GainRead},
		{&p.Store, &d.Store},
	} {
		if *f.got == "" {
			*f.got = *f.def
		}
	}
	return p
}

// normLine returns line's tokens joined by single spaces.
func normLine(line string) string { return strings.Join(strings.Fields(line), " ") }

// template is one parsed command template: the text before and after the code, or
// the whole command when it takes no code. The zero template matches nothing.
type template struct {
	prefix, suffix string
	code           bool
}

// compileTemplate parses text as the template of settings key key; withCode says
// whether it must hold CodePlaceholder once (a write) or not at all.
func compileTemplate(key, text string, withCode bool) (template, error) {
	t := normLine(text)
	if t == "" {
		return template{}, settingErr(key, "%q: expected a command", text)
	}
	if t == "LID?" {
		return template{}, settingErr(key, "%q is the fixture's own command", text)
	}
	n := strings.Count(t, CodePlaceholder)
	if rest := strings.ReplaceAll(t, CodePlaceholder, ""); strings.ContainsAny(rest, "{}") {
		return template{}, settingErr(key, "%q: the only placeholder is %s", text, CodePlaceholder)
	}
	switch {
	case withCode && n != 1:
		return template{}, settingErr(key, "%q: expected %s once", text, CodePlaceholder)
	case !withCode && n != 0:
		return template{}, settingErr(key, "%q: this command takes no %s", text, CodePlaceholder)
	}
	if !withCode {
		return template{prefix: t}, nil
	}
	i := strings.Index(t, CodePlaceholder)
	return template{prefix: t[:i], suffix: t[i+len(CodePlaceholder):], code: true}, nil
}

// is reports whether the normalised line is the template's command (no code).
func (t template) is(line string) bool { return t.prefix != "" && !t.code && line == t.prefix }

// match returns the code text of a normalised line that fits the write template: a
// single token (no spaces) between the prefix and the suffix.
func (t template) match(line string) (string, bool) {
	if !t.code || len(line) <= len(t.prefix)+len(t.suffix) ||
		!strings.HasPrefix(line, t.prefix) || !strings.HasSuffix(line, t.suffix) {
		return "", false
	}
	c := line[len(t.prefix) : len(line)-len(t.suffix)]
	if strings.Contains(c, " ") {
		return "", false
	}
	return c, true
}

// port is the compiled protocol of one card.
type port struct {
	serial, firmware, offsetRead, gainRead, store, unlock template
	offsetWrite, gainWrite                                template
}

// compilePort compiles the card's command set; an error names the settings key. Only
// the commands of DACs the card has count, and no two may be the same command.
func compilePort(c card) (port, error) {
	var p port
	seen := map[string]string{}
	for _, f := range []struct {
		key, text string
		dst       *template
		code, use bool
	}{
		{"cmd_serial", c.proto.Serial, &p.serial, false, true},
		{"cmd_firmware", c.proto.Firmware, &p.firmware, false, true},
		{"cmd_offset_write", c.proto.OffsetWrite, &p.offsetWrite, true, c.trim.HasOffset()},
		{"cmd_offset_read", c.proto.OffsetRead, &p.offsetRead, false, c.trim.HasOffset()},
		{"cmd_gain_write", c.proto.GainWrite, &p.gainWrite, true, c.trim.HasGain()},
		{"cmd_gain_read", c.proto.GainRead, &p.gainRead, false, c.trim.HasGain()},
		{"cmd_store", c.proto.Store, &p.store, false, true},
		{"cmd_unlock", c.proto.Unlock, &p.unlock, false, c.proto.Unlock != ""},
	} {
		if !f.use {
			continue
		}
		t, err := compileTemplate(f.key, f.text, f.code)
		if err != nil {
			return port{}, err
		}
		id := t.prefix + "\x00" + t.suffix + "\x00" + strconv.FormatBool(t.code)
		if other, ok := seen[id]; ok {
			return port{}, settingErr(f.key, "%q is also %s", f.text, other)
		}
		seen[id] = f.key
		*f.dst = t
	}
	return p, nil
}

// parseCode parses a code written to DAC d in format f and returns the register
// pattern; ok is false for a malformed or out-of-range code.
func parseCode(d DAC, f CodeFormat, s string) (reg int, ok bool) {
	n := d.Width()
	if f == CodeHex {
		h := strings.TrimPrefix(strings.TrimPrefix(s, "0x"), "0X")
		if h == "" || strings.HasPrefix(h, "+") {
			return 0, false
		}
		v, err := strconv.ParseUint(h, 16, 32)
		if err != nil || v > uint64(d.MaxRegister()) {
			return 0, false
		}
		return int(v), true
	}
	v, err := strconv.Atoi(s)
	if err != nil {
		return 0, false
	}
	if d.TwosComplement {
		if v < -(1<<(n-1)) || v > 1<<(n-1)-1 {
			return 0, false
		}
		return v & d.MaxRegister(), true
	}
	if v < 0 || v > d.MaxRegister() {
		return 0, false
	}
	return v, true
}

// formatCode returns register reg of DAC d as the port answers it in format f.
func formatCode(d DAC, f CodeFormat, reg int) string {
	if f == CodeHex {
		return fmt.Sprintf("%0*X", (d.Width()+3)/4, reg)
	}
	if d.TwosComplement && reg >= 1<<(d.Width()-1) {
		reg -= 1 << d.Width()
	}
	return strconv.Itoa(reg)
}
