package sim

import (
	"fmt"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"unicode/utf8"
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

// Placeholders of the command templates: CodePlaceholder stands for a trim code in
// a trim write, ValuePlaceholder for a coefficient in a coefficient write, and
// ChannelPlaceholder for the channel (1..channels) in any per-channel command.
const (
	CodePlaceholder    = "{code}"
	ValuePlaceholder   = "{value}"
	ChannelPlaceholder = "{channel}"
)

// Protocol is the trim port's command set as templates: each is the command line the
// port answers (tokens separated by single spaces, case-sensitive); the write
// templates hold CodePlaceholder or ValuePlaceholder where the number goes, and the
// per-channel commands (trim and coefficient reads and writes, Read) may hold
// ChannelPlaceholder. An empty field is the demo card's command, except Unlock, where
// empty means the card has no lock.
type Protocol struct {
	Serial      string // answered with the unit's serial; "SN?"
	Firmware    string // answered with the firmware id; "FW?"
	OffsetWrite string // writes the offset register; "TRIM OFS {code}"
	OffsetRead  string // answered with the offset register; "TRIM OFS?"
	GainWrite   string // writes the gain register; "TRIM GAIN {code}"
	GainRead    string // answered with the gain register; "TRIM GAIN?"
	Store       string // stores the registers in non-volatile memory; "NV STORE"
	Unlock      string // unlocks trim writes and store until the unit is reloaded; "" = no lock

	Read            string // a reported card: answered with the output in counts; "MEAS?"
	CoefGainWrite   string // writes the gain coefficient; "CAL GAIN {value}"
	CoefGainRead    string // answered with the gain coefficient; "CAL GAIN?"
	CoefOffsetWrite string // writes the offset coefficient; "CAL OFS {value}"
	CoefOffsetRead  string // answered with the offset coefficient; "CAL OFS?"

	Temp string // answered with the unit's own temperature sensor in °C; "TEMP?"

	TCOffsetWrite string // writes the offset temperature coefficient; "CAL TCO {value}"
	TCOffsetRead  string // answered with it; "CAL TCO?"
	TCGainWrite   string // writes the gain temperature coefficient; "CAL TCG {value}"
	TCGainRead    string // answered with it; "CAL TCG?"
}

// DefaultProtocol returns the demo card's command set.
func DefaultProtocol() Protocol {
	return Protocol{
		Serial:          "SN?",
		Firmware:        "FW?",
		OffsetWrite:     "TRIM OFS " + CodePlaceholder,
		OffsetRead:      "TRIM OFS?",
		GainWrite:       "TRIM GAIN " + CodePlaceholder,
		GainRead:        "TRIM GAIN?",
		Store:           "NV STORE",
		Read:            "MEAS?",
		CoefGainWrite:   "CAL GAIN " + ValuePlaceholder,
		CoefGainRead:    "CAL GAIN?",
		CoefOffsetWrite: "CAL OFS " + ValuePlaceholder,
		CoefOffsetRead:  "CAL OFS?",
		Temp:            "TEMP?",
		TCOffsetWrite:   "CAL TCO " + ValuePlaceholder,
		TCOffsetRead:    "CAL TCO?",
		TCGainWrite:     "CAL TCG " + ValuePlaceholder,
		TCGainRead:      "CAL TCG?",
	}
}

// withDefaults returns p with its empty commands (but Unlock) set to the demo card's.
func (p Protocol) withDefaults() Protocol {
	d := DefaultProtocol()
	for _, f := range []struct{ got, def *string }{
		{&p.Serial, &d.Serial}, {&p.Firmware, &d.Firmware}, {&p.OffsetWrite, &d.OffsetWrite},
		{&p.OffsetRead, &d.OffsetRead}, {&p.GainWrite, &d.GainWrite}, {&p.GainRead, &d.GainRead},
		{&p.Store, &d.Store}, {&p.Read, &d.Read}, {&p.CoefGainWrite, &d.CoefGainWrite},
		{&p.CoefGainRead, &d.CoefGainRead}, {&p.CoefOffsetWrite, &d.CoefOffsetWrite},
		{&p.CoefOffsetRead, &d.CoefOffsetRead}, {&p.Temp, &d.Temp},
		{&p.TCOffsetWrite, &d.TCOffsetWrite}, {&p.TCOffsetRead, &d.TCOffsetRead},
		{&p.TCGainWrite, &d.TCGainWrite}, {&p.TCGainRead, &d.TCGainRead},
	} {
		if *f.got == "" {
			*f.got = *f.def
		}
	}
	return p
}

// normLine returns line's tokens joined by single spaces.
func normLine(line string) string { return strings.Join(strings.Fields(line), " ") }

// template is one parsed command template. A line fits it when it is the template
// with each placeholder replaced by one token part (no spaces; a channel is
// digits). The zero template matches nothing.
type template struct {
	re         *regexp.Regexp
	valueGroup int // submatch index of the code or value, 0 = none
	chanGroup  int // submatch index of the channel, 0 = none
}

var placeholderRE = regexp.MustCompile(`\{[^{}]*\}`)

// compileTemplate parses text as the template of settings key key; value is the
// placeholder it must hold once (CodePlaceholder or ValuePlaceholder; "" for none),
// and channel says whether it may hold ChannelPlaceholder once.
func compileTemplate(key, text, value string, channel bool) (template, error) {
	t := normLine(text)
	if t == "" {
		return template{}, settingErr(key, "%q: expected a command", text)
	}
	if t == "LID?" {
		return template{}, settingErr(key, "%q is the fixture's own command", text)
	}
	if !utf8.ValidString(t) {
		return template{}, settingErr(key, "%q: expected UTF-8 text", text)
	}
	allowed := []string{}
	if value != "" {
		allowed = append(allowed, value)
	}
	if channel {
		allowed = append(allowed, ChannelPlaceholder)
	}
	for _, ph := range placeholderRE.FindAllString(t, -1) {
		if !slices.Contains(allowed, ph) {
			if len(allowed) == 0 {
				return template{}, settingErr(key, "%q: this command takes no placeholder", text)
			}
			return template{}, settingErr(key, "%q: the only placeholders here are %s", text, strings.Join(allowed, " and "))
		}
	}
	if rest := placeholderRE.ReplaceAllString(t, ""); strings.ContainsAny(rest, "{}") {
		return template{}, settingErr(key, "%q: a brace that is no placeholder", text)
	}
	if value != "" && strings.Count(t, value) != 1 {
		return template{}, settingErr(key, "%q: expected %s once", text, value)
	}
	if strings.Count(t, ChannelPlaceholder) > 1 {
		return template{}, settingErr(key, "%q: expected %s at most once", text, ChannelPlaceholder)
	}
	var tp template
	var b strings.Builder
	b.WriteString("^")
	last, group := 0, 0
	for _, m := range placeholderRE.FindAllStringIndex(t, -1) {
		b.WriteString(regexp.QuoteMeta(t[last:m[0]]))
		group++
		if t[m[0]:m[1]] == ChannelPlaceholder {
			b.WriteString("([0-9]+)")
			tp.chanGroup = group
		} else {
			b.WriteString("([^ ]+)")
			tp.valueGroup = group
		}
		last = m[1]
	}
	b.WriteString(regexp.QuoteMeta(t[last:]) + "$")
	re, err := regexp.Compile(b.String())
	if err != nil {
		return template{}, settingErr(key, "%q: %v", text, err)
	}
	tp.re = re
	return tp, nil
}

// match reports whether the normalised line fits the template and returns the
// text of its value and channel ("" where the template has none).
func (t template) match(line string) (value, channel string, ok bool) {
	if t.re == nil {
		return "", "", false
	}
	m := t.re.FindStringSubmatch(line)
	if m == nil {
		return "", "", false
	}
	if t.valueGroup > 0 {
		value = m[t.valueGroup]
	}
	if t.chanGroup > 0 {
		channel = m[t.chanGroup]
	}
	return value, channel, true
}

// port is the compiled protocol of one card.
type port struct {
	serial, firmware, store, unlock                        template
	offsetRead, gainRead, coefGainRead, coefOffsetRead     template
	read                                                   template
	temp                                                   template
	tcoWrite, tcoRead, tcgWrite, tcgRead                   template
	offsetWrite, gainWrite, coefGainWrite, coefOffsetWrite template
}

// compilePort compiles the card's command set; an error names the settings key. Only
// the commands of what the card has count, and no two may be the same command.
func compilePort(c card) (port, error) {
	var p port
	seen := map[string]string{}
	for _, f := range []struct {
		key, text string
		dst       *template
		value     string
		channel   bool
		use       bool
	}{
		{"cmd_serial", c.proto.Serial, &p.serial, "", false, true},
		{"cmd_firmware", c.proto.Firmware, &p.firmware, "", false, true},
		{"cmd_offset_write", c.proto.OffsetWrite, &p.offsetWrite, CodePlaceholder, true, c.trim.HasOffset()},
		{"cmd_offset_read", c.proto.OffsetRead, &p.offsetRead, "", true, c.trim.HasOffset()},
		{"cmd_gain_write", c.proto.GainWrite, &p.gainWrite, CodePlaceholder, true, c.trim.HasGain()},
		{"cmd_gain_read", c.proto.GainRead, &p.gainRead, "", true, c.trim.HasGain()},
		{"cmd_store", c.proto.Store, &p.store, "", false, true},
		{"cmd_unlock", c.proto.Unlock, &p.unlock, "", false, c.proto.Unlock != ""},
		{"cmd_read", c.proto.Read, &p.read, "", true, c.output == OutputReported},
		{"cmd_coef_gain_write", c.proto.CoefGainWrite, &p.coefGainWrite, ValuePlaceholder, true, c.coef.hasGain()},
		{"cmd_coef_gain_read", c.proto.CoefGainRead, &p.coefGainRead, "", true, c.coef.hasGain()},
		{"cmd_coef_offset_write", c.proto.CoefOffsetWrite, &p.coefOffsetWrite, ValuePlaceholder, true, c.coef.hasOffset()},
		{"cmd_coef_offset_read", c.proto.CoefOffsetRead, &p.coefOffsetRead, "", true, c.coef.hasOffset()},
		{"cmd_temp", c.proto.Temp, &p.temp, "", false, true},
		{"cmd_tc_offset_write", c.proto.TCOffsetWrite, &p.tcoWrite, ValuePlaceholder, true, c.coef.hasTCO()},
		{"cmd_tc_offset_read", c.proto.TCOffsetRead, &p.tcoRead, "", true, c.coef.hasTCO()},
		{"cmd_tc_gain_write", c.proto.TCGainWrite, &p.tcgWrite, ValuePlaceholder, true, c.coef.hasTCG()},
		{"cmd_tc_gain_read", c.proto.TCGainRead, &p.tcgRead, "", true, c.coef.hasTCG()},
	} {
		if !f.use {
			continue
		}
		t, err := compileTemplate(f.key, f.text, f.value, f.channel)
		if err != nil {
			return port{}, err
		}
		id := strings.NewReplacer(CodePlaceholder, "{v}", ValuePlaceholder, "{v}").Replace(normLine(f.text))
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
