package sequencer_test

import (
	"fmt"
	"strings"
	"testing"

	"trimline/instruments/files"
	"trimline/sequencer"
)

// A loader reports every problem of a file at once: a malformed unit no longer
// stops decoding before an unknown key or another bad value elsewhere is seen, and
// the loader's own checks (nplc out of range) come with them. (A YAML syntax error,
// a duplicate key among them, still stops the parse where it is.)
func TestEveryErrorOfAFileAtOnce(t *testing.T) {
	for _, c := range []struct {
		file string
		edit *strings.Replacer
		want []struct{ needle, msg string }
	}{
		{"brx200-station.yaml", strings.NewReplacer(
			"max_source_voltage: 50 mV", "max_source_voltage: 50 mX",
			"  name: Demo line", "  nmae: Demo line",
			"      of_reading: 30 ppm", "      of_reading: 30",
			"asset: DMM-0203", "asset: DMM-0203\n    colour: grey"),
			[]struct{ needle, msg string }{
				{"50 mX", `unknown unit "mX"`}, {"nmae:", `unknown field "nmae"`},
				{"of_reading: 30\n", "has no unit"}, {"colour: grey", `unknown field "colour"`},
			}},
		{"brx200-sequence.yaml", strings.NewReplacer(
			"    settle: 20 ms                # wait", "    settle: 20 mV                # wait",
			"  full_scale: 4 V", "  full_scale: 4 V\n  fullscale: 4 V",
			"  nplc: 1 ", "  nplc: 5000 ",
			"    points: 11\n    settle: 20 ms\n", "    points: many\n    settle: 20 ms\n"),
			[]struct{ needle, msg string }{
				{"settle: 20 mV", "expected a time"}, {"fullscale:", `unknown field "fullscale"`},
				{"nplc: 5000", "at most 1000 power-line cycles"}, {"points: many", "expected a whole number"},
			}},
	} {
		t.Run(c.file, func(t *testing.T) {
			mut := c.edit.Replace(demoFile(t, c.file))
			var err error
			if c.file == "brx200-station.yaml" {
				_, err = sequencer.ParseStation(c.file, []byte(mut))
			} else {
				_, err = sequencer.ParseSequence(c.file, []byte(mut), demoReader(t, nil))
			}
			errs := files.Errs(err)
			for _, w := range c.want {
				prefix := fmt.Sprintf("%s:%d:", c.file, lineOf(t, mut, w.needle))
				found := false
				for _, e := range errs {
					found = found || strings.HasPrefix(e.Error(), prefix) && strings.Contains(e.Msg, w.msg)
				}
				if !found {
					t.Errorf("no error at %s… containing %q", prefix, w.msg)
				}
			}
			if t.Failed() {
				t.Logf("got:\n%v", err)
			}
			if len(errs) != len(c.want) {
				t.Errorf("%d errors, want exactly %d (no follow-on complaints about values that did not decode):\n%v", len(errs), len(c.want), err)
			}
		})
	}
}
