package sequencer_test

import (
	"context"
	"fmt"
	"strings"
	"testing"

	"trimline/limits"
	"trimline/sequencer"
)

func ptr(v float64) *float64 { return &v }

// The demo's two defective units, run on the simulated bench of the default
// seed, read to the operator in plain words: the value as the certificate
// states it (JCGM 100:2008 §7.2.6 rounding, the limit's unit), the limit as the
// limit file writes it, no decision-rule words, and what to do with the unit.
func TestForOperatorOnTheDemoDefects(t *testing.T) {
	e := setup(t, "sim", map[string]map[string]string{"dut": {"seed": "8"}}, "")
	ctx := context.Background()

	var rec *sequencer.Record
	for i := 1; i <= 9; i++ { // the bench's noise is drawn unit after unit, as in the demo
		rec = e.Run(ctx, fmt.Sprintf("BRX-%05d", i))
	}
	if rec.Verdict != sequencer.Fail {
		t.Fatalf("BRX-00009: %s %q", rec.Verdict, rec.Reasons)
	}
	v := sequencer.ForOperator(rec, 1, 3)
	if v.Headline != "FAIL" || v.Action != "send to rework" {
		t.Errorf("BRX-00009: %q, action %q", v.Headline, v.Action)
	}
	// The same number the metrologist's statement gives, in plain words.
	if len(v.Reasons) != 2 || v.Reasons[0] != "offset after trim is −12384 µV, limit ±800 µV" ||
		v.Reasons[1] != "total error after trim is 12510 µV, limit ≤ 1000 µV" {
		t.Errorf("BRX-00009 reasons %q", v.Reasons)
	}
	if !strings.Contains(rec.Reasons[0], "post_offset = −12384 µV") {
		t.Errorf("the record's own reason no longer states −12384 µV: %q", rec.Reasons[0])
	}

	for i := 10; i <= 22; i++ {
		rec = e.Run(ctx, fmt.Sprintf("BRX-%05d", i))
	}
	if rec.Serial != "BRX-00022" || rec.Verdict != sequencer.Fail {
		t.Fatalf("%s: %s %q", rec.Serial, rec.Verdict, rec.Reasons)
	}
	v = sequencer.ForOperator(rec, 1, 3)
	want := []string{
		"output noise is 810 µV, limit ≤ 60 µV",                                                 // far out: rework
		"linearity after trim is 0.015 %, limit ≤ 0.01 %",                                       // out within U
		"offset after trim is 160 µV, limit ±800 µV: inside, but too near the limit to be sure", // held
		"total error after trim is 800 µV, limit ≤ 1000 µV: inside, but too near the limit to be sure",
	}
	if strings.Join(v.Reasons, "\n") != strings.Join(want, "\n") {
		t.Errorf("BRX-00022 reasons\n%s\nwant\n%s", strings.Join(v.Reasons, "\n"), strings.Join(want, "\n"))
	}
	if v.Action != "send to rework" {
		t.Errorf("BRX-00022 action %q: far out of the noise limit goes to rework", v.Action)
	}
	for _, r := range v.Reasons {
		for _, w := range []string{"w =", "zone", "conditional", "guard", "U ="} {
			if strings.Contains(r, w) {
				t.Errorf("reason %q uses the metrologist's %q", r, w)
			}
		}
	}
}

// outcome is a toleranced limit's outcome in zone.
func outcome(name, unit string, lower, upper *float64, value, U float64, zone string, pass bool) limits.Outcome {
	return limits.Outcome{Name: name, Unit: unit, Uses: []string{"x"}, Values: map[string]float64{"x": value}, Pass: pass,
		Decision: &limits.Decision{Result: "x", Lower: lower, Upper: upper, Value: value, U: U, Zone: zone}}
}

func TestForOperatorWords(t *testing.T) {
	closeFail := outcome("gain after trim", "ppm", ptr(-500), ptr(500), 512.3, 42, limits.ZoneConditionalFail, false)
	cases := []struct {
		name             string
		rec              sequencer.Record
		attempt, max     int
		headline, action string
		reasons          []string
	}{
		{"pass", sequencer.Record{Verdict: sequencer.Pass}, 1, 3, "PASS", "pack it", nil},
		{"review", sequencer.Record{Verdict: sequencer.Review, Outcomes: []limits.Outcome{
			outcome("offset after trim", "mV", ptr(-0.2), ptr(0.8), 0.7512, 0.1, limits.ZoneConditionalPass, false)}},
			1, 3, "REVIEW", "put it on the review shelf",
			[]string{"offset after trim is 0.75 mV, limit −0.2 … +0.8 mV: inside, but too near the limit to be sure"}},
		{"fail within U, attempts left", sequencer.Record{Verdict: sequencer.Fail, Outcomes: []limits.Outcome{closeFail}},
			1, 3, "FAIL", "retest it (attempt 2 of 3)", []string{"gain after trim is 512 ppm, limit ±500 ppm"}},
		{"fail within U, attempts used", sequencer.Record{Verdict: sequencer.Fail, Outcomes: []limits.Outcome{closeFail}},
			3, 3, "FAIL", "send to rework (all 3 attempts used)", nil},
		{"fail within U, no attempt limit", sequencer.Record{Verdict: sequencer.Fail, Outcomes: []limits.Outcome{closeFail}},
			2, 0, "FAIL", "retest it (attempt 3)", nil},
		{"saturated trim goes to rework", sequencer.Record{Verdict: sequencer.Fail, Outcomes: []limits.Outcome{closeFail},
			Reasons: []string{"offset trim needs code 4200.0, outside the DAC's range 0..4095"}},
			1, 3, "FAIL", "send to rework",
			[]string{"offset trim needs code 4200.0, outside the DAC's range 0..4095", "gain after trim is 512 ppm, limit ±500 ppm"}},
		{"lower limit only", sequencer.Record{Verdict: sequencer.Fail, Outcomes: []limits.Outcome{
			outcome("supply current", "mA", ptr(4), nil, 3.2, 0, limits.ZoneFail, false)}},
			1, 3, "FAIL", "send to rework", []string{"supply current is 3.2 mA, limit ≥ 4 mA"}},
		{"expression limit", sequencer.Record{Verdict: sequencer.Fail, Outcomes: []limits.Outcome{{Name: "trim headroom",
			Description: "Codes keep 100 codes of headroom for drift and rework.", Unit: "code", Uses: []string{"offset_code"},
			Values: map[string]float64{"offset_code": 4050}}}},
			1, 3, "FAIL", "send to rework",
			[]string{"trim headroom not met: Codes keep 100 codes of headroom for drift and rework (offset_code = 4050 code)"}},
		{"not measured", sequencer.Record{Verdict: sequencer.Fail, Results: []sequencer.Result{{Name: "x", Note: "not measured: trim saturated"}},
			Outcomes: []limits.Outcome{{Name: "offset after trim", Unit: "uV", Uses: []string{"x"}, Values: map[string]float64{}}}},
			1, 3, "FAIL", "send to rework", []string{"offset after trim was not measured: trim saturated"}},
		{"channel", sequencer.Record{Verdict: sequencer.Fail, Outcomes: []limits.Outcome{func() limits.Outcome {
			o := outcome("offset after correction", "count", ptr(-2), ptr(2), 5, 0.4, limits.ZoneFail, false)
			o.Channel = "3"
			return o
		}()}}, 1, 3, "FAIL", "send to rework", []string{"offset after correction (channel 3) is 5 count, limit ±2 count"}},
		{"hot chamber", sequencer.Record{Verdict: sequencer.Pass, Notes: []string{"chamber at 84.9 °C: wait before opening the fixture"}},
			1, 3, "PASS", "chamber at 84.9 °C: wait before opening the fixture; then pack it", nil},
		{"accepted on review", sequencer.Record{Verdict: sequencer.Pass, Disposition: &sequencer.Disposition{Decision: sequencer.DecisionAccept,
			Reviewer: "Ada Quillfeather", Reason: "noise within the customer's wider spec"}}, 1, 3, "PASS", "pack it",
			[]string{"accepted on review by Ada Quillfeather: noise within the customer's wider spec"}},
		{"rejected on review", sequencer.Record{Verdict: sequencer.Fail, Outcomes: []limits.Outcome{closeFail},
			Disposition: &sequencer.Disposition{Decision: sequencer.DecisionReject, Reviewer: "Tobias Wrenhollow", Reason: "gain drifts"}},
			1, 3, "FAIL", "send to rework",
			[]string{"rejected on review by Tobias Wrenhollow: gain drifts", "gain after trim is 512 ppm, limit ±500 ppm"}},
		{"fault", sequencer.Record{Verdict: sequencer.Fault, Fault: "interlock open: dut answered \"OPEN\" to \"LID?\", expected \"CLOSED\"; close the fixture lid"},
			1, 3, "STATION FAULT", "fix what the station fault says, clear it, then test this unit again", nil},
		{"stopped", sequencer.Record{Verdict: sequencer.Aborted, Fault: "aborted: context canceled"}, 1, 3, "STOPPED", "test it again", nil},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			v := sequencer.ForOperator(&c.rec, c.attempt, c.max)
			if v.Headline != c.headline || v.Action != c.action {
				t.Errorf("%q / %q, want %q / %q", v.Headline, v.Action, c.headline, c.action)
			}
			if c.reasons != nil && strings.Join(v.Reasons, "\n") != strings.Join(c.reasons, "\n") {
				t.Errorf("reasons %q, want %q", v.Reasons, c.reasons)
			}
		})
	}
}

// Station faults in plain words, from the fault detail the engine keeps and,
// for records made before it kept one, from the fault message alone.
func TestExplainFault(t *testing.T) {
	insts := []sequencer.InstrumentRef{
		{Role: "source", Kind: sequencer.VoltageSource, Address: "tcp://127.0.0.1:41805", Asset: "STD-0117"},
		{Role: "meter", Kind: sequencer.VoltMeter, Address: "tcp://127.0.0.1:5025", Asset: "DMM-0042"},
		{Role: "dut", Kind: sequencer.DUTPort, Address: "sim://dut", Asset: "FIX-BRX200-01"},
	}
	cases := []struct {
		name              string
		fault             string
		detail            *sequencer.FaultDetail
		what, said, check string
	}{
		{"timeout, with detail", "station zero with the input shorted (source output off): meter: read: timeout",
			&sequencer.FaultDetail{Role: "meter", Asset: "DMM-0042", Address: "tcp://127.0.0.1:5025", Said: "no reply within 2 s"},
			"the meter (DMM-0042 at tcp://127.0.0.1:5025) stopped answering", "no reply within 2 s", "its cable and power; that no one else is connected to it"},
		{"timeout, message only", `station could not start the unit: open meter at tcp://127.0.0.1:5025: sync: query "*OPC?": link failed after "*RST" was sent: tcp://127.0.0.1:5025: read: timeout`, nil,
			"the meter (DMM-0042 at tcp://127.0.0.1:5025) stopped answering", "", "its cable and power"},
		{"link down names the source, not the words 'source output'", `source: arm output watchdog: tcp://127.0.0.1:41805: arm_watchdog: query "SYST:ERR?": read: link down: EOF`, nil,
			"the source (STD-0117 at tcp://127.0.0.1:41805) lost its connection", "", "switched on"},
		{"error-queue entry", `station could not start the unit: put source in a safe state: tcp://127.0.0.1:41805: set_level: instrument error -221, "Settings conflict" (after "SOUR:VOLT 0")`, nil,
			"the source (STD-0117 at tcp://127.0.0.1:41805) reported an error", `-221, "Settings conflict"`, "front panel"},
		{"overload", "station zero with the input shorted (source output off): meter reported overload (reading 1 of 2): check the meter range and the wiring", nil,
			"the meter (DMM-0042 at tcp://127.0.0.1:5025) read an overload", "", "sits properly in the fixture"},
		{"read-back", "dut: gain trim read back 2049 after writing 2048", nil,
			"the unit did not keep what was written to it (FIX-BRX200-01 at sim://dut)", "dut: gain trim read back 2049 after writing 2048", "port cable"},
		{"calibration expired", "meter DMM-0042: calibration expired on 2026-01-01; recalibrate it or fix cal_due in brx200-station.yaml", nil,
			"the meter (DMM-0042 at tcp://127.0.0.1:5025) is past its calibration due date", "", "recalibrated"},
		{"wrong unit, with detail", `the unit in the fixture reports serial "BRX-99999" but "BRX-00008" was scanned: wrong unit in the fixture`,
			&sequencer.FaultDetail{Role: "dut", Asset: "FIX-BRX200-01", Address: "sim://dut", Said: `the unit in it reports serial "BRX-99999"`},
			"the unit in the fixture is not the one scanned", `the unit in it reports serial "BRX-99999"`, "put that one in"},
		{"calibration, with detail", "meter DMM-0042: calibration expired on 2026-01-01; recalibrate it or fix cal_due in brx200-station.yaml",
			&sequencer.FaultDetail{Role: "meter", Asset: "DMM-0042", Address: "tcp://127.0.0.1:5025", Said: "calibration due 2026-01-01"},
			"the meter (DMM-0042 at tcp://127.0.0.1:5025) is past its calibration due date", "calibration due 2026-01-01", "recalibrated"},
		{"interlock", `interlock open: dut answered "OPEN" to "LID?", expected "CLOSED"; close the fixture lid`, nil,
			"the fixture lid is open", "", "close the fixture lid"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			rec := &sequencer.Record{Verdict: sequencer.Fault, Fault: c.fault, FaultDetail: c.detail, Instruments: insts}
			f := sequencer.ExplainFault(rec)
			if f.What != c.what {
				t.Errorf("what %q, want %q", f.What, c.what)
			}
			if want := c.said; want == "" && f.Said != c.fault || want != "" && f.Said != want {
				t.Errorf("said %q", f.Said)
			}
			if !strings.Contains(f.Check, c.check) {
				t.Errorf("check %q, want it to say %q", f.Check, c.check)
			}
		})
	}
	if f := sequencer.ExplainFault(&sequencer.Record{Verdict: sequencer.Pass}); f != (sequencer.FaultText{}) {
		t.Errorf("a PASS has a fault: %+v", f)
	}
}
