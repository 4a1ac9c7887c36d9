package certificate

import (
	"bytes"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"trimline/instruments"
	"trimline/limits"
	"trimline/reports/internal/pdfdoc"
	"trimline/sequencer"
)

// These tests hold the certificate to what a quality engineer reads on the
// products that are adjusted by other means than trim DACs, or measure other
// quantities than volts (issue 14).

// loopCoefRecord is a 4–20 mA loop transmitter corrected by firmware
// coefficients alone: a clear step that found the factory words (gain 4000 in
// Q2.14, offset 0000 in Q4.12 mA) and wrote no correction, then a correction
// step that wrote the fit's values. Hand-worked: 0.9945032 in Q2.14 is
// round(0.9945032 × 16384) = 16294 = 0x3FA6, which stands for
// 16294/16384 = 0.99450684; 0.0561252 mA in Q4.12 is round(0.0561252 × 4096)
// = 230 = 0x00E6, standing for 230/4096 = 0.05615234 mA.
func loopCoefRecord() *sequencer.Record {
	return &sequencer.Record{
		ResponseUnit: "A", IdealGain: 0.32, IdealOffset: 4e-3, FullScale: 16e-3,
		Steps: []sequencer.StepRun{
			{Name: "clear correction", Kind: "clear_trim", Stage: sequencer.AsFound, Status: sequencer.StepDone},
			{Name: "correction", Kind: "coefficients", Stage: sequencer.Adjustment, Status: sequencer.StepDone},
		},
		Coefficients: []sequencer.CoefficientWrite{
			{Step: "clear correction", Name: "gain", Adjusts: "gain", Format: "Q2.14 hex", Ideal: 1, Value: 1, Text: "4000",
				Resolution: 1.0 / 16384, Written: true, Readback: "4000", ReadbackValue: 1, Match: true, Found: "4000", FoundValue: 1},
			{Step: "clear correction", Name: "offset", Adjusts: "offset", Format: "Q4.12 hex", Unit: "mA", Ideal: 0, Value: 0, Text: "0000",
				Resolution: 1.0 / 4096, Written: true, Readback: "0000", Match: true, Found: "0000"},
			{Step: "correction", Name: "gain", Adjusts: "gain", Format: "Q2.14 hex", Ideal: 0.9945032, IdealU: 0.000115, Value: 16294.0 / 16384,
				Text: "3FA6", Resolution: 1.0 / 16384, Written: true, Readback: "3FA6", ReadbackValue: 16294.0 / 16384, Match: true},
			{Step: "correction", Name: "offset", Adjusts: "offset", Format: "Q4.12 hex", Unit: "mA", Ideal: 0.0561252, IdealU: 0.00115, Value: 230.0 / 4096,
				Text: "00E6", Resolution: 1.0 / 4096, Written: true, Readback: "00E6", ReadbackValue: 230.0 / 4096, Match: true},
		},
	}
}

// A unit with coefficients and no trim DAC has no trim codes to list: the
// section is left out, and the transfer it meets is what it was corrected to.
// A unit with trim codes keeps both.
func TestTrimSectionOnlyWithTrimDACs(t *testing.T) {
	d := &doc{rec: loopCoefRecord()}
	if !d.byCoefficients() || d.adjustedWord() != "Corrected to" || d.adjustNoun() != "correction" {
		t.Errorf("coefficients alone: byCoefficients %v, %q, %q", d.byCoefficients(), d.adjustedWord(), d.adjustNoun())
	}
	withTrim := loopCoefRecord()
	withTrim.Trims = []sequencer.TrimCode{{DAC: "offset", Code: 2100, Written: true}}
	d = &doc{rec: withTrim}
	if d.byCoefficients() || d.adjustedWord() != "Trimmed to" || d.adjustNoun() != "trim" {
		t.Errorf("with a trim DAC: byCoefficients %v, %q, %q", d.byCoefficients(), d.adjustedWord(), d.adjustNoun())
	}
	d = &doc{rec: &sequencer.Record{}}
	if d.byCoefficients() || d.adjustedWord() != "Trimmed to" {
		t.Error("a record with neither reads as it always did")
	}

	text := flatText(t, loopCoefRecord())
	if text == "" {
		return
	}
	if strings.Contains(text, "Trim codes written") {
		t.Error("the certificate lists trim codes for a unit without trim DACs")
	}
	if !strings.Contains(text, "Corrected to output = 320 mA/V × input + 4 mA") {
		t.Error("the ideal transfer is not labelled \"Corrected to\"")
	}
	if got := flatText(t, withTrim); got != "" && !strings.Contains(got, "Trim codes written") {
		t.Error("a unit with a trim DAC lost its trim codes")
	}
}

// The clear step's rows and the correction step's stand in bands of their
// own, the clear step's saying what the unit held as found.
func TestCoefficientsBandedByStep(t *testing.T) {
	d := &doc{rec: loopCoefRecord()}
	_, rows, bands := d.coefficientTable()
	wantBands := "0: Step “clear correction”: as found, then no correction written; 2: Step “correction”: correction from the fit"
	var got []string
	for _, b := range bands {
		got = append(got, strings.Join([]string{itoa(b.At), b.Title}, ": "))
	}
	if strings.Join(got, "; ") != wantBands {
		t.Errorf("bands:\n got %s\nwant %s", strings.Join(got, "; "), wantBands)
	}
	want := []string{
		// Found 4000 = 16384/16384 = 1, to one decimal finer than 6.1e-5: 1.000000.
		"gain | adjusts gain ‖ Q2.14 hex ‖ found 1.000000 (4000) | then no correction ‖ 4000 ‖ 1.000000 ‖ 6.104e−05 ‖ 4000 ‖ yes",
		// Zero is exact: "0", whatever the format's spacing; the word "0000" reads
		// as that number, so it is not repeated.
		"offset | adjusts offset, in mA ‖ Q4.12 hex ‖ found 0 | then no correction ‖ 0000 ‖ 0 ‖ 0.0002441 ‖ 0000 ‖ yes",
		"gain | adjusts gain ‖ Q2.14 hex ‖ 0.99450 ± 0.00012 ‖ 3FA6 ‖ 0.994507 ‖ 6.104e−05 ‖ 3FA6 ‖ yes",
		"offset | adjusts offset, in mA ‖ Q4.12 hex ‖ 0.0561 ± 0.0012 ‖ 00E6 ‖ 0.05615 ‖ 0.0002441 ‖ 00E6 ‖ yes",
	}
	for i, r := range rows {
		if got := rowText(r); i >= len(want) || got != want[i] {
			t.Errorf("row %d:\n got %s\nwant %s", i, got, want[min(i, len(want)-1)])
		}
	}

	// On four channels, a band per channel and step.
	rec := loopCoefRecord()
	var cs []sequencer.CoefficientWrite
	for _, ch := range []string{"1", "2"} {
		for _, c := range rec.Coefficients {
			c.Channel = ch
			cs = append(cs, c)
		}
	}
	rec.Coefficients = cs
	_, _, bands = (&doc{rec: rec}).coefficientTable()
	if got := strings.Join(bandTitles(bands), "; "); got != "Channel 1 · step “clear correction”: as found, then no correction written; "+
		"Channel 1 · step “correction”: correction from the fit; "+
		"Channel 2 · step “clear correction”: as found, then no correction written; "+
		"Channel 2 · step “correction”: correction from the fit" {
		t.Errorf("channel bands: %s", got)
	}
}

// A float32 zero has a spacing of 1.4e-45 there; it prints "0", not fifteen
// zeros.
func TestFmtCoefZero(t *testing.T) {
	for _, c := range []struct {
		v, res float64
		want   string
	}{
		{0, 1.401298464324817e-45, "0"},
		{0, 1.0 / 4096, "0"},
		{13.530056953430176, 9.5367431640625e-07, "13.53005695"}, // ceil(6.02) + 1 = 8 decimals
		{-0.013, 1e-4, "−0.01300"},
	} {
		if got := fmtCoef(c.v, c.res); got != c.want {
			t.Errorf("fmtCoef(%g, %g) = %q, want %q", c.v, c.res, got, c.want)
		}
	}
	for _, c := range []struct {
		w    string
		v    float64
		want string
	}{
		{"4000", 1, "1.000000 (4000)"},
		{"1", 1, "1.000000"},
		{"0", 0, "0"},
		{"", 0, "not read"},
		{"ERR", 0, "ERR"},
	} {
		cw := sequencer.CoefficientWrite{Found: c.w, FoundValue: c.v, Resolution: 1.0 / 16384}
		if got := fmtFound(cw); got != c.want {
			t.Errorf("fmtFound(%q, %g) = %q, want %q", c.w, c.v, got, c.want)
		}
	}
}

func itoa(n int) string { return strconv.Itoa(n) }

// flatText renders rec and returns its text (pdftotext, reading order) with
// white space collapsed, or "" when pdftotext is not installed, so that a
// test checks its rows without a PDF tool and its page text with one.
func flatText(t *testing.T, rec *sequencer.Record) string {
	t.Helper()
	bin, err := exec.LookPath("pdftotext")
	if err != nil {
		t.Log("pdftotext not installed: page text not checked")
		return ""
	}
	var buf bytes.Buffer
	if err := Write(&buf, rec, Options{Number: "TL9-000001"}); err != nil {
		t.Fatal(err)
	}
	in := filepath.Join(t.TempDir(), "c.pdf")
	if err := os.WriteFile(in, buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	out, err := exec.Command(bin, "-enc", "UTF-8", in, "-").Output()
	if err != nil {
		t.Fatalf("pdftotext: %v", err)
	}
	return strings.Join(strings.Fields(string(out)), " ")
}

// A gain coefficient near 1 is written with six significant digits, so that
// the correction shows: 0.9945068 is "0.994507", where three digits gave
// "0.995". A count of re-trim passes is a whole number with no uncertainty to
// evaluate. An offset coefficient recorded in codes but with an uncertainty
// (a unit that reports counts) is a measured number of counts.
func TestNumbersThatAreFactorsOrCounts(t *testing.T) {
	for _, c := range []struct {
		r    sequencer.Result
		want string
	}{
		{sequencer.Result{Quantity: "gain_coefficient", Unit: "number", Value: 0.9945068359375, Valid: true}, "0.994507"},
		{sequencer.Result{Unit: "number", Value: 1.0015366, Valid: true}, "1.00154"},                                // no quantity, near 1
		{sequencer.Result{Quantity: "lack_of_fit", Unit: "number", Value: 1.2987, Valid: true}, "1.30"},             // a statistic keeps three digits
		{sequencer.Result{Quantity: "passes", Unit: "number", Value: 3, Valid: true}, "3"},                          // was "3.00"
		{sequencer.Result{Quantity: "code", Unit: "code", Value: -14, Valid: true}, "−14"},                          // a trim code
		{sequencer.Result{Quantity: "offset_coefficient", Unit: "code", Value: 13.53, Valid: true}, "13.53 counts"}, // a fraction: no code
	} {
		if got := fmtResult(c.r); got != c.want {
			t.Errorf("fmtResult(%s %g %s) = %q, want %q", c.r.Quantity, c.r.Value, c.r.Unit, got, c.want)
		}
	}
	// 13.530057 ± 0.22128 (k = 2): U rounds up to 0.23, the value to 13.53.
	off := sequencer.Result{Quantity: "offset_coefficient", Unit: "code", Value: 13.530056953430176, Valid: true,
		Unc: sequencer.Uncertainty{Std: 0.1106, K: 2, Expanded: 0.22127519250349173, DOF: 7125}}
	if got := fmtResultU(off); got != "13.53 ± 0.23 counts" {
		t.Errorf("offset coefficient in counts: %q", got)
	}
	// A limit on a factor, in no unit: six digits too.
	if got := fmtValue(0.9945068, ""); got != "0.994507" {
		t.Errorf("fmtValue(0.9945068) = %q", got)
	}

	rec := &sequencer.Record{Results: []sequencer.Result{
		{Name: "retrim_passes", Stage: sequencer.Adjustment, Quantity: "passes", Unit: "number", Value: 3, Valid: true},
		off,
	}}
	rec.Results[1].Name, rec.Results[1].Stage = "offset_coefficient", sequencer.Adjustment
	_, rows, _ := (&doc{rec: rec}).otherResults()
	want := []string{
		// No "U not evaluated" for a count; the stage the results table
		// declares is the adjustment.
		"retrim_passes ‖ adjustment ‖ 3 ‖ ",
		"offset_coefficient ‖ adjustment ‖ 13.53 ± 0.23 counts ‖ k = 2.00 · νeff ≥ 1000",
	}
	for i, r := range rows {
		if got := rowText(r); i >= len(want) || got != want[i] {
			t.Errorf("other results row %d:\n got %s\nwant %s", i, got, want[min(i, len(want)-1)])
		}
	}
}

// offsetRetrimRecord is an amplifier in volts with an 8-bit offset DAC in two's
// complement: the trim wrote −11 (the fit asked −11.229); a closed-loop
// re-trim moved it to −13, then −14, within its bound on pass 3. A second
// meter read the supply current, 1.211317 mA, at 0 V in.
func offsetRetrimRecord() *sequencer.Record {
	pt := func(mean, sd float64) []sequencer.Point {
		return []sequencer.Point{{Stimulus: 0, Mean: mean, SD: sd, Valid: 8, Readings: make([]instruments.Reading, 8)}}
	}
	pass := func(n, code int, e float64, sens float64, measured, within bool, next int) sequencer.RetrimPass {
		return sequencer.RetrimPass{Step: "offset re-trim", DAC: "offset", Pass: n, Code: code, Error: e, ErrorU: 25e-6,
			Sensitivity: sens, Measured: measured, Within: within, Next: next}
	}
	return &sequencer.Record{
		IdealGain: 100, IdealOffset: 0, FullScale: 20, Coverage: 0.9545,
		Sweeps: []sequencer.Sweep{
			{Name: "supply current", Stage: sequencer.AsFound, Points: pt(1.211317e-3, 4.1e-9)},
			{Name: "offset re-trim pass 1", Stage: sequencer.Adjustment, Points: pt(975.9375e-6, 17e-6)},
			{Name: "offset re-trim pass 2", Stage: sequencer.Adjustment, Points: pt(177.8875e-6, 25e-6)},
			{Name: "offset re-trim pass 3", Stage: sequencer.Adjustment, Points: pt(-96.9125e-6, 14e-6)},
			{Name: "zero check", Stage: sequencer.AsLeft, Points: pt(-96.675e-6, 22e-6)},
		},
		Trims: []sequencer.TrimCode{{DAC: "offset", Before: 0, Ideal: -11.229, Code: -14, Written: true, Readback: -14, Stored: true}},
		Retrims: []sequencer.RetrimPass{
			pass(1, -11, 975.9375e-6, 500e-6, false, false, -13),
			pass(2, -13, 177.8875e-6, 399e-6, true, false, -14),
			pass(3, -14, -96.9125e-6, 274.8e-6, true, true, -14),
		},
		Results: []sequencer.Result{
			{Name: "supply_current", Stage: sequencer.AsFound, Step: "supply current", Quantity: "mean", Value: 1.211317e-3, Unit: "A", Valid: true},
			{Name: "zero_output", Stage: sequencer.AsLeft, Step: "zero check", Quantity: "mean", Value: -96.675e-6, Unit: "V", Valid: true},
		},
	}
}

// The measurements at one level are rows of one table, not a table (or a
// plot) each: the supply current in amperes with no error against the
// amplifier's voltage ideal, each re-trim pass with the code it measured.
func TestMeasurementsAtOneLevel(t *testing.T) {
	d := &doc{rec: offsetRetrimRecord()}
	ts := d.pointTables()
	if len(ts) != 1 {
		t.Fatalf("%d point tables, want the one of measurements at one level", len(ts))
	}
	if ss, _ := d.plotSeries(); len(ss) != 0 {
		t.Errorf("%d plots of one-point measurements", len(ss))
	}
	want := []string{
		// A current: 1.211317 mA to 7 digits; s 4.1 nA; no error (the ideal is a voltage).
		"supply current ‖ as found ‖ 0 V ‖ 1.211317 mA ‖ — ‖ 4.1 nA ‖ 8/8",
		// Error = mean − (100 × 0 + 0): the mean itself, to 3 digits.
		"offset re-trim pass 1 | re-trim pass 1, code −11 in the offset DAC ‖ adjustment ‖ 0 V ‖ 975.9375 µV ‖ 976 µV ‖ 17 µV ‖ 8/8",
		"offset re-trim pass 2 | re-trim pass 2, code −13 in the offset DAC ‖ adjustment ‖ 0 V ‖ 177.8875 µV ‖ 178 µV ‖ 25 µV ‖ 8/8",
		"offset re-trim pass 3 | re-trim pass 3, code −14 in the offset DAC ‖ adjustment ‖ 0 V ‖ −96.9125 µV ‖ −96.9 µV ‖ 14 µV ‖ 8/8",
		"zero check ‖ as left ‖ 0 V ‖ −96.675 µV ‖ −96.7 µV ‖ 22 µV ‖ 8/8",
	}
	// The table is ordered by stage (as found, then as left, then the others):
	// sweepsByStage puts the adjustment's passes last.
	order := []int{0, 4, 1, 2, 3}
	for i, r := range ts[0].rows {
		if i >= len(order) {
			t.Errorf("extra row %s", rowText(r))
			continue
		}
		if got := rowText(r); got != want[order[i]] {
			t.Errorf("row %d:\n got %s\nwant %s", i, got, want[order[i]])
		}
	}
	if !d.otherQuantity() {
		t.Error("the supply current is not seen as another quantity")
	}
}

// The trim table says a re-trim moved the code the fit asked for; the re-trim
// table writes its codes with a minus sign, as the results do.
func TestRetrimmedCodeAndSignedCodes(t *testing.T) {
	d := &doc{rec: offsetRetrimRecord()}
	if first, ok := d.retrimmedFrom(d.rec.Trims[0]); !ok || first != -11 {
		t.Errorf("retrimmedFrom = %d, %v; want −11, true", first, ok)
	}
	_, rows, _, ends := d.retrimTable()
	if got := rowText(rows[0]); got != "1 ‖ −11 ‖ 976 µV ± 50 µV ‖ 500 µV/code | nominal LSB ‖ no ‖ −13" {
		t.Errorf("pass 1: %s", got)
	}
	if ends[0] != "Re-trim “offset re-trim” of the offset DAC: within the bound on pass 3 with code −14 (error −96.9 µV); code −14 left in the DAC." {
		t.Errorf("ending: %s", ends[0])
	}
	text := flatText(t, offsetRetrimRecord())
	if text == "" {
		return
	}
	for _, s := range []string{"re-trimmed from −11", "a closed-loop re-trim then moved the code", "Measurements at fixed levels", "1.211317 mA"} {
		if !strings.Contains(text, s) {
			t.Errorf("page text lacks %q", s)
		}
	}
	for _, s := range []string{"offset re-trim pass 1”", "1.211317 mV"} {
		if strings.Contains(text, s) {
			t.Errorf("page text has %q", s)
		}
	}
}

// A float32 zero (the clear step's offset) has no resolution worth printing.
func TestFmtResolution(t *testing.T) {
	for _, c := range []struct {
		c    sequencer.CoefficientWrite
		want string
	}{
		{sequencer.CoefficientWrite{Value: 0, Resolution: 1.401298464324817e-45}, "exact"},
		{sequencer.CoefficientWrite{Value: 0, Resolution: 1.0 / 4096}, "0.0002441"}, // a Q format's zero: its LSB
		{sequencer.CoefficientWrite{Value: 13.53, Resolution: 9.5367431640625e-07}, "9.537e−07"},
		{sequencer.CoefficientWrite{Value: 1}, "—"},
	} {
		if got := fmtResolution(c.c); got != c.want {
			t.Errorf("fmtResolution(%g, %g) = %q, want %q", c.c.Value, c.c.Resolution, got, c.want)
		}
	}
}

// A paragraph continued on the next page repeats its label only as wide as
// the label column: "Traceability (continued)" ran into the text beside it.
func TestContinuedLabelFits(t *testing.T) {
	d := &doc{Doc: pdfdoc.Doc{PDF: pdfdoc.New(time.Time{}, marginL, marginT, marginR), Left: marginL, Width: contentW}}
	const labelW = 27.0 // fields' label column
	for _, c := range []struct{ label, want string }{
		{"Station", "Station (continued)"},
		{"Traceability", "Traceability (cont.)"},
	} {
		got := d.continued(c.label, labelW-1)
		if got != c.want {
			t.Errorf("continued(%q) = %q, want %q", c.label, got, c.want)
		}
		if w := d.TextWidth(got, stLabel); w > labelW-1 {
			t.Errorf("%q is %.1f mm wide, the column %g mm", got, w, labelW)
		}
	}
	if w := d.TextWidth("Traceability (continued)", stLabel); w <= labelW-1 {
		t.Errorf("the long form fits (%.1f mm): the test no longer shows the overflow", w)
	}
}

// A fit of counts writes its output at 0 V to three decimals at most.
func TestFitOutputInCounts(t *testing.T) {
	for _, c := range []struct {
		q      quantity
		v      float64
		digits int
		want   string
	}{
		{qCount, -0.09027777777845, 7, "−0.090 counts"}, // 7 digits would be −0.09027778
		{qCount, 1.552874e-12, 7, "0.000 counts"},       // was "1.552874e−12 counts"
		{qCount, -1.552874e-12, 3, "0.000 counts"},      // no −0.000
		{qCount, -13.583333, 7, "−13.583 counts"},
		{qCount, -13.583333, 3, "−13.6 counts"},
		{qCount, 31999.75, 7, "31999.75 counts"}, // seven digits: two decimals
		{qVolt, 2.499552, 7, "2.499552 V"},       // volts as before
	} {
		if got := fitOutput(c.q, c.v, c.digits); got != c.want {
			t.Errorf("fitOutput(%s, %g, %d) = %q, want %q", c.q, c.v, c.digits, got, c.want)
		}
	}
}

// The plots of a unit of four channels (eight: before and after, on each)
// fit one page below the running header and their heading; two or three rows
// keep the full height, so a one-channel certificate is unchanged.
func TestFourChannelPlotsFitAPage(t *testing.T) {
	if plotHeight(2) != plotH || plotHeight(6) != plotH || plotHeight(8) != plotShortH {
		t.Errorf("plotHeight: 2 → %g, 6 → %g, 8 → %g", plotHeight(2), plotHeight(6), plotHeight(8))
	}
	d := &doc{Doc: pdfdoc.Doc{PDF: pdfdoc.New(time.Time{}, marginL, marginT, marginR), Left: marginL, Width: contentW}, rec: channelRecordInternal()}
	ss, h := d.plotSeries()
	if len(ss) != 8 {
		t.Fatalf("%d plots, want 8", len(ss))
	}
	// A later page's body starts 10.5 mm below the top margin (running header).
	if free := bottom - (marginT + 10.5) - headingH; h > free {
		t.Errorf("the plots take %.1f mm, a page has %.1f", h, free)
	}
}

// channelRecordInternal is a record of four channels, each with a sweep before
// and after correction of 5 points.
func channelRecordInternal() *sequencer.Record {
	rec := &sequencer.Record{ResponseUnit: "count", IdealGain: 3200, FullScale: 64000}
	for _, ch := range []string{"1", "2", "3", "4"} {
		for _, st := range []sequencer.Stage{sequencer.AsFound, sequencer.AsLeft} {
			sw := sequencer.Sweep{Name: map[sequencer.Stage]string{sequencer.AsFound: "as found", sequencer.AsLeft: "as left"}[st], Channel: ch, Stage: st}
			for x := -10.0; x <= 10; x += 5 {
				sw.Points = append(sw.Points, sequencer.Point{Stimulus: x, Mean: 3200*x + 3, SD: 0.5, Valid: 16, Readings: make([]instruments.Reading, 16)})
			}
			rec.Sweeps = append(rec.Sweeps, sw)
		}
	}
	return rec
}

// The trim step's code, −11, shows among the other results with a word that
// a re-trim moved it to −14, the code the trim table gives.
func TestTrimCodeResultSaysItWasRetrimmed(t *testing.T) {
	rec := offsetRetrimRecord()
	rec.Steps = []sequencer.StepRun{{Name: "trim", Kind: "trim", Stage: sequencer.Adjustment, Status: sequencer.StepDone},
		{Name: "offset re-trim", Kind: "retrim", Stage: sequencer.Adjustment, Status: sequencer.StepDone}}
	rec.Results = []sequencer.Result{
		{Name: "offset_code", Stage: sequencer.Adjustment, Step: "trim", Quantity: "code", Value: -11, Unit: "code", Valid: true},
		{Name: "offset_code_final", Stage: sequencer.Adjustment, Step: "offset re-trim", Quantity: "code", Value: -14, Unit: "code", Valid: true},
	}
	_, rows, _ := (&doc{rec: rec}).otherResults()
	want := []string{
		"offset_code ‖ adjustment ‖ −11 ‖ written by the trim; re-trimmed to −14 by “offset re-trim”",
		"offset_code_final ‖ adjustment ‖ −14 ‖ ",
	}
	for i, r := range rows {
		if got := rowText(r); i >= len(want) || got != want[i] {
			t.Errorf("row %d:\n got %s\nwant %s", i, got, want[min(i, len(want)-1)])
		}
	}
}

// A limit in "count" has its decision statement in counts, as the tables.
func TestStatementInCounts(t *testing.T) {
	in := "Guarded acceptance, w = 1·U = 0.222 count (ILAC-G8:09/2019 §4.2.3): measured −13.5833 count with U = 0.222 count " +
		"(k = 2.00, ν = 7125.72) lies within the acceptance interval −99.7779 … 99.7779 count: pass; 1 count; 1.55287e−12 count."
	want := "Guarded acceptance, w = 1·U = 0.222 counts (ILAC-G8:09/2019 §4.2.3): measured −13.5833 counts with U = 0.222 counts " +
		"(k = 2.00, ν = 7125.72) lies within the acceptance interval −99.7779 … 99.7779 counts: pass; 1 count; 1.55287e−12 counts."
	if got := statementText(in, "count"); got != want {
		t.Errorf("got\n%s\nwant\n%s", got, want)
	}
	if got := statementText("measured 3 count", "mV"); got != "measured 3 count" {
		t.Errorf("another unit changed: %q", got)
	}
}

// A TUR of five digits or more (a unit whose gain is dead, −100 % against
// ±1.5 %) fits its column in the small size instead of wrapping "20144:" and
// "1" on two lines.
func TestLargeTURFitsItsColumn(t *testing.T) {
	d := &doc{Doc: pdfdoc.Doc{PDF: pdfdoc.New(time.Time{}, marginL, marginT, marginR), Left: marginL, Width: contentW}}
	for _, tur := range []float64{435.4, 1066, 20144, 3.2e6} {
		rec := &sequencer.Record{Outcomes: []limits.Outcome{{Name: "gain", Unit: "%", Uses: []string{"g"}, Values: map[string]float64{"g": 1},
			Decision: &limits.Decision{Result: "g", Value: 1, U: 0.01, K: 2, TUR: tur, Zone: limits.ZonePass, Rule: "guarded"}, Pass: true}}}
		d.rec = rec
		tb := d.resultsTable()
		c := tb.rows[0][4]
		if w := d.TextWidth(c[0].Text, c[0].St); w > tb.cols[4].W-2*pdfdoc.PadX {
			t.Errorf("TUR %g: %q is %.1f mm wide, the column holds %.1f", tur, c[0].Text, w, tb.cols[4].W-2*pdfdoc.PadX)
		}
	}
}

// A sweep with no partner beside it has no column titles over the empty
// half; a gain in exponent notation has a true minus sign.
func TestLoneSweepAndGainExponent(t *testing.T) {
	rec := channelRecordInternal()
	rec.Sweeps = rec.Sweeps[:1] // channel 1 as found only
	ts := (&doc{rec: rec}).pointTables()
	if len(ts) != 1 || len(ts[0].cols) != 12 {
		t.Fatalf("%d tables", len(ts))
	}
	for j, c := range ts[0].cols {
		if (j < 6) != (c.Title != "") {
			t.Errorf("column %d titled %q", j, c.Title)
		}
	}
	// 100 V/V × (1 − 0.99999956): 4.366667e-05 V/V, as 'g' with 7 digits writes it.
	if got := gain(4.366667e-05, qVolt, qVolt); got != "4.366667e−05 V/V" {
		t.Errorf("gain %q", got)
	}
}

// A short paragraph that does not fit the rest of a page moves whole to the
// next: the traceability statement left "standards." alone on a new page.
func TestShortParagraphKeptWhole(t *testing.T) {
	d := &doc{Doc: pdfdoc.Doc{PDF: pdfdoc.New(time.Time{}, marginL, marginT, marginR), Left: marginL, Width: contentW},
		rec: &sequencer.Record{Serial: "X-1"}}
	d.Need = d.need
	d.newPage()
	text := strings.Repeat("The results are traceable to the SI through the reference instruments. ", 4) // three lines
	n := len(d.Wrap(text, contentW-27, pdfdoc.Body.Sized(7.6)))
	if n < 3 || n > 4 {
		t.Fatalf("the paragraph wraps to %d lines, want 3 or 4", n)
	}
	lh := pdfdoc.Body.Sized(7.6).LineH() + 0.3
	d.Y = d.bottom() - (float64(n)-0.5)*lh // room for all lines but the last
	d.fields([]para{{"Traceability", text}})
	if d.PDF.PageNo() != 2 {
		t.Fatalf("page %d, want the paragraph on page 2", d.PDF.PageNo())
	}
	// Page 2's body starts 10.5 mm below the top margin; all n lines are there.
	if top := marginT + 10.5; d.Y < top+float64(n)*lh {
		t.Errorf("page 2 holds less than the paragraph's %d lines: y %.1f", n, d.Y)
	}
}

// A value ± U or an acceptance interval too wide for its column breaks before
// the "±" and after "accept", never between a number and its unit:
// "1.21132 mA ± 0.00052" / "mA" and "accept 0.900511 … 1.499489" / "mA" were
// how the supply current read.
func TestWideValuesBreakBetweenParts(t *testing.T) {
	d := &doc{Doc: pdfdoc.Doc{PDF: pdfdoc.New(time.Time{}, marginL, marginT, marginR), Left: marginL, Width: contentW}}
	lo, hi, alo, ahi := 0.9, 1.5, 0.900511, 1.499489
	d.rec = &sequencer.Record{Outcomes: []limits.Outcome{{Name: "supply current", Unit: "mA", Uses: []string{"i"}, Values: map[string]float64{"i": 1.21132},
		Decision: &limits.Decision{Result: "i", Value: 1.2113174, U: 0.000511, K: 2, TUR: 599, Zone: limits.ZonePass, Rule: "guarded",
			Lower: &lo, Upper: &hi, AcceptLower: &alo, AcceptUpper: &ahi}, Pass: true}}}
	tb := d.resultsTable()
	// U = 0.000511 rounds up to 0.00052 (two digits); the value to its place.
	if got := cellText(tb.rows[0][1]); got != "1.21132 mA | ± 0.00052 mA | k = 2.00" {
		t.Errorf("measured: %q", got)
	}
	// One digit finer than U, rounded inward.
	if got := cellText(tb.rows[0][2]); got != "0.9 … 1.5 mA | accept | 0.900511 … 1.499489 mA" {
		t.Errorf("tolerance: %q", got)
	}
	for _, c := range []pdfdoc.Cell{tb.rows[0][1], tb.rows[0][2]} {
		for _, sp := range c {
			if n := len(d.Wrap(sp.Text, tb.cols[1].W-2*pdfdoc.PadX, sp.St)); n != 1 && sp.St == pdfdoc.Body {
				t.Errorf("%q wraps to %d lines", sp.Text, n)
			}
		}
	}
	// A value that fits stays on one line.
	d.rec.Outcomes[0].Decision.Value, d.rec.Outcomes[0].Decision.U = 1.2, 0.05
	if got := cellText(d.resultsTable().rows[0][1]); got != "1.200 mA ± 0.050 mA | k = 2.00" {
		t.Errorf("short value: %q", got)
	}
}

// A re-trim at two levels records each pass as a sweep of two points: still
// rows of the table of fixed levels (a row a level), never a plot or a point
// table of its own.
func TestTwoLevelRetrimPassesAreRows(t *testing.T) {
	rec := offsetRetrimRecord()
	for i := range rec.Sweeps {
		if strings.Contains(rec.Sweeps[i].Name, "pass") {
			p := rec.Sweeps[i].Points[0]
			p2 := p
			p2.Stimulus, p2.Mean = 0.05, 100*0.05+p.Mean // 50 mV in: 5 V plus the same error
			rec.Sweeps[i].Points = append(rec.Sweeps[i].Points, p2)
		}
	}
	d := &doc{rec: rec}
	if ss, _ := d.plotSeries(); len(ss) != 0 {
		t.Errorf("%d plots drawn of re-trim passes", len(ss))
	}
	ts := d.pointTables()
	if len(ts) != 1 {
		t.Fatalf("%d point tables, want only the table of fixed levels", len(ts))
	}
	// supply current, zero check, then three passes of two rows each.
	if n := len(ts[0].rows); n != 2+3*2 {
		t.Fatalf("%d rows, want 8", n)
	}
	// The second level of pass 1: no name again; error = (5 V + 975.9375 µV) − 100 × 50 mV.
	if got := rowText(ts[0].rows[3]); got != " ‖  ‖ 50 mV ‖ 5.000976 V ‖ 976 µV ‖ 17 µV ‖ 8/8" {
		t.Errorf("pass 1, second level: %s", got)
	}
}

// A sweep named for its stage ("as found") is not labelled with the stage a
// second time; "pre-trim" still says it is the as-found sweep.
func TestStageNamedSweepSaysItOnce(t *testing.T) {
	for _, c := range []struct {
		name string
		want string
	}{
		{"as found", "Sweep “as found”"},
		{"pre-trim", "Sweep “pre-trim” (as found)"},
	} {
		if got := sweepTitle(sequencer.Sweep{Name: c.name, Stage: sequencer.AsFound}); got != c.want {
			t.Errorf("sweepTitle(%q) = %q, want %q", c.name, got, c.want)
		}
	}
	rec := &sequencer.Record{IdealGain: 100,
		Sweeps: []sequencer.Sweep{{Name: "as found", Stage: sequencer.AsFound}, {Name: "pre-trim", Stage: sequencer.AsFound}},
		Fits:   []sequencer.FitSummary{{Sweep: "as found", Slope: 100, DOF: 7}, {Sweep: "pre-trim", Slope: 100, DOF: 7}}}
	_, rows, _ := (&doc{rec: rec}).fits()
	if got := cellText(rows[0][0]); got != "as found" {
		t.Errorf("fit of \"as found\": %q", got)
	}
	if got := cellText(rows[1][0]); got != "pre-trim | as found" {
		t.Errorf("fit of \"pre-trim\": %q", got)
	}
}
