package sequencer_test

import (
	"fmt"
	"strings"
	"testing"

	"trimline/instruments/files"
	"trimline/sequencer"
)

// A bare number where a ratio is meant is refused where it is written: of_reading:
// 30 loaded as 30 (3 000 000 000 ppm) and check printed a TUR of 0.0:1. The demo
// files, which write every ratio with its unit, still load (TestDemoFilesLoad).
func TestRatiosNeedAUnit(t *testing.T) {
	for _, c := range []struct {
		name, file, from, to, needle string
	}{
		{"accuracy of reading", "brx200-station.yaml", "of_reading: 30 ppm", "of_reading: 30", "of_reading: 30"},
		{"accuracy of range", "brx200-station.yaml", "of_range: 5 ppm", "of_range: 5", "of_range: 5"},
		{"gain DAC LSB", "brx200-sequence.yaml", "lsb: 10 ppm", "lsb: 10", "lsb: 10"},
	} {
		t.Run(c.name, func(t *testing.T) {
			src := demoFile(t, c.file)
			if !strings.Contains(src, c.from) {
				t.Fatalf("%s lacks %q", c.file, c.from)
			}
			mut := strings.Replace(src, c.from, c.to, 1)
			var err error
			if c.file == "brx200-station.yaml" {
				_, err = sequencer.ParseStation(c.file, []byte(mut))
			} else {
				_, err = sequencer.ParseSequence(c.file, []byte(mut), demoReader(t, nil))
			}
			prefix := fmt.Sprintf("%s:%d:", c.file, lineOf(t, mut, c.needle))
			for _, e := range files.Errs(err) {
				if strings.HasPrefix(e.Error(), prefix) && strings.Contains(e.Msg, "has no unit") && strings.Contains(e.Msg, "ppm") {
					return
				}
			}
			t.Fatalf("want an error at %s… saying the ratio has no unit, got: %v", prefix, err)
		})
	}
}
