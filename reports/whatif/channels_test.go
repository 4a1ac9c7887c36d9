package whatif_test

import (
	"testing"

	"trimline/instruments/units"
	"trimline/limits"
	"trimline/reports/whatif"
)

// TestRejudgeChannels: a two-channel unit's stored results are re-judged per
// channel, and its distribution counts each channel's value. Hand-worked: the
// new limit ±50 µV passes channel 1 (20 µV) and fails channel 2 (70 µV), so the
// unit recorded as pass under ±100 µV flips to fail; the distribution holds 2
// values from 20 to 70 µV.
func TestRejudgeChannels(t *testing.T) {
	cat := limits.Catalog{"post_offset": units.Volt, "post_offset@1": units.Volt, "post_offset@2": units.Volt}
	lim := func(bound string) *limits.Set {
		s, err := limits.Load("l.yaml", []byte("limit_set: {name: two, revision: \"1\", product: DUO-2}\nlimits:\n"+
			"  - name: offset\n    description: d\n    unit: uV\n    uses: [post_offset]\n    tolerance: {lower: -"+bound+", upper: "+bound+"}\n"), cat)
		if err != nil {
			t.Fatal(err)
		}
		return s
	}
	u := whatif.StoredUnit{Serial: "DUO-1", RunID: "r1", Product: "DUO-2", OldVerdict: limits.VerdictPass, Catalog: cat,
		Values: map[string]limits.Value{"post_offset@1": {V: 20e-6, Valid: true}, "post_offset@2": {V: 70e-6, Valid: true}}}
	rep := whatif.Rejudge(lim("100"), lim("50"), []whatif.StoredUnit{u})
	if rep.After.Fail != 1 || len(rep.Flips) != 1 || rep.Flips[0].New != limits.VerdictFail {
		t.Fatalf("after %+v, flips %+v", rep.After, rep.Flips)
	}
	if len(rep.Distributions) != 1 {
		t.Fatalf("distributions %+v", rep.Distributions)
	}
	d := rep.Distributions[0]
	if d.N != 2 || d.Invalid != 0 || d.Min != 20e-6 || d.Max != 70e-6 {
		t.Errorf("distribution N %d invalid %d min %g max %g, want 2, 0, 20e-6, 70e-6", d.N, d.Invalid, d.Min, d.Max)
	}
}
