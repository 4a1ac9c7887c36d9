package sequencer_test

import (
	"context"
	"errors"
	"fmt"
	"strconv"
	"strings"
	"testing"
	"unicode"

	"trimline/instruments/files"
	"trimline/sequencer"
)

// The demo sequence declares BRX- and five digits; every serial that could harm a
// file name, a log line or a command line is refused whatever the pattern says,
// and the message names the serial and the rule.
func TestCheckSerial(t *testing.T) {
	_, demo := demoFiles(t, nil)
	src := strings.Replace(demoFile(t, "brx200-sequence.yaml"), "serial_pattern:", "# serial_pattern:", 1)
	plain, err := sequencer.ParseSequence("plain.yaml", []byte(src), demoReader(t, nil))
	if err != nil {
		t.Fatal(err)
	}
	if plain.SerialPattern != "" || demo.SerialPattern != "BRX-[0-9]{5}" {
		t.Fatalf("patterns %q, %q", plain.SerialPattern, demo.SerialPattern)
	}
	for _, c := range []struct {
		serial      string
		demo, plain string // "" accepted, else a word of the rule
	}{
		{"BRX-00001", "", ""},
		{"BRX-99999", "", ""},
		{"SN-17", "does not match the BRX-200 serial pattern BRX-[0-9]{5} (serial_pattern in brx200-sequence.yaml)", ""},
		{"BRX-0001", "does not match", ""},
		{"BRX-000011", "does not match", ""},
		{"xBRX-00001", "does not match", ""},
		{"BRX-00001\n", "whitespace", "whitespace"},
		{"", "required", "required"},
		{"-", `"-" is not a serial number`, `"-" is not a serial number`},
		{"-rf", "does not match", "does not match the default serial rule"},
		{"BRX 00001", "whitespace", "whitespace"},
		{"BRX-00001 ", "whitespace", "whitespace"},
		{"\u00a0BRX-00001", "whitespace", "whitespace"},
		{"BRX-0\x0001", "control", "control"},
		{"BRX-\x1b[2J1", "control", "control"},
		{"../BRX-00001", "path separators", "path separators"},
		{`..\BRX-00001`, "path separators", "path separators"},
		{"C:BRX", "path separators", "path separators"},
		{"BRX*", "path separators", "path separators"},
		{strings.Repeat("A", 64), "does not match", ""},
		{strings.Repeat("A", 65), "65 bytes long, at most 64", "65 bytes long, at most 64"},
		{"BRX-\xff0001", "UTF-8", "UTF-8"},
		{"ÄBC", "does not match", "does not match"},
	} {
		for _, k := range []struct {
			seq  *sequencer.Sequence
			want string
		}{{demo, c.demo}, {plain, c.plain}} {
			err := k.seq.CheckSerial(c.serial)
			var se *sequencer.SerialError
			switch {
			case k.want == "" && err != nil:
				t.Errorf("%s: %q refused: %v", k.seq.File.Name, c.serial, err)
			case k.want == "":
			case err == nil:
				t.Errorf("%s: %q accepted, want refused (%s)", k.seq.File.Name, c.serial, k.want)
			case !errors.Is(err, sequencer.ErrBadSerial) || !errors.As(err, &se) || se.Serial != c.serial:
				t.Errorf("%s: %q: %v is not a *SerialError for it", k.seq.File.Name, c.serial, err)
			case !strings.Contains(err.Error(), k.want) || len(c.serial) <= sequencer.MaxSerialLen && !strings.Contains(err.Error(), strconv.Quote(c.serial)):
				t.Errorf("%s: %q: message %q, want it to name the serial and say %q", k.seq.File.Name, c.serial, err, k.want)
			}
		}
	}
	// A serial of a megabyte is named, but cut short.
	if err := demo.CheckSerial(strings.Repeat("B", 1<<20)); err == nil || len(err.Error()) > 300 {
		t.Errorf("long serial: %.300v", err)
	}
	// A batch is refused as a whole, every bad serial named.
	err = demo.CheckSerials([]string{"BRX-00001", "BRX-2", "BRX-00003", ""})
	if !errors.Is(err, sequencer.ErrBadSerial) || !strings.Contains(err.Error(), `"BRX-2"`) || !strings.Contains(err.Error(), `""`) || strings.Contains(err.Error(), "BRX-00003") {
		t.Errorf("batch: %v", err)
	}
}

// A serial_pattern that is not a regular expression is a file:line:col error at
// load, as is an empty one.
func TestSerialPatternErrorsAtLoad(t *testing.T) {
	for _, bad := range []string{`"BRX-[0-9{5}"`, `"BRX-(a"`, `""`} {
		src := strings.Replace(demoFile(t, "brx200-sequence.yaml"), `"BRX-[0-9]{5}"`, bad, 1)
		_, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(src), demoReader(t, nil))
		e := files.Errs(err)
		want := fmt.Sprintf("brx200-sequence.yaml:%d:17:", lineOf(t, src, "serial_pattern:"))
		if len(e) != 1 || !strings.HasPrefix(e[0].Error(), want) {
			t.Errorf("pattern %s: %v, want one error at %s", bad, err, want)
		}
	}
}

// A batch with one refused serial runs no unit at all, not even the good ones
// before it, and says which serial and why.
func TestRunBatchRefusesBadSerialsBeforeAnyUnit(t *testing.T) {
	e := setup(t, "sim", ideal(nil), "")
	ran := 0
	tl, err := e.RunBatch(context.Background(), []string{"BRX-00001", "BRX-00002/../x", "BRX-00003"}, func(int, *sequencer.Record) error {
		ran++
		return nil
	})
	if !errors.Is(err, sequencer.ErrBadSerial) || !strings.Contains(err.Error(), "BRX-00002/../x") {
		t.Fatalf("err %v", err)
	}
	if ran != 0 || len(tl.Records) != 0 {
		t.Errorf("%d unit(s) ran, %d recorded", ran, len(tl.Records))
	}
	if on, _ := simSource(t, e).State(); on {
		t.Error("source output on")
	}
}

// Whatever CheckSerial accepts is safe in a file name and a log line.
func FuzzCheckSerial(f *testing.F) {
	for _, s := range []string{"BRX-00001", "SN-17", "", "-", "a/b", "a\x00b", "ä"} {
		f.Add(s)
	}
	var seq *sequencer.Sequence // the default rule
	f.Fuzz(func(t *testing.T, s string) {
		if seq.CheckSerial(s) != nil {
			return
		}
		if s == "" || s == "-" || len(s) > sequencer.MaxSerialLen || strings.ContainsAny(s, `/\:*?"<>| `) ||
			strings.ContainsFunc(s, func(r rune) bool { return unicode.IsControl(r) || unicode.IsSpace(r) || r > unicode.MaxASCII }) {
			t.Errorf("accepted %q", s)
		}
	})
}
