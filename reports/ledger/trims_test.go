package ledger_test

import (
	"math"
	"reflect"
	"testing"

	"trimline/reports/ledger"
	"trimline/sequencer"
)

func TestTrimCodes(t *testing.T) {
	l, _ := openLedger(t)
	shape := recordShape{sweeps: 1, points: 2, readings: 1}
	a := makeRecord("t1", "SN1", sequencer.Pass, shape)
	a.Trims[0].Written, a.Trims[1].Written = true, true
	a.Trims[0].Ideal = math.Inf(1) // stored as a string in the canonical JSON: not read
	a.Trims[1].Saturated = true
	a.Trims = append(a.Trims, sequencer.TrimCode{Channel: "2", DAC: "offset", Code: 17, Written: true})
	b := makeRecord("t2", "SN2", sequencer.Fail, shape)
	b.Product = "OTHER-1"
	c := makeRecord("t3", "SN3", sequencer.Fault, shape)
	c.Trims = nil
	for _, r := range []*sequencer.Record{a, b, c} {
		mustRecord(t, l, r, "TT")
	}

	got, err := l.TrimCodes(ctx, "amp-10")
	if err != nil {
		t.Fatal(err)
	}
	want := map[string][]ledger.WrittenCode{"t1": {
		{DAC: "offset", Code: 2101, Written: true},
		{DAC: "gain", Code: 1990, Written: true, Saturated: true},
		{Channel: "2", DAC: "offset", Code: 17, Written: true},
	}}
	if !reflect.DeepEqual(got, want) {
		t.Errorf("AMP-10 codes\n got %+v\nwant %+v", got, want)
	}
	all, err := l.TrimCodes(ctx, "")
	if err != nil {
		t.Fatal(err)
	}
	if len(all) != 2 || len(all["t2"]) != 2 || all["t2"][0].Written {
		t.Errorf("every product: %+v, want t1 and t2 (t2's codes not written)", all)
	}
}
