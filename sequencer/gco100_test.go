package sequencer_test

import (
	"context"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"trimline/sequencer"
)

// The GCO-100 (testdata/gco100) combines the two ways a unit is corrected: its
// firmware scales the output by a gain coefficient (Q2.14, hex) and an
// output-referred 12-bit DAC (25 µV a code) ahead of the firmware trims the offset.
// clear_trim clears both; the as-found fit gives the coefficient; a second sweep
// sees the corrected output, whose offset the coefficient has moved to
// k·c − Y0 (≈ 2.5 V·(k − 1), up to 25 mV for a 1 % coefficient); the trim takes
// the DAC code from that fit and a re-trim at 0 V closes the loop.
//
// The bounds, from the station's settings (instruments/sim/doc.go) and the
// sequence's sweeps (levels ±20 mV, ±10 mV, 0 V; 4 readings a level):
//
//   - one reading's noise: card 20 µV ⊕ source 50 nV·100 ⊕ meter 1.5 µV ≈ 20.7 µV
//     rms. A fit's intercept has σ = 20.7/√20 ≈ 4.6 µV; its slope has σ =
//     (20.7/√4) / √(Σ(x − x̄)²) = 10.4 µV / 31.6 mV = 3.3·10⁻⁴ V/V, 3.3 ppm of 100.
//   - gain: the coefficient rounds to Q2.14's 2⁻¹⁴ = 61 ppm, so the written k is
//     within 2⁻¹⁵ = 30.5 ppm (÷ k ≥ 0.99: ≤ 30.9 ppm) of the k the as-found fit
//     asked for; the as-found and as-left slopes add 3.3·√2 ≈ 4.7 ppm σ. The
//     instruments' gain errors are the same in both fits and cancel. So
//     |post gain error| ≤ 30.9 + 4·4.7 ≈ 50 ppm, and it differs from the
//     rounding (written/asked − 1) by ≤ 4·4.7 ≈ 19 ppm.
//   - offset, open loop: the trim rounds the code (≤ 0.5 LSB), the DAC's bit
//     errors (dnl 0.05 LSB a bit, ≤ 12 bits changed: σ ≤ 0.17 LSB) move the step
//     by ≤ 0.5 LSB at 3σ, and the corrected fit's intercept (4.6 µV) and the
//     first re-trim pass's mean (8 readings: 20.7/√8 = 7.3 µV) add 8.6 µV σ, 1 LSB
//     at 3σ: the first pass sees |error| ≤ 2 LSB = 50 µV.
//   - offset, closed loop: the re-trim stops at |error| ≤ 0.5 LSB = 12.5 µV (or
//     at its best code, no worse), measured to 7.3 µV σ; the as-left intercept
//     adds 4.6 µV σ: |post offset| ≤ 12.5 + 4·8.6 ≈ 47 µV, within 3 LSB (75 µV).
func TestGainCoefficientWithOffsetDAC(t *testing.T) {
	const lsb = 25e-6
	dir := filepath.Join("testdata", "gco100")
	st, seq := loadFiles(t, filepath.Join(dir, "gco100-station.yaml"), filepath.Join(dir, "gco100-sequence.yaml"))
	cfg := sequencer.Config{Station: st, Sequence: seq, Operator: "test", Software: "test"}
	e := openEngine(t, st, seq)
	steep := 0 // units whose DAC step the coefficient changes by more than 2 LSB over the trim
	for i := 1; i <= 12; i++ {
		serial := fmt.Sprintf("GCO-%04d", i)
		rec := e.Run(context.Background(), serial)
		if rec.Verdict != sequencer.Pass {
			t.Errorf("%s: verdict %s, want PASS; fault %q, reasons %q", serial, rec.Verdict, rec.Fault, rec.Reasons)
			continue
		}

		// The record holds the coefficient written (and stored) and the DAC code.
		var coef *sequencer.CoefficientWrite
		for j := range rec.Coefficients {
			if w := &rec.Coefficients[j]; w.Step == "gain correction" && w.Name == "gain" {
				coef = w
			}
		}
		if coef == nil || !coef.Written || !coef.Match || !coef.Stored {
			t.Errorf("%s: coefficients %+v, want the gain written by \"gain correction\", read back and stored", serial, rec.Coefficients)
			continue
		}
		if len(rec.Trims) != 1 || rec.Trims[0].DAC != "offset" || !rec.Trims[0].Written || !rec.Trims[0].Stored {
			t.Errorf("%s: trims %+v, want the offset code written and stored", serial, rec.Trims)
			continue
		}

		// Gain: what is left is the coefficient's rounding.
		post := resultOf(t, rec, "post_gain_error").Value
		rounding := coef.Value/coef.Ideal - 1
		if math.Abs(post) > 50e-6 || math.Abs(post-rounding) > 19e-6 {
			t.Errorf("%s: gain error after correction %.1f ppm (the coefficient's rounding %.1f ppm), want within 50 ppm and 19 ppm of the rounding",
				serial, post*1e6, rounding*1e6)
		}

		// Offset: the open-loop trim lands within 2 LSB although the coefficient
		// scales the DAC's step by k, and the re-trim within 3 LSB.
		k, moved := coef.Value, resultOf(t, rec, "corrected_offset").Value
		if math.Abs((k-1)*moved) > 2*lsb {
			steep++
		}
		if len(rec.Retrims) == 0 {
			t.Errorf("%s: no re-trim pass recorded", serial)
		} else if e1 := rec.Retrims[0].Error; math.Abs(e1) > 2*lsb {
			t.Errorf("%s: the trim left %.1f µV at 0 V (k = %.6f, corrected offset %.3f mV), want within 2 LSB (50 µV)", serial, e1*1e6, k, moved*1e3)
		}
		if off := resultOf(t, rec, "post_offset").Value; math.Abs(off) > 3*lsb {
			t.Errorf("%s: offset after trim %.1f µV, want within 3 LSB (75 µV)", serial, off*1e6)
		}

		again, err := sequencer.Replay(cfg, rec)
		if err != nil {
			t.Fatalf("%s: replay: %v", serial, err)
		}
		if d := sequencer.Differences(rec, again); len(d) > 0 {
			t.Errorf("%s: replay differs: %v", serial, d)
		}
	}
	// Without the coefficient in the trim's arithmetic a unit like these would
	// miss by ≈ (k − 1)·(k·c − Y0): GCO-0009, k = 1.0081 and 19.3 mV, by ≈ 150 µV.
	if steep == 0 {
		t.Error("no unit's coefficient moves the DAC's step by more than 2 LSB over its trim: the test no longer shows the trim takes k into account")
	}
}

// The trim may also take its code from the as-found fit, made before the
// coefficient: it then brings the raw line (k = 1 when it was measured) to the
// ideal under the coefficient written since, (Y0 − m)/k at zero input, and the
// corrected output lands as close as from a fit of the corrected unit: within
// 2 LSB at 0 V open loop (the bound of TestGainCoefficientWithOffsetDAC, with the
// as-found intercept in place of the corrected one). Read with the coefficient
// now, the raw intercept would be off by Y0·(1/k − 1), 2.5 V·0.8 % = 20 mV on
// GCO-0009; left out, the corrected output would be off by Y0·(k − 1) as much.
func TestTrimFromFitBeforeCoefficient(t *testing.T) {
	const lsb = 25e-6
	dir := filepath.Join("testdata", "gco100")
	data, err := os.ReadFile(filepath.Join(dir, "gco100-sequence.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	text := string(data)
	second := text[strings.Index(text, "  - kind: sweep                  # the coefficient scales"):strings.Index(text, "  - kind: trim")]
	if !strings.Contains(second, "name: corrected fit") {
		t.Fatalf("the second sweep and fit are not where the test expects them: %q", second)
	}
	text = strings.Replace(text, second, "", 1)
	text = strings.Replace(text, "fit: corrected fit", "fit: as found fit", 1)
	seq, err := sequencer.ParseSequence(filepath.Join(dir, "gco100-sequence.yaml"), []byte(text), os.ReadFile)
	if err != nil {
		t.Fatal(err)
	}
	st, err := sequencer.LoadStation(filepath.Join(dir, "gco100-station.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	cfg := sequencer.Config{Station: st, Sequence: seq, Operator: "test", Software: "test"}
	e := openEngine(t, st, seq)
	for _, serial := range []string{"GCO-0001", "GCO-0002", "GCO-0009"} {
		rec := e.Run(context.Background(), serial)
		if rec.Verdict != sequencer.Pass {
			t.Errorf("%s: verdict %s, want PASS; fault %q, reasons %q", serial, rec.Verdict, rec.Fault, rec.Reasons)
			continue
		}
		if len(rec.Retrims) == 0 {
			t.Errorf("%s: no re-trim pass recorded", serial)
		} else if e1 := rec.Retrims[0].Error; math.Abs(e1) > 2*lsb {
			t.Errorf("%s: the trim from the as-found fit left %.1f µV at 0 V, want within 2 LSB (50 µV)", serial, e1*1e6)
		}
		again, err := sequencer.Replay(cfg, rec)
		if err != nil {
			t.Fatalf("%s: replay: %v", serial, err)
		}
		if d := sequencer.Differences(rec, again); len(d) > 0 {
			t.Errorf("%s: replay differs: %v", serial, d)
		}
	}
}
