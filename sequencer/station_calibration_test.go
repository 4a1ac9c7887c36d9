package sequencer_test

import (
	"context"
	"fmt"
	"math"
	"strings"
	"testing"
	"time"

	"trimline/instruments"
	"trimline/instruments/files"
	"trimline/sequencer"
)

// The demo station file records, per reference instrument, its calibration
// (date, certificate, laboratory) and when its spec holds (period, band,
// tempco); the record's InstrumentRef keeps them.
func TestStationRecordsCalibrationAndSpecValidity(t *testing.T) {
	st, err := sequencer.ParseStation("s.yaml", []byte(demoFile(t, "brx200-station.yaml")))
	if err != nil {
		t.Fatal(err)
	}
	m := st.Instruments["meter"]
	if got := m.CalDate.Format("2006-01-02"); got != "2026-01-11" || m.CalCertificate != "KML-26-04439" || m.CalLab != "Kestrel Metrology Laboratory" {
		t.Errorf("meter calibration %s %q %q", got, m.CalCertificate, m.CalLab)
	}
	v := m.Validity
	if v.Period != "2 years" || !v.HasBand || v.LowC != 18 || v.HighC != 28 || !sameRel(v.TempcoOfReading, 3e-6) || !sameRel(v.TempcoOfRange, 0.5e-6) {
		t.Errorf("meter spec validity %+v", v)
	}
	if got, want := v.TempcoText(), "±(3 ppm of reading + 0.5 ppm of range) per °C"; got != want {
		t.Errorf("tempco %q, want %q", got, want)
	}
	if st.Instruments["dut"].Validity != (sequencer.SpecValidity{}) {
		t.Errorf("the DUT port has a spec validity: %+v", st.Instruments["dut"].Validity)
	}
}

func sameRel(a, b float64) bool { return math.Abs(a-b) <= 1e-12*math.Max(math.Abs(a), math.Abs(b)) }

// Each mistake in the new keys is refused at its file:line:col, in words that
// say what to write.
func TestStationCalibrationErrorsArePositioned(t *testing.T) {
	station := demoFile(t, "brx200-station.yaml")
	meterSpec := "    spec:\n      period: 2 years\n      temperature: {low: 18 °C, high: 28 °C}\n      tempco: {of_reading: 3 ppm, of_range: 0.5 ppm}\n"
	for _, c := range []struct {
		name, from, to, needle, want string
	}{
		{"bad date", "date: 2026-01-11", "date: 11/01/2026", "11/01/2026", "expected a date as YYYY-MM-DD"},
		{"no laboratory", "      laboratory: Kestrel Metrology Laboratory\n", "", "date: 2026-01-11\n      certificate: KML", `missing required key "laboratory"`},
		{"unknown key", "laboratory: Kestrel Metrology Laboratory", "lab: Kestrel Metrology Laboratory", "lab: Kestrel", "lab"},
		{"calibrated after due", "date: 2026-01-11", "date: 2028-01-11", "2028-01-11", "not before cal_due 2027-12-31"},
		{"bad period", meterSpec, strings.Replace(meterSpec, "2 years", "forever", 1), "forever", "expected a period such as 90 days or 1 year"},
		{"period shorter than the interval", meterSpec, strings.Replace(meterSpec, "2 years", "90 days", 1), "period: 90 days",
			"the 90 days spec holds only until 2026-04-11 (calibrated 2026-01-11), but cal_due is 2027-12-31"},
		{"band without tempco", meterSpec, strings.Replace(meterSpec, "      tempco: {of_reading: 3 ppm, of_range: 0.5 ppm}\n", "", 1), "temperature: {low: 18 °C, high: 28 °C}\n    accuracy:\n      of_reading: 30", "needs the tempco"},
		{"band upside down", meterSpec, strings.Replace(meterSpec, "high: 28 °C", "high: 8 °C", 1), "8 °C}\n      tempco: {of_reading: 3", "expected high above low"},
		{"band not a temperature", meterSpec, strings.Replace(meterSpec, "low: 18 °C", "low: 18 V", 1), "18 V", "expected a temperature"},
		{"negative tempco", meterSpec, strings.Replace(meterSpec, "of_reading: 3 ppm", "of_reading: -3 ppm", 1), "{of_reading: -3 ppm", "must be finite and not negative"},
		{"a fixture has no calibration", "    asset: FIX-BRX200-01         # the fixture\n", "    asset: FIX-BRX200-01\n    calibration: {date: 2026-01-01, certificate: X, laboratory: Y}\n", "calibration: {date: 2026-01-01", "has no calibration"},
	} {
		t.Run(c.name, func(t *testing.T) {
			if !strings.Contains(station, c.from) {
				t.Fatalf("demo station lacks %q", c.from)
			}
			mut := strings.Replace(station, c.from, c.to, 1)
			_, err := sequencer.ParseStation("s.yaml", []byte(mut))
			if err == nil {
				t.Fatal("loaded")
			}
			prefix := fmt.Sprintf("s.yaml:%d:", lineOf(t, mut, c.needle))
			for _, e := range files.Errs(err) {
				if strings.HasPrefix(e.Error(), prefix) && strings.Contains(e.Error(), c.want) {
					return
				}
			}
			t.Fatalf("want an error at %s… containing %q, got:\n%v", prefix, c.want, err)
		})
	}
}

// Outside its band a spec grows by its tempco for each degree (the usual
// data-sheet rule, common practice; the widened bound is still taken as
// rectangular, JCGM 100 §4.3.7). Worked by hand: the meter's 30 ppm of reading
// + 4 ppm of the 10 V range, tempco 3 ppm + 0.5 ppm per °C, band 18–28 °C; at
// 31 °C it is 3 °C outside, so 30 + 3·3 = 39 ppm of reading and
// 4 + 0.5·3 = 5.5 ppm of range; at 15 °C the same; at 23 °C unchanged.
func TestTempcoWidensTheSpecOutsideItsBand(t *testing.T) {
	v := sequencer.SpecValidity{Period: "1 year", HasBand: true, LowC: 18, HighC: 28, TempcoOfReading: 3e-6, TempcoOfRange: 0.5e-6}
	spec := sequencer.Accuracy{OfReading: 30e-6, OfRange: 4e-6, Range: 10}
	for _, c := range []struct {
		ambient, outside, ofReading, ofRange float64
	}{
		{31, 3, 39e-6, 5.5e-6},
		{15, 3, 39e-6, 5.5e-6},
		{23, 0, 30e-6, 4e-6},
		{28, 0, 30e-6, 4e-6},
	} {
		dt := v.Outside(c.ambient)
		w := v.Widen(spec, dt)
		if !sameRel(dt, c.outside) && !(dt == 0 && c.outside == 0) || !sameRel(w.OfReading, c.ofReading) || !sameRel(w.OfRange, c.ofRange) || w.Range != 10 {
			t.Errorf("at %g °C: %g °C outside, spec %v; want %g °C, %g ppm + %g ppm", c.ambient, dt, w, c.outside, c.ofReading*1e6, c.ofRange*1e6)
		}
	}
}

// A run at an ambient outside the band uses the widened specs in every
// point's Type B uncertainty and says so in the record; in the band, or with
// no ambient recorded, the specs as written. Worked by hand on the ideal bench
// (no noise, so a point's u is its Type B part alone) at 31 °C, 3 °C above the
// band: meter ±(39 ppm of reading + 5.5 ppm of 10 V), source ±(26 ppm of
// reading + 6.5 ppm of 100 mV) seen through the ideal 200 V/V, resolution
// 1 µV; each rectangular, u = half-width/√3 (JCGM 100 §4.3.7, F.2.2.1).
func TestAmbientOutsideTheBandWidensThePointUncertainty(t *testing.T) {
	run := func(amb float64, recorded bool) *sequencer.Record {
		st, seq := demoFiles(t, nil)
		onIdealBench(st)
		cfg := sequencer.Config{Station: st, Sequence: seq, Operator: "test", Software: "test"}
		if recorded {
			cfg.Conditions = sequencer.Conditions{AmbientC: amb, AmbientSource: "entered"}
		}
		e, err := sequencer.Open(context.Background(), cfg)
		if err != nil {
			t.Fatal(err)
		}
		defer e.Close()
		return e.Run(context.Background(), "BRX-00001")
	}
	hot, inBand, none := run(31, true), run(23, true), run(0, false)
	want := func(p sequencer.Point, mr, mg, sr, sg float64) float64 {
		meter := (mr*math.Abs(p.Mean) + mg*10) / math.Sqrt(3)
		res := 1e-6 / 2 / math.Sqrt(3)
		source := 200 * (sr*math.Abs(p.Stimulus) + sg*0.1) / math.Sqrt(3)
		return math.Sqrt(meter*meter + res*res + source*source)
	}
	for _, c := range []struct {
		name              string
		rec               *sequencer.Record
		mr, mg, sr, sg    float64
		outside           float64
		meterAt, sourceAt string
	}{
		{"31 °C", hot, 39e-6, 5.5e-6, 26e-6, 6.5e-6, 3,
			"±(39 ppm of reading + 5.5 ppm of range), range 10 V, resolution 1 µV", "±(26 ppm of reading + 6.5 ppm of range), range 100 mV"},
		{"23 °C", inBand, 30e-6, 4e-6, 20e-6, 5e-6, 0, "", ""},
		{"not recorded", none, 30e-6, 4e-6, 20e-6, 5e-6, 0, "", ""},
	} {
		if c.rec.Verdict != sequencer.Pass {
			t.Fatalf("%s: %s %v %s", c.name, c.rec.Verdict, c.rec.Reasons, c.rec.Fault)
		}
		p := c.rec.Sweeps[len(c.rec.Sweeps)-1].Points[0]
		if got, w := p.USys, want(p, c.mr, c.mg, c.sr, c.sg); math.Abs(got-w) > 1e-9*w {
			t.Errorf("%s: u_sys at %g V in = %.6g V, want %.6g V", c.name, p.Stimulus, got, w)
		}
		refs := map[string]sequencer.InstrumentRef{}
		for _, r := range c.rec.Instruments {
			refs[r.Role] = r
		}
		if m, s := refs["meter"], refs["source"]; m.OutsideBandC != c.outside || m.AccuracyAtAmbient != c.meterAt || s.AccuracyAtAmbient != c.sourceAt {
			t.Errorf("%s: meter %g °C outside, at ambient %q; source %q", c.name, m.OutsideBandC, m.AccuracyAtAmbient, s.AccuracyAtAmbient)
		}
		if m := refs["meter"]; m.CalCertificate != "KML-26-04439" || m.SpecBand == nil || *m.SpecBand != (sequencer.TempBand{LowC: 18, HighC: 28}) {
			t.Errorf("%s: meter ref %+v", c.name, m)
		}
	}
	// The wider spec makes a larger U of the post-trim offset.
	if a, b := resultOf(t, hot, "post_offset").Unc.Expanded, resultOf(t, inBand, "post_offset").Unc.Expanded; !(a > b) {
		t.Errorf("U(post_offset) at 31 °C %g V, at 23 °C %g V: want the first larger", a, b)
	}
	// Replay takes the ambient from the record and reproduces it; a record of
	// revision 0 (made before the widening) replays with the specs as written.
	st, seq := demoFiles(t, nil)
	onIdealBench(st)
	cfg := sequencer.Config{Station: st, Sequence: seq}
	again, err := sequencer.Replay(cfg, hot)
	if err != nil {
		t.Fatal(err)
	}
	if d := sequencer.Differences(hot, again); len(d) > 0 {
		t.Errorf("replay of the 31 °C run differs: %v", d)
	}
	old := *hot
	old.Metrology = 0
	again, err = sequencer.Replay(cfg, &old)
	if err != nil {
		t.Fatal(err)
	}
	if a, b := resultOf(t, again, "post_offset").Unc.Expanded, resultOf(t, hot, "post_offset").Unc.Expanded; !(a < b) {
		t.Errorf("revision 0 replay of the 31 °C run: U(post_offset) %g V, want below the widened %g V", a, b)
	}
}

// A run with any simulated instrument says so in its record, with the roles
// and whether its times are the bench's own clock: by address (sim://), and by
// the *IDN? maker of a simulator reached under another scheme (faulty:// here
// wraps the simulator, as a served one is reached over tcp://).
func TestSimulatedRunIsMarked(t *testing.T) {
	rec := setup(t, "sim", ideal(nil), "").Run(context.Background(), "BRX-00001")
	s := rec.Simulated
	if s == nil || s.Mark != "SIMULATED BENCH — NOT A MEASUREMENT" || strings.Join(s.Roles, ",") != "source,meter,dut" || !s.BenchClock {
		t.Fatalf("sim:// run: simulated %+v", s)
	}
	rec = setup(t, "faulty", ideal(nil), "").Run(context.Background(), "BRX-00001")
	if s := rec.Simulated; s == nil || strings.Join(s.Roles, ",") != "source,meter" || !s.BenchClock {
		t.Fatalf("faulty:// run (the simulator under another scheme): simulated %+v", s)
	}
}

// A record made before records said so is judged from the instruments it
// lists: a sim:// address (its times the bench's clock), or the simulator's
// *IDN? maker over a real transport (the wall clock's); real ones are not.
func TestSimulationOfOlderRecords(t *testing.T) {
	rec := &sequencer.Record{Instruments: []sequencer.InstrumentRef{
		{Role: "source", Address: "sim://source"}, {Role: "meter", Address: "sim://meter"}}}
	if s := sequencer.SimulationOf(rec); s == nil || strings.Join(s.Roles, ",") != "source,meter" || !s.BenchClock || s.Mark != sequencer.SimulatedMark {
		t.Errorf("sim:// record: %+v", s)
	}
	rec.Instruments = []sequencer.InstrumentRef{{Role: "meter", Address: "tcp://127.0.0.1:5025", Identity: instruments.Identity{Maker: "Trimline Sim"}}}
	if s := sequencer.SimulationOf(rec); s == nil || s.BenchClock {
		t.Errorf("served simulator: %+v", s)
	}
	rec.Instruments[0].Identity.Maker = "Quillmere Instruments"
	if s := sequencer.SimulationOf(rec); s != nil {
		t.Errorf("real meter: %+v", s)
	}
	rec.Simulated = &sequencer.Simulation{Mark: sequencer.SimulatedMark, Roles: []string{"dut"}}
	if s := sequencer.SimulationOf(rec); s != rec.Simulated {
		t.Errorf("a record that says so: %+v", s)
	}
}

// check refuses a calibration dated after today, at its line: it traces nothing.
func TestCheckRefusesACalibrationInTheFuture(t *testing.T) {
	text := demoFile(t, "brx200-station.yaml")
	st, err := sequencer.ParseStation("s.yaml", []byte(text))
	if err != nil {
		t.Fatal(err)
	}
	now := time.Date(2026, 1, 10, 12, 0, 0, 0, time.UTC) // the source's calibration day, the day before the meter's
	probs := st.CheckCalibration(now)
	if len(probs) != 1 || !strings.HasPrefix(probs[0].Error(), fmt.Sprintf("s.yaml:%d:", lineOf(t, text, "date: 2026-01-11"))) ||
		!strings.Contains(probs[0].Error(), "the meter DMM-0203 is calibrated on 2026-01-11, after today (2026-01-10)") || probs[0].Warning {
		t.Errorf("got %v", probs)
	}
	if probs := st.CheckCalibration(now.AddDate(0, 0, 1)); len(probs) != 0 {
		t.Errorf("on the meter's calibration day: %v", probs)
	}
}
