package certificate

import (
	"math"
	"strings"
	"testing"

	"trimline/limits"
	"trimline/reports/internal/pdfdoc"
	"trimline/sequencer"
)

// These tests read the text of the new sections from their rows, without a PDF
// tool: what a cell holds is what the page prints.

// cellText is a cell's lines joined by " | ".
func cellText(c pdfdoc.Cell) string {
	var s []string
	for _, sp := range c {
		s = append(s, sp.Text)
	}
	return strings.Join(s, " | ")
}

// rowText is a row's cells joined by " ‖ ".
func rowText(r pdfdoc.Row) string {
	var s []string
	for _, c := range r {
		s = append(s, cellText(c))
	}
	return strings.Join(s, " ‖ ")
}

func bandTitles(bs []pdfdoc.Band) []string {
	var out []string
	for _, b := range bs {
		out = append(out, b.Title)
	}
	return out
}

// The record's units, as units.Format and units.FormatSig write them: an SI
// prefix for volts and amperes (zeros after the point dropped), counts bare.
func TestQuantityFormat(t *testing.T) {
	for _, c := range []struct{ got, want string }{
		{qVolt.format(2.5, 7), "2.5 V"},
		{quantityOf("").format(-3.2e-6, 3), "−3.2 µV"}, // "" is volts
		{qAmp.format(-29.03e-6, 3), "−29 µA"},          // −29.03 µA to 3 digits: −29.0, zero dropped
		{qAmp.format(4.00021e-3, 7), "4.00021 mA"},
		{qCount.format(1234.567, 7), "1234.567 counts"},
		{qCount.format(1, 3), "1 count"},
		{qCount.format(-0.37, 3), "−0.37 counts"},
		{qAmp.format(math.NaN(), 3), "—"},
		{qAmp.magnitude(4e-3), "4 mA"},
		{qCount.magnitude(800), "800 counts"},
		{gain(100, qVolt, qVolt), "100 V/V"},              // as the certificate always wrote it
		{gain(1.6e-3, qAmp, qVolt), "1.6 mA/V"},           // 1.6e-3 A/V: the milli prefix
		{gain(0.8, qAmp, qVolt), "800 mA/V"},              // "0.8 mA/mV" in a sequence file
		{gain(3200, qCount, qVolt), "3200 count/V"},       //
		{gain(-2.5e-5, qAmp, qVolt), "−25 µA/V"},          // an inverting gain
		{gain(1.600031e-3, qAmp, qVolt), "1.600031 mA/V"}, // seven significant digits
	} {
		if c.got != c.want {
			t.Errorf("got %q, want %q", c.got, c.want)
		}
	}
	for _, c := range []struct {
		q    quantity
		max  float64
		f    float64
		unit string
	}{
		{qAmp, 125e-6, 1e-6, "µA"},
		{qAmp, 0.02, 1e-3, "mA"},
		{qAmp, 0, 1e-6, "µA"},
		{qAmp, 5e-10, 1e-9, "nA"},
		{qCount, 5, 1, "counts"},
		{qVolt, 0.5e-3, 1e-6, "µV"},
	} {
		if f, u := c.q.scale(c.max); f != c.f || u != c.unit {
			t.Errorf("%s.scale(%g) = %g %q, want %g %q", c.q, c.max, f, u, c.f, c.unit)
		}
	}
}

// A result in amperes takes the prefix of the larger of value and U, as volts
// do; a result in counts (a number the unit reports) keeps its decimals and
// its uncertainty, unlike a code.
func TestResultUnitsAmpsAndCounts(t *testing.T) {
	for _, c := range []struct {
		r    sequencer.Result
		want string
	}{
		// 21.7 mA, U 4 µA: in mA, U rounded up to two digits (0.0040), the value
		// to the same place.
		{sequencer.Result{Value: 21.7e-3, Unit: "A", Valid: true, Unc: sequencer.Uncertainty{Expanded: 4e-6}}, "21.7000 mA ± 0.0040 mA"},
		{sequencer.Result{Value: -0.3e-6, Unit: "A", Valid: true, Unc: sequencer.Uncertainty{Expanded: 1.1e-6}}, "−0.3 µA ± 1.1 µA"},
		{sequencer.Result{Value: -0.37, Unit: "count", Valid: true, Unc: sequencer.Uncertainty{Expanded: 0.2}}, "−0.37 ± 0.20 counts"},
		{sequencer.Result{Value: 12.5, Unit: "count", Valid: true}, "12.5 counts"},
		{sequencer.Result{Value: 2101, Unit: "code", Valid: true}, "2101"},
	} {
		if got := fmtResultU(c.r); got != c.want {
			t.Errorf("fmtResultU(%v %s) = %q, want %q", c.r.Value, c.r.Unit, got, c.want)
		}
	}
	if got := fmtWithU(-1.5, 0.6, "count"); got != "−1.50 ± 0.60 counts" { // U to two digits
		t.Errorf("a limit in counts: %q", got)
	}
	if got := fmtValue(2101.4, "code"); got != "2101" {
		t.Errorf("a limit in codes: %q, want the integer", got)
	}
}

// coefRecord is a two-channel record with firmware coefficients: channel 2's
// offset reads back another word.
func coefRecord() *sequencer.Record {
	return &sequencer.Record{
		ResponseUnit: "A", IdealGain: 1.6e-3, IdealOffset: 4e-3,
		Trims: []sequencer.TrimCode{{Channel: "1", DAC: "offset", Code: 2100, Written: true}, {Channel: "2", DAC: "offset", Code: 2110, Written: true}},
		Coefficients: []sequencer.CoefficientWrite{
			{Name: "gain", Channel: "1", Adjusts: "gain", Format: "Q2.14 hex", Ideal: 1.0060362, IdealU: 31e-6,
				Value: 16483.0 / 16384, Text: "0x4063", Resolution: 1.0 / 16384, Written: true, Readback: "0x4063", ReadbackValue: 16483.0 / 16384, Match: true},
			{Name: "offset", Channel: "2", Adjusts: "offset", Format: "int16 decimal", Unit: "mA", Ideal: -0.013, IdealU: 0.6e-3,
				Value: -0.013, Text: "-130", Resolution: 1e-4, Written: true, Readback: "0", ReadbackValue: 0, Match: false},
			{Name: "gain", Channel: "2", Adjusts: "gain", Format: "float32 decimal", Ideal: 0.99, Written: false},
		},
	}
}

func TestCoefficientRows(t *testing.T) {
	d := &doc{rec: coefRecord()}
	cols, rows, bands := d.coefficientTable()
	if len(cols) != 8 {
		t.Fatalf("%d columns", len(cols))
	}
	w := 0.0
	for _, c := range cols {
		w += c.W // a gap is inside its column
	}
	if w > contentW+1e-9 {
		t.Errorf("the columns take %g mm of %g", w, contentW)
	}
	want := []string{
		// 1.0060362 ± 31e-6: u to two digits (0.000031), the value to the same
		// place. Stands for 16483/16384 = 1.00604248…, written to one decimal
		// finer than the resolution 6.1035e-5 (ceil(4.21) + 1 = 6 decimals).
		"gain | adjusts gain ‖ Q2.14 hex ‖ 1.006036 ± 0.000031 ‖ 0x4063 ‖ 1.006042 ‖ 6.104e−05 ‖ 0x4063 ‖ yes",
		// Resolution 1e-4 mA: 5 decimals. The read-back 0 decodes to 0, exact
		// in every format.
		"offset | adjusts offset, in mA ‖ int16 decimal ‖ −0.01300 ± 0.00060 ‖ -130 ‖ −0.01300 ‖ 0.0001 ‖ 0 | = 0 ‖ NO | differs from written",
		"gain | adjusts gain ‖ float32 decimal ‖ 0.99 ‖ — | not written ‖ — ‖ — ‖ — ‖ —",
	}
	for i, r := range rows {
		if got := rowText(r); i >= len(want) || got != want[i] {
			t.Errorf("row %d:\n got %s\nwant %s", i, got, want[min(i, len(want)-1)])
		}
	}
	if got := strings.Join(bandTitles(bands), ", "); got != "Channel 1, Channel 2" {
		t.Errorf("bands %q", got)
	}
	if !strings.Contains(coefficientNote, "this rounding (rectangular, resolution/√12) is counted in the uncertainty") {
		t.Error("the note does not say the rounding is in the uncertainty")
	}
	if got := d.subtitle(); got != "End-of-line trim of offset and firmware coefficients on 2 channels" {
		t.Errorf("subtitle %q", got)
	}
}

// retrimRecord is a re-trim on two channels in volts: channel A within its
// bound on pass 2; channel B never within it in three passes, the best code
// (98, error 0.5 µV) left in the DAC.
func retrimRecord(coverage float64) *sequencer.Record {
	p := func(ch string, pass, code int, e float64, sens float64, measured, within bool, next int) sequencer.RetrimPass {
		return sequencer.RetrimPass{Step: "fine offset", DAC: "offset", Channel: ch, Pass: pass, Code: code, Error: e, ErrorU: 0.2e-6,
			Sensitivity: sens, Measured: measured, Within: within, Next: next}
	}
	return &sequencer.Record{Coverage: coverage, Retrims: []sequencer.RetrimPass{
		p("A", 1, 200, 2.4e-6, 1.2e-6, false, false, 198),
		p("A", 2, 198, 0.1e-6, 1.15e-6, true, true, 198),
		p("B", 1, 100, 3e-6, 1.2e-6, false, false, 97),
		p("B", 2, 97, -1e-6, 1.33e-6, true, false, 98),
		p("B", 3, 98, 0.5e-6, 1.5e-6, true, false, 98),
	}}
}

func TestRetrimRows(t *testing.T) {
	d := &doc{rec: retrimRecord(0.9545)}
	cols, rows, bands, ends := d.retrimTable()
	w := 0.0
	for _, c := range cols {
		w += c.W // a gap is inside its column
	}
	if w > contentW+1e-9 {
		t.Errorf("the columns take %g mm of %g", w, contentW)
	}
	// k for 95.45 % of a normal distribution is 2.000 to three decimals (z at
	// 0.97725 is 2.0000053); U = 2 × 0.2 µV = 0.4 µV; 2.4 µV to its place. Below
	// 1 µV the prefix is n (the larger of value and U decides, as for results).
	want := []string{
		"1 ‖ 200 ‖ 2.40 µV ± 0.40 µV ‖ 1.2 µV/code | nominal LSB ‖ no ‖ 198",
		"2 ‖ 198 ‖ 100 nV ± 400 nV ‖ 1.15 µV/code | measured ‖ yes ‖ 198 | left in the DAC",
		"1 ‖ 100 ‖ 3.00 µV ± 0.40 µV ‖ 1.2 µV/code | nominal LSB ‖ no ‖ 97",
		"2 ‖ 97 ‖ −1.00 µV ± 0.40 µV ‖ 1.33 µV/code | measured ‖ no ‖ 98",
		"3 ‖ 98 ‖ 500 nV ± 400 nV ‖ 1.5 µV/code | measured ‖ no ‖ 98 | left in the DAC",
	}
	for i, r := range rows {
		if got := rowText(r); i >= len(want) || got != want[i] {
			t.Errorf("row %d:\n got %s\nwant %s", i, got, want[min(i, len(want)-1)])
		}
	}
	if got := strings.Join(bandTitles(bands), "; "); got != "Re-trim “fine offset” of the offset DAC — channel A; Re-trim “fine offset” of the offset DAC — channel B" {
		t.Errorf("bands %q", got)
	}
	wantEnds := []string{
		"Re-trim “fine offset” of the offset DAC, channel A: within the bound on pass 2 with code 198 (error 100 nV); code 198 left in the DAC.",
		"Re-trim “fine offset” of the offset DAC, channel B: not within the bound after 3 passes; the best code tried, 98 (error 500 nV), was left in the DAC.",
	}
	if strings.Join(ends, "\n") != strings.Join(wantEnds, "\n") {
		t.Errorf("endings:\n%s\nwant\n%s", strings.Join(ends, "\n"), strings.Join(wantEnds, "\n"))
	}
	if got := retrimNote(d.retrimK()); !strings.Contains(got, "U = k·u, k = 2.00 (normal distribution") {
		t.Errorf("note %q", got)
	}
	// 95 %: k = 1.96 (z at 0.975 is 1.959964); no coverage stated: k = 2.
	for _, c := range []struct{ p, k float64 }{{0.95, 1.96}, {0.9545, 2}, {0, 2}} {
		if k := (&doc{rec: retrimRecord(c.p)}).retrimK(); k != c.k {
			t.Errorf("coverage %g: k = %g, want %g", c.p, k, c.k)
		}
	}
}

// Outcomes that name their channel band the results by stage and channel, and
// each measured value is its own channel's (its U from that channel's result).
func TestResultsBandByStageAndChannel(t *testing.T) {
	res := func(name, ch string, st sequencer.Stage, v, U float64) sequencer.Result {
		return sequencer.Result{Name: name, Channel: ch, Stage: st, Value: v, Unit: "A", Valid: true,
			Unc: sequencer.Uncertainty{Std: U / 2, K: 2, Expanded: U, DOF: math.Inf(1)}}
	}
	out := func(name, result, ch string, v float64) limits.Outcome {
		return limits.Outcome{Name: name, Channel: ch, Expr: result + " <= 10", Unit: "uA", Uses: []string{result},
			Values: map[string]float64{result: v}, Pass: true}
	}
	rec := &sequencer.Record{ResponseUnit: "A",
		Results: []sequencer.Result{
			res("pre_offset", "1", sequencer.AsFound, 5e-6, 1e-6), res("post_offset", "1", sequencer.AsLeft, 0.5e-6, 1e-6),
			res("pre_offset", "2", sequencer.AsFound, 6e-6, 3e-6), res("post_offset", "2", sequencer.AsLeft, 0.7e-6, 3e-6),
		},
		Outcomes: []limits.Outcome{
			out("offset before", "pre_offset", "1", 5), out("offset after", "post_offset", "1", 0.5),
			out("offset before", "pre_offset", "2", 6), out("offset after", "post_offset", "2", 0.7),
		},
	}
	d := &doc{rec: rec}
	tb := d.resultsTable()
	wantBands := "As found: before adjustment — channel 1; As found: before adjustment — channel 2; " +
		"As left: after adjustment — channel 1; As left: after adjustment — channel 2"
	if got := strings.Join(bandTitles(tb.bands), "; "); got != wantBands {
		t.Errorf("bands:\n got %s\nwant %s", got, wantBands)
	}
	// Channel 2's post_offset: 0.7 µA with U = 3 µA (channel 1's U is 1 µA).
	if got := cellText(tb.rows[3][1]); !strings.HasPrefix(got, "0.7 µA ± 3.0 µA") {
		t.Errorf("channel 2 as left: %q", got)
	}
	if got := cellText(tb.rows[2][1]); !strings.HasPrefix(got, "0.5 µA ± 1.0 µA") {
		t.Errorf("channel 1 as left: %q", got)
	}
}
