package sequencer_test

// A meter with an accuracy spec per range: which spec a reading takes, the
// refusal of two specs of one range, and the budget and TUR prediction of the
// PZA-8's readings on the 1 V range.

import (
	"fmt"
	"math"
	"strings"
	"testing"

	"trimline/instruments/units"
	"trimline/sequencer"
)

// rangeStation is a station whose meter has three specs: two voltage ranges
// and one current range (invented values).
const rangeStation = `station:
  id: TL9
  name: Bench with a spec per range

instruments:
  source:
    address: sim://source
    asset: SRC-1
    cal_due: 2099-12-31
    accuracy: {of_reading: 20 ppm, of_range: 1 ppm, range: 100 mV}
  meter:
    address: sim://meter
    asset: DMM-1
    cal_due: 2099-12-31
    accuracy:
      - {of_reading: 30 ppm, of_range: 4 ppm, range: 10 V, resolution: 1 uV}
      - {of_reading: 30 ppm, of_range: 5 ppm, range: 1 V, resolution: 0.1 uV}
      - {of_reading: 200 ppm, of_range: 20 ppm, range: 100 mA, resolution: 10 nA}
  dut:
    address: sim://dut
    asset: FIX-1

safety:
  source_rating: {voltage: 100 mV, current: 20 mA}
  max_source_voltage: 100 mV
  max_source_current: 10 mA
`

func TestSpecAtSelection(t *testing.T) {
	st, err := sequencer.ParseStation("station.yaml", []byte(rangeStation))
	if err != nil {
		t.Fatal(err)
	}
	m := st.Instruments["meter"]
	if len(m.Specs) != 3 {
		t.Fatalf("%d specs, want 3", len(m.Specs))
	}
	for _, c := range []struct {
		name         string
		dim          units.Dim
		rng, v, want float64 // the range of the spec expected
	}{
		// The configured range wins when a spec is of it, whatever the reading.
		{"configured 1 V", units.Volt, 1, 0.5, 1},
		{"configured 10 V, small reading", units.Volt, 10, 0.5, 10},
		{"configured 1 V written in mV", units.Volt, 1000e-3, 0.5, 1},
		// Auto range: the smallest range that holds |v| with 20 % over-range.
		{"auto, 0.5 V", units.Volt, 0, 0.5, 1},
		{"auto, −0.9 V", units.Volt, 0, -0.9, 1},
		{"auto, 1.2 V at the over-range edge", units.Volt, 0, 1.2, 1},
		{"auto, 1.3 V", units.Volt, 0, 1.3, 10},
		{"auto, beyond every range", units.Volt, 0, 50, 10},
		// A configured range with no spec of its own: as auto.
		{"configured 100 V, no spec", units.Volt, 100, 0.5, 1},
		// One spec of a dimension: that one, always.
		{"the one current range", units.Ampere, 0, 5, 0.1},
		{"the one current range, other configured", units.Ampere, 1, 1e-6, 0.1},
	} {
		if got := m.SpecAt(c.dim, c.rng, c.v); got.Range != c.want || got.Dim != c.dim {
			t.Errorf("%s: SpecAt(%v, %g, %g) = %v, want the %g range", c.name, c.dim, c.rng, c.v, got, c.want)
		}
	}
	// The source's one spec is chosen for any level; no spec of a dimension
	// gives the zero Accuracy.
	src := st.Instruments["source"]
	if got := src.SpecAt(units.Volt, 0, 50); got != src.Accuracy {
		t.Errorf("source: %v, want its one spec %v", got, src.Accuracy)
	}
	if got := src.SpecAt(units.Ampere, 0, 1e-3); got != (sequencer.Accuracy{}) {
		t.Errorf("source in amperes: %v, want none", got)
	}
	// The record keeps every spec, in file order.
	text := m.AccuracyText()
	if strings.Count(text, "; ") != 2 || !strings.Contains(text, "range 1 V, resolution 100 nV") {
		t.Errorf("accuracy text %q: want three specs, the 1 V one among them", text)
	}
}

func TestSpecSameRangeRefused(t *testing.T) {
	// Two specs of the 1 V range (the second written 1000 mV) are refused at the
	// second's range; a current range of the same number is not the same range.
	text := strings.Replace(rangeStation, "      - {of_reading: 200 ppm",
		"      - {of_reading: 40 ppm, of_range: 6 ppm, range: 1000 mV}\n      - {of_reading: 200 ppm", 1)
	_, err := sequencer.ParseStation("station.yaml", []byte(text))
	line := qLineOf(text, "range: 1000 mV")
	col := strings.Index(strings.Split(text, "\n")[line-1], "1000 mV") + 1
	want := fmt.Sprintf("station.yaml:%d:%d: a second spec for the 1 V range (accuracy[1] is one already)", line, col)
	if err == nil || !strings.Contains(err.Error(), want) {
		t.Errorf("got %v, want %q", err, want)
	}
	ok := strings.Replace(rangeStation, "range: 100 mA", "range: 1 A", 1)
	ok = strings.Replace(ok, "range: 10 V,", "range: 1000 mV,", 1)
	ok = strings.Replace(ok, "range: 1 V,", "range: 10 V,", 1)
	if _, err := sequencer.ParseStation("station.yaml", []byte(ok)); err != nil {
		t.Errorf("1 V and 1 A ranges: %v", err)
	}
}

// pza8Files are the PZA-8 demo files; meterSpecs, when not "", replace the
// meter's accuracy list.
func pza8Files(t *testing.T, meterSpecs string) (*sequencer.Station, *sequencer.Sequence) {
	t.Helper()
	text := demoFile(t, "pza8-station.yaml")
	const list = `    accuracy:
      - {of_reading: 30 ppm, of_range: 5 ppm, range: 1 V, resolution: 0.1 uV}
      - {of_reading: 30 ppm, of_range: 4 ppm, range: 10 V, resolution: 1 uV}
`
	if !strings.Contains(text, list) {
		t.Fatal("the PZA-8 station no longer gives its meter the 1 V and 10 V specs")
	}
	if meterSpecs != "" {
		text = strings.Replace(text, list, meterSpecs, 1)
	}
	st, err := sequencer.ParseStation("pza8-station.yaml", []byte(text))
	if err != nil {
		t.Fatal(err)
	}
	seq, err := sequencer.ParseSequence("pza8-sequence.yaml", []byte(demoFile(t, "pza8-sequence.yaml")), demoReader(t, nil))
	if err != nil {
		t.Fatal(err)
	}
	return st, seq
}

// The PZA-8 reads its zero check and its re-trim at meter_range: 1 V, so the
// budget takes the 1 V spec; with the 10 V spec alone it takes that one. The
// prediction is the ideal unit: output 0 V at 0 V input, one noiseless reading.
//
// Hand-worked, each term rectangular (half-width a, u = a/√3; a count of
// resolution r is a half-width r/2):
//
//	1 V spec at 0 V:   a = 30 ppm·0 + 5 ppm·1 V = 5 µV,   u = 2.886751 µV
//	resolution 0.1 µV: u = 0.05/√3 = 0.028868 µV
//	10 V spec at 0 V:  a = 4 ppm·10 V = 40 µV,            u = 23.094011 µV
//	resolution 1 µV:   u = 0.5/√3 = 0.288675 µV
//	source at 0 V through 100 V/V: a = 100·(1 ppm·100 mV) = 10 µV, u = 5.773503 µV
//
//	zero_output (meter, resolution): 1 V: √(2.886751² + 0.028868²) = 2.886896 µV
//	                                10 V: √(23.094011² + 0.288675²) = 23.095815 µV
//	retrim_error (and the source):   1 V: √(2.886751² + 0.028868² + 5.773503²) = 6.455037 µV
//	                                10 V: √(23.094011² + 0.288675² + 5.773503²) = 23.806512 µV
//
// The TUR of "offset after re-trim" (±250 µV) is (upper − lower)/(2·U95), so
// the two stations' TURs stand as the inverse of their stated U (k = 2, U rounded
// up to two significant digits, JCGM 100 §7.2.6): 2·23.806512 = 47.61 → 48 µV,
// 2·6.455037 = 12.91 → 13 µV, 48/13 = 3.692308.
func TestSpecPerRangeBudget(t *testing.T) {
	for _, c := range []struct {
		name            string
		specs           string
		zero, retrimErr float64 // standard uncertainties, V
	}{
		{"1 V and 10 V specs", "", 2.8868957e-6, 6.4550368e-6},
		{"10 V spec alone", "    accuracy: {of_reading: 30 ppm, of_range: 4 ppm, range: 10 V, resolution: 1 uV}\n", 23.095815e-6, 23.806512e-6},
	} {
		st, seq := pza8Files(t, c.specs)
		pred := sequencer.PredictUncertainty(st, seq)
		for name, want := range map[string]float64{"zero_output": c.zero, "retrim_error": c.retrimErr} {
			if got := pred[name].Std; math.Abs(got-want) > 5e-13 {
				t.Errorf("%s: predicted u(%s) = %.7g V, want %.7g V", c.name, name, got, want)
			}
		}
	}
	tur := func(specs string) float64 {
		st, seq := pza8Files(t, specs)
		checks, err := sequencer.CheckTUR(st, seq)
		if err != nil {
			t.Fatal(err)
		}
		for _, c := range checks {
			if c.Limit == "offset after re-trim" {
				return c.TUR
			}
		}
		t.Fatal("no TUR for the limit \"offset after re-trim\"")
		return 0
	}
	both, alone := tur(""), tur("    accuracy: {of_reading: 30 ppm, of_range: 4 ppm, range: 10 V, resolution: 1 uV}\n")
	if r := both / alone; math.Abs(r-48.0/13) > 2e-6 {
		t.Errorf("TUR with the 1 V spec %.4g, with the 10 V spec alone %.4g: ratio %.7g, want 48/13 = 3.692308", both, alone, r)
	}
}
