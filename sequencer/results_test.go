package sequencer_test

import (
	"os"
	"reflect"
	"strings"
	"testing"

	"trimline/instruments/units"
	"trimline/sequencer"
)

// The steps declare the results: the demo's step list (less its zero check and
// the trim's effect, kinds and results the first layout never had) declares the
// ten results of the first layout, in the same order, with the same stages and
// dimensions, and the first-layout file it replaced declares exactly the same.
func TestStepsDeclareTheResults(t *testing.T) {
	seq, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(demoAsFirstLayout(t)), demoReader(t, nil))
	if err != nil {
		t.Fatal(err)
	}
	data, err := os.ReadFile("testdata/brx200-sequence-first.yaml") // the demo's file before it became a step list
	if err != nil {
		t.Fatal(err)
	}
	first, err := sequencer.ParseSequence("brx200-sequence.yaml", data, demoReader(t, nil))
	if err != nil {
		t.Fatal(err)
	}
	if !first.FirstLayout || seq.FirstLayout {
		t.Fatalf("FirstLayout: first-layout file %v, step list %v", first.FirstLayout, seq.FirstLayout)
	}
	want := []string{"pre_offset", "pre_gain_error", "pre_nonlinearity", "offset_code", "gain_code",
		"post_offset", "post_gain_error", "post_nonlinearity", "post_max_error", "post_noise"}
	for _, s := range []*sequencer.Sequence{seq, first} {
		var names []string
		for _, d := range s.Results() {
			names = append(names, d.Name)
			if d.About == "" || d.Step == "" {
				t.Errorf("%s: no description or step", d.Name)
			}
			if dim, ok := s.Catalog()[d.Name]; !ok || dim != d.Dim {
				t.Errorf("%s: catalogue has %v (%v), declaration %v", d.Name, dim, ok, d.Dim)
			}
			if dim := sequencer.FirstLayoutCatalog()[d.Name]; dim != d.Dim {
				t.Errorf("%s: first-layout catalogue %v, step %v", d.Name, dim, d.Dim)
			}
		}
		if !reflect.DeepEqual(names, want) {
			t.Errorf("order = %v, want %v", names, want)
		}
		for name, st := range map[string]sequencer.Stage{
			sequencer.ResPreOffset: sequencer.AsFound, sequencer.ResPreNonlinearity: sequencer.AsFound,
			sequencer.ResGainCode: sequencer.Adjustment, sequencer.ResOffsetCode: sequencer.Adjustment,
			sequencer.ResPostOffset: sequencer.AsLeft, sequencer.ResPostNoise: sequencer.AsLeft,
		} {
			if d, _ := s.LookupResult(name); d.Stage != st {
				t.Errorf("stage of %s = %v, want %v", name, d.Stage, st)
			}
		}
	}
}

// A record of schema 1 carries no stages: they come from the first layout's names.
func TestSchema1Stages(t *testing.T) {
	rec := &sequencer.Record{Schema: 1, Results: []sequencer.Result{{Name: "pre_offset"}, {Name: "gain_code"}, {Name: "post_noise"}}}
	for name, want := range map[string]sequencer.Stage{"pre_offset": sequencer.AsFound, "gain_code": sequencer.Adjustment, "post_noise": sequencer.AsLeft, "other": 0} {
		if got := rec.ResultStage(name); got != want {
			t.Errorf("%s: %v, want %v", name, got, want)
		}
	}
	if got := (sequencer.Sweep{Name: "verify"}).StageOf(); got != sequencer.AsLeft {
		t.Errorf("verify sweep of schema 1: %v", got)
	}
}

// Every declared result says what it measures: the demo's step list and the
// first-layout file declare the same quantities, and a record without them (schema
// 1) reads the same ones from the first layout's names; a name of another
// product's record without a quantity measures nothing known.
func TestResultQuantities(t *testing.T) {
	want := map[string]string{
		"pre_offset": "offset", "pre_gain_error": "gain_error", "pre_nonlinearity": "nonlinearity",
		"offset_code": "code", "gain_code": "code",
		"post_offset": "offset", "post_gain_error": "gain_error", "post_nonlinearity": "nonlinearity",
		"post_max_error": "max_error", "post_noise": "noise",
	}
	seq := demoWithoutZero(t)
	data, err := os.ReadFile("testdata/brx200-sequence-first.yaml")
	if err != nil {
		t.Fatal(err)
	}
	first, err := sequencer.ParseSequence("brx200-sequence.yaml", data, demoReader(t, nil))
	if err != nil {
		t.Fatal(err)
	}
	// Results the demo added after the first layout, which schema-1 records
	// cannot hold.
	later := map[string]string{"trim_offset_change": "offset_change", "trim_gain_change": "gain_change"}
	for _, s := range []*sequencer.Sequence{seq, first} {
		for _, d := range s.Results() {
			if q, ok := later[d.Name]; ok && s == seq {
				if d.Quantity != q {
					t.Errorf("%s declares quantity %q, want %q", d.Name, d.Quantity, q)
				}
				continue
			}
			if d.Quantity != want[d.Name] {
				t.Errorf("%s declares quantity %q, want %q", d.Name, d.Quantity, want[d.Name])
			}
		}
	}
	for name, q := range want {
		if got := (sequencer.Result{Name: name}).QuantityOf(); got != q {
			t.Errorf("schema-1 %s: quantity %q, want %q", name, got, q)
		}
	}
	if got := (sequencer.Result{Name: "zero_in"}).QuantityOf(); got != "" {
		t.Errorf("zero_in without a quantity: %q, want none", got)
	}
	if got := (sequencer.Result{Name: "pre_offset", Quantity: "max_error"}).QuantityOf(); got != "max_error" {
		t.Errorf("a recorded quantity is overridden by the name: %q", got)
	}
}

// Physical ranges that depend on the product come from its sequence: the codes
// from the DACs' bits, outputs from the meter range (the demo's 10 V) less the
// ideal output (2.5 V); without a sequence nothing is known.
func TestPhysicalRanges(t *testing.T) {
	if free := sequencer.PhysicalRanges(nil); len(free) != 0 {
		t.Errorf("PhysicalRanges(nil) = %v, want none", free)
	}
	_, seq := demoFiles(t, nil)
	got := sequencer.PhysicalRanges(seq)
	for name, want := range map[string][2]float64{
		"offset_code": {0, 4095}, "gain_code": {0, 4095},
		"pre_offset": {-12.5, 7.5}, "post_offset": {-12.5, 7.5},
		"post_max_error": {0, 14.5}, "post_noise": {0, 10},
		"pre_gain_error": {-1, 1}, "pre_nonlinearity": {0, 1},
	} {
		if r := got[name]; r != want {
			t.Errorf("%s: range %v, want %v", name, r, want)
		}
	}
	// A two's-complement DAC's codes are signed.
	text := strings.Replace(demoFile(t, "brx200-sequence.yaml"), "    lsb: 12.2 uV                 # per code, at the output\n    no_correction: 2048",
		"    lsb: 12.2 uV\n    coding: twos_complement", 1)
	s2, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(text), demoReader(t, nil))
	if err != nil {
		t.Fatal(err)
	}
	if r := sequencer.PhysicalRanges(s2)["offset_code"]; r != [2]float64{-2048, 2047} {
		t.Errorf("two's-complement offset_code range %v", r)
	}
}

// TestCountUnits: a count the unit reports (an offset in counts, and the offset
// coefficient that adds counts) is a "count"; a trim code, a number of passes or
// anything else counted is a "code".
func TestCountUnits(t *testing.T) {
	for q, want := range map[string]string{"offset": "count", "noise": "count", "offset_coefficient": "count", "code": "code", "": "code"} {
		if got := (sequencer.ResultDef{Dim: units.Count, Quantity: q}).Unit(); got != want {
			t.Errorf("a Count result of quantity %q is a %q, want %q", q, got, want)
		}
	}
}
