package sequencer_test

import (
	"reflect"
	"testing"

	"trimline/sequencer"
)

// The results table is the one place a result is declared: its stage, order and
// physical range come from there and nowhere else.
func TestResultsTable(t *testing.T) {
	var names []string
	for _, d := range sequencer.Results() {
		names = append(names, d.Name)
		if d.About == "" {
			t.Errorf("%s: no description", d.Name)
		}
		if dim, ok := sequencer.ResultCatalog[d.Name]; !ok || dim != d.Dim {
			t.Errorf("%s: catalogue has %v (%v), table %v", d.Name, dim, ok, d.Dim)
		}
	}
	want := []string{"pre_offset", "pre_gain_error", "pre_nonlinearity", "offset_code", "gain_code",
		"post_offset", "post_gain_error", "post_nonlinearity", "post_max_error", "post_noise"}
	if !reflect.DeepEqual(names, want) {
		t.Errorf("order = %v, want %v", names, want)
	}
	if len(sequencer.ResultCatalog) != len(want) {
		t.Errorf("catalogue has %d names, table %d", len(sequencer.ResultCatalog), len(want))
	}
	for name, st := range map[string]sequencer.Stage{
		sequencer.ResPreOffset: sequencer.AsFound, sequencer.ResPreNonlinearity: sequencer.AsFound,
		sequencer.ResGainCode: sequencer.Adjustment, sequencer.ResOffsetCode: sequencer.Adjustment,
		sequencer.ResPostOffset: sequencer.AsLeft, sequencer.ResPostNoise: sequencer.AsLeft,
		"no_such_result": 0,
	} {
		if got := sequencer.ResultStage(name); got != st {
			t.Errorf("ResultStage(%s) = %v, want %v", name, got, st)
		}
	}
}

func TestRegisterResultRefusesDuplicates(t *testing.T) {
	defer func() {
		if recover() == nil {
			t.Error("registering pre_offset twice did not panic")
		}
	}()
	sequencer.RegisterResult(sequencer.ResultDef{Name: sequencer.ResPreOffset, Stage: sequencer.AsFound})
}

// Physical ranges that depend on the product come from its sequence: the codes
// from the DACs' bits, outputs from the meter range (the demo's 10 V) less the
// ideal output (2.5 V); without a sequence only the product-free ranges are known.
func TestPhysicalRanges(t *testing.T) {
	free := sequencer.PhysicalRanges(nil)
	wantFree := map[string][2]float64{
		"pre_gain_error": {-1, 1}, "post_gain_error": {-1, 1}, "pre_nonlinearity": {0, 1}, "post_nonlinearity": {0, 1},
	}
	if !reflect.DeepEqual(free, wantFree) {
		t.Errorf("PhysicalRanges(nil) = %v, want %v", free, wantFree)
	}
	_, seq := demoFiles(t, nil)
	got := sequencer.PhysicalRanges(seq)
	for name, want := range map[string][2]float64{
		"offset_code": {0, 4095}, "gain_code": {0, 4095},
		"pre_offset": {-12.5, 7.5}, "post_offset": {-12.5, 7.5},
		"post_max_error": {0, 14.5}, "post_noise": {0, 10},
		"pre_gain_error": {-1, 1},
	} {
		if r := got[name]; r != want {
			t.Errorf("%s: range %v, want %v", name, r, want)
		}
	}
}
