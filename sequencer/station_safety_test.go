package sequencer_test

import (
	"fmt"
	"strings"
	"testing"

	"trimline/instruments/files"
	"trimline/sequencer"
)

// Safety caps are finite and no larger than the source's own rating, which the
// station file declares; each refusal points at the offending value. Before, a cap
// of 1e308 GV loaded as +Inf and check said ok.
func TestCapsAreFiniteAndWithinTheSourceRating(t *testing.T) {
	station := demoFile(t, "brx200-station.yaml")
	for _, c := range []struct {
		name, from, to, needle, want string
	}{
		{"infinite voltage cap", "max_source_voltage: 50 mV", "max_source_voltage: 1e308 GV", "1e308 GV", "too large"},
		{"infinite current cap", "max_source_current: 10 mA", "max_source_current: 1e308 GA", "1e308 GA", "too large"},
		{"voltage cap above the rating", "max_source_voltage: 50 mV", "max_source_voltage: 1 V", "max_source_voltage: 1 V", "above the source's own rating of 100 mV"},
		{"current cap above the rating", "max_source_current: 10 mA", "max_source_current: 50 mA", "max_source_current: 50 mA", "above the source's own rating of 20 mA"},
		{"infinite rating", "    voltage: 100 mV", "    voltage: 1e308 GV", "1e308 GV", "too large"},
		{"zero rating", "    current: 20 mA", "    current: 0 mA", "current: 0 mA", "expected a finite positive current"},
		{"no rating", "  source_rating:                # the source's own output limits, from its data sheet:\n    voltage: 100 mV             # the caps below may not exceed them\n    current: 20 mA\n", "", "safety:", "missing required key \"source_rating\""},
	} {
		t.Run(c.name, func(t *testing.T) {
			if !strings.Contains(station, c.from) {
				t.Fatalf("demo station lacks %q", c.from)
			}
			mut := strings.Replace(station, c.from, c.to, 1)
			st, err := sequencer.ParseStation("s.yaml", []byte(mut))
			if err == nil {
				t.Fatalf("loaded, caps %g V %g A, rating %+v", st.MaxSourceVolts, st.MaxSourceAmps, st.SourceRating)
			}
			prefix := fmt.Sprintf("s.yaml:%d:", lineOf(t, mut, c.needle))
			for _, e := range files.Errs(err) {
				if strings.HasPrefix(e.Error(), prefix) && strings.Contains(e.Msg, c.want) {
					return
				}
			}
			t.Fatalf("want an error at %s… containing %q, got:\n%v", prefix, c.want, err)
		})
	}
	st, err := sequencer.ParseStation("s.yaml", []byte(station))
	if err != nil {
		t.Fatal(err)
	}
	if st.SourceRating != (sequencer.Rating{Volts: 0.1, Amps: 0.02}) {
		t.Errorf("rating %+v, want 100 mV and 20 mA (the demo station file)", st.SourceRating)
	}
}

// A station file recorded with a run before source_rating, the station id rule and
// the interlock rule existed still loads for replay (ParseRecordedStation); a run
// refuses it (ParseStation).
func TestRecordedStationFilesStillReplay(t *testing.T) {
	old := strings.NewReplacer(
		"  source_rating:                # the source's own output limits, from its data sheet:\n    voltage: 100 mV             # the caps below may not exceed them\n    current: 20 mA\n", "",
		"  id: TL1 ", "  id: tl1 ", "certificate_prefix: TL1", "certificate_prefix: tl1",
		"max_source_voltage: 50 mV", "max_source_voltage: 61 V").Replace(demoFile(t, "brx200-station.yaml"))
	if _, err := sequencer.ParseStation("s.yaml", []byte(old)); len(files.Errs(err)) != 4 {
		t.Fatalf("want 4 refusals (rating, id, prefix, interlock), got %v", err)
	}
	st, err := sequencer.ParseRecordedStation("s.yaml", []byte(old))
	if err != nil {
		t.Fatal(err)
	}
	if st.MaxSourceVolts != 61 || st.SourceRating != (sequencer.Rating{}) || st.ID != "tl1" {
		t.Errorf("recorded station loaded wrong: cap %g V, rating %+v, id %q", st.MaxSourceVolts, st.SourceRating, st.ID)
	}
	near(t, "meter of_reading", st.Instruments["meter"].Accuracy.OfReading, 30e-6, 1e-18)
	if _, err := sequencer.ParseRecordedStation("s.yaml", []byte(strings.Replace(old, "61 V", "1e308 GV", 1))); err == nil {
		t.Error("an infinite cap is refused even in a recorded file")
	}
}
