package limits_test

import (
	"strings"
	"testing"

	"trimline/instruments/files"
	"trimline/instruments/units"
	"trimline/limits"
)

// chanCatalog is a three-channel unit: out_offset per channel, supply_current
// of the whole unit.
var chanCatalog = limits.Catalog{
	"out_offset": units.Volt, "out_offset@1": units.Volt, "out_offset@2": units.Volt, "out_offset@3": units.Volt,
	"supply": units.Volt,
}

const chanLimits = `limit_set: {name: three, revision: "1", product: TRI-3}
limits:
  - name: offset
    description: offset of every channel
    unit: uV
    uses: [out_offset]
    tolerance: {lower: -50, upper: 50}
  - name: offset 2 tight
    description: channel 2 feeds the reference
    unit: uV
    uses: [out_offset]
    channel: "2"
    expr: abs(out_offset) <= 10
  - name: supply
    description: the whole unit
    unit: V
    uses: [supply]
    expr: supply < 2
`

// TestJudgePerChannel: a limit without a channel judges each channel, one with
// channel "2" judges only channel 2, a limit over a unit-wide result judges once.
// Hand-worked: channel offsets 20, 30, 60 µV against ±50 µV pass, pass, fail;
// channel 2's 30 µV against |x| ≤ 10 µV fails; supply 1 V < 2 V passes.
func TestJudgePerChannel(t *testing.T) {
	set, err := limits.Load("chan.yaml", []byte(chanLimits), chanCatalog)
	if err != nil {
		t.Fatal(detail(err))
	}
	if got := strings.Join(set.Channels(), ","); got != "1,2,3" {
		t.Fatalf("Channels = %s", got)
	}
	v := func(x float64) limits.Value { return limits.Value{V: x, Valid: true} }
	res := map[string]limits.Value{
		"out_offset@1": v(20e-6), "out_offset@2": v(30e-6), "out_offset@3": v(60e-6), "supply": v(1),
	}
	outs := set.Judge(res)
	type want struct {
		name, ch string
		pass     bool
		value    float64
	}
	wants := []want{{"offset", "1", true, 20}, {"offset", "2", true, 30}, {"offset", "3", false, 60},
		{"offset 2 tight", "2", false, 30}, {"supply", "", true, 1}}
	if len(outs) != len(wants) {
		t.Fatalf("%d outcomes, want %d: %+v", len(outs), len(wants), outs)
	}
	for i, w := range wants {
		o := outs[i]
		if o.Name != w.name || o.Channel != w.ch || o.Pass != w.pass || o.Values[o.Uses[0]] != w.value {
			t.Errorf("outcome %d = %s/%s pass=%v values=%v, want %s/%s pass=%v value %g", i, o.Name, o.Channel, o.Pass, o.Values, w.name, w.ch, w.pass, w.value)
		}
	}
	if got := set.Overall(outs); got != limits.VerdictFail {
		t.Errorf("Overall = %s, want fail", got)
	}
	per := make([]string, len(set.Limits))
	if got := set.Verdicts(res, per); got != limits.VerdictFail || per[0] != limits.VerdictFail || per[1] != limits.VerdictFail || per[2] != limits.VerdictPass {
		t.Errorf("Verdicts = %s %v, want fail [fail fail pass]", got, per)
	}
	// Channel 3 in tolerance: only the channel-2 limit fails.
	res["out_offset@3"] = v(-5e-6)
	if set.Verdicts(res, per); per[0] != limits.VerdictPass || per[1] != limits.VerdictFail {
		t.Errorf("Verdicts per limit = %v, want [pass fail pass]", per)
	}
	// A channel whose result is missing fails that channel's outcome only.
	delete(res, "out_offset@1")
	outs = set.Judge(res)
	if outs[0].Pass || !strings.Contains(outs[0].Reason, "no such result") || !outs[1].Pass {
		t.Errorf("missing channel 1: %+v / %+v", outs[0], outs[1])
	}
}

// TestChannelKeyErrors: a channel the sequence does not have, a channel on a
// limit of the whole unit and a channel for a product without channels are each
// a positioned error at the channel key.
func TestChannelKeyErrors(t *testing.T) {
	for _, tc := range []struct {
		name, ch, uses string
		cat            limits.Catalog
		line, col      int
		msg            string
	}{
		{"unknown", `"5"`, "out_offset", chanCatalog, 7, 14, `no channel "5": the sequence's channels are "1", "2", "3"`},
		{"unit-wide", `"2"`, "supply", chanCatalog, 7, 14, `uses no per-channel result`},
		{"no channels", `"2"`, "post_offset", catalog, 7, 14, `declares no channels`},
	} {
		t.Run(tc.name, func(t *testing.T) {
			data := "limit_set: {name: x, revision: \"1\", product: P}\nlimits:\n  - name: l\n    description: d\n    unit: uV\n    uses: [" + tc.uses + "]\n    channel: " + tc.ch + "\n    expr: " + tc.uses + " < 5\n"
			if tc.uses == "supply" {
				data = strings.Replace(data, "unit: uV", "unit: V", 1)
			}
			_, err := limits.Load("l.yaml", []byte(data), tc.cat)
			es := files.Errs(err)
			if len(es) != 1 || es[0].Line != tc.line || es[0].Col != tc.col || !strings.Contains(es[0].Msg, tc.msg) {
				t.Fatalf("got %v, want one error at %d:%d containing %q", detail(err), tc.line, tc.col, tc.msg)
			}
		})
	}
}

// TestLintKnowsChannels: lint reports a channel the catalog does not have as an
// error at its line, and passes the file otherwise.
func TestLintKnowsChannels(t *testing.T) {
	if fs := limits.Lint("chan.yaml", []byte(chanLimits), chanCatalog, limits.LintOptions{}); hasError(fs) {
		t.Fatalf("lint of a sound file: %v", fs)
	}
	bad := strings.Replace(chanLimits, `channel: "2"`, `channel: "7"`, 1)
	fs := limits.Lint("chan.yaml", []byte(bad), chanCatalog, limits.LintOptions{})
	found := false
	for _, f := range fs {
		found = found || f.Line == 12 && strings.Contains(f.Error(), `no channel "7"`)
	}
	if !found {
		t.Fatalf("lint with channel 7: %v, want an error at line 12", fs)
	}
}

func hasError(fs []limits.Finding) bool {
	for _, f := range fs {
		if f.Severity == limits.SeverityError {
			return true
		}
	}
	return false
}

// TestDiffChannel: a limit moved to one channel has changed shape, whatever its
// bounds.
func TestDiffChannel(t *testing.T) {
	old, err := limits.Load("a.yaml", []byte(chanLimits), chanCatalog)
	if err != nil {
		t.Fatal(detail(err))
	}
	moved := strings.Replace(chanLimits, "    uses: [out_offset]\n    tolerance", "    uses: [out_offset]\n    channel: \"3\"\n    tolerance", 1)
	new, err := limits.Load("b.yaml", []byte(moved), chanCatalog)
	if err != nil {
		t.Fatal(detail(err))
	}
	cs := limits.Diff(old, new)
	if len(cs) != 1 || cs[0].Limit != "offset" || cs[0].Kind != limits.ChangeShape || !strings.Contains(cs[0].Detail, "judges every channel → channel 3") {
		t.Fatalf("Diff = %+v", cs)
	}
}

// FuzzLoadChannels: a limit file loaded against a multi-channel catalog never
// panics; every outcome's channel is one of the catalog's (or "" for the whole
// unit), and Verdicts agrees with Overall of Judge.
func FuzzLoadChannels(f *testing.F) {
	f.Add([]byte(chanLimits))
	f.Add([]byte(strings.Replace(chanLimits, `channel: "2"`, `channel: "9"`, 1)))
	f.Add([]byte(strings.Replace(chanLimits, `channel: "2"`, `channel: [1]`, 1)))
	f.Add([]byte(strings.Replace(chanLimits, "uses: [supply]", "uses: [supply]\n    channel: \"1\"", 1)))
	v := func(x float64) limits.Value { return limits.Value{V: x, Valid: true} }
	res := map[string]limits.Value{"out_offset@1": v(20e-6), "out_offset@2": v(-70e-6), "supply": v(1)} // channel 3 missing
	f.Fuzz(func(t *testing.T, data []byte) {
		set, err := limits.Load("fuzz.yaml", data, chanCatalog)
		if err != nil {
			return
		}
		outs := set.Judge(res)
		for _, o := range outs {
			if o.Channel != "" && o.Channel != "1" && o.Channel != "2" && o.Channel != "3" {
				t.Fatalf("outcome %q on channel %q", o.Name, o.Channel)
			}
		}
		if a, b := set.Overall(outs), set.Verdicts(res, nil); a != b {
			t.Fatalf("Overall %s, Verdicts %s", a, b)
		}
	})
}

// TestLintChannelLimitBesideAllChannels: a limit that holds one channel tighter
// than the limit of every channel is a design choice, not a redundancy, and
// limits of two different channels never meet; a channel limit wider than the
// all-channel one is still redundant, and a contradiction on the channel both
// judge is still an error.
func TestLintChannelLimitBesideAllChannels(t *testing.T) {
	cat := limits.Catalog{"post_offset": units.Volt, "post_offset@1": units.Volt, "post_offset@2": units.Volt}
	cases := []struct {
		name, limits string
		want         string // "" = no finding
	}{
		{"tighter on one channel", `
  - {name: all, description: d, unit: uV, uses: [post_offset], tolerance: {lower: -20, upper: 20}}
  - {name: one, description: d, channel: "1", unit: uV, uses: [post_offset], tolerance: {lower: -10, upper: 10}}`, ""},
		{"two channels", `
  - {name: one, description: d, channel: "1", unit: uV, uses: [post_offset], tolerance: {lower: -10, upper: 10}}
  - {name: two, description: d, channel: "2", unit: uV, uses: [post_offset], tolerance: {lower: 30, upper: 40}}`, ""},
		{"wider on one channel", `
  - {name: all, description: d, unit: uV, uses: [post_offset], tolerance: {lower: -20, upper: 20}}
  - {name: one, description: d, channel: "1", unit: uV, uses: [post_offset], tolerance: {lower: -30, upper: 30}}`, limits.CodeRedundant},
		{"contradiction on channel 1", `
  - {name: all, description: d, unit: uV, uses: [post_offset], tolerance: {lower: -20, upper: 20}}
  - {name: one, description: d, channel: "1", unit: uV, uses: [post_offset], tolerance: {lower: 30, upper: 40}}`, limits.CodeContradictory},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			src := "limit_set: {name: x, revision: \"1\", product: P}\nlimits:" + c.limits + "\n"
			var codes []string
			for _, f := range limits.Lint("l.yaml", []byte(src), cat, limits.LintOptions{}) {
				if f.Code == limits.CodeRedundant || f.Code == limits.CodeContradictory || f.Code == limits.CodeOverlap {
					codes = append(codes, f.Code)
				}
			}
			if got := strings.Join(codes, ","); got != c.want {
				t.Errorf("findings %q, want %q", got, c.want)
			}
		})
	}
}
