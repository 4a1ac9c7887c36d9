package certificate_test

import (
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"
	"time"

	"trimline/instruments"
	"trimline/limits"
	"trimline/sequencer"
)

// The four-channel sample: a 4–20 mA loop transmitter card, 0 to 10 V in,
// 4 mA + 1.6 mA/V out, trimmed by an offset DAC (closed-loop re-trim) and by
// firmware gain and offset coefficients on each channel.
const (
	loopGain   = 1.6e-3 // A/V
	loopOffset = 4e-3   // A
	loopFS     = 16e-3  // A
)

// loopSweep is a 6-point sweep from 0 to 10 V of a channel whose output is
// gain·x + offset plus Gaussian noise of sd amperes, n readings a point.
func loopSweep(name, ch string, st sequencer.Stage, rng *rand.Rand, at time.Time, gain, offset, sd float64, n int) sequencer.Sweep {
	s := sequencer.Sweep{Name: name, Channel: ch, Stage: st}
	for i := range 6 {
		x := 2.0 * float64(i)
		p := sequencer.Point{Stimulus: x}
		sum := 0.0
		for range n {
			at = at.Add(100 * time.Millisecond)
			v := gain*x + offset + sd*rng.NormFloat64()
			p.Readings = append(p.Readings, instruments.Reading{Value: v, Time: at})
			sum += v
		}
		p.Valid, p.Mean = n, sum/float64(n)
		ss := 0.0
		for _, r := range p.Readings {
			ss += (r.Value - p.Mean) * (r.Value - p.Mean)
		}
		p.SD = math.Sqrt(ss / float64(n-1))
		s.Points = append(s.Points, p)
	}
	return s
}

// channelRecord is a PASS record of the four-channel loop card, in amperes.
// Channel 3's offset coefficient reads back another word, so that the table
// shows a mismatch; channel 2's re-trim takes four passes.
func channelRecord() *sequencer.Record {
	rng := rand.New(rand.NewPCG(14, 4))
	rec := passRecord()
	rec.Serial, rec.Product = "LT4-2612-00021", "LT-4 four-channel 4–20 mA transmitter card"
	rec.StimulusUnit, rec.ResponseUnit = "V", "A"
	rec.IdealGain, rec.IdealOffset, rec.FullScale = loopGain, loopOffset, loopFS
	rec.Sweeps, rec.Fits, rec.Trims, rec.Results, rec.Outcomes = nil, nil, nil, nil, nil
	inf := math.Inf(1)
	for c := 1; c <= 4; c++ {
		ch := fmt.Sprint(c)
		gErr, oErr := 0.004*float64(c)-0.01, 21e-6*float64(c)-50e-6
		pre := loopSweep("pre-trim", ch, sequencer.AsFound, rng, t0, loopGain*(1+gErr), loopOffset+oErr, 0.4e-6, 4)
		post := loopSweep("verify", ch, sequencer.AsLeft, rng, t0.Add(time.Minute), loopGain*(1+3e-6*float64(c)), loopOffset-0.2e-6*float64(c), 0.3e-6, 4)
		fPre, fPost := fitSweep(pre), fitSweep(post)
		fPre.Channel, fPost.Channel = ch, ch
		fPre.Nonlinearity, fPost.Nonlinearity = 12e-6, 4e-6*float64(c)
		rec.Sweeps = append(rec.Sweeps, pre, post)
		rec.Fits = append(rec.Fits, fPre, fPost)
		rec.Trims = append(rec.Trims, sequencer.TrimCode{Channel: ch, DAC: "offset", Before: 2048, Ideal: 2048 + 41.3*float64(c),
			Code: 2048 + 41*c, Written: true, Readback: 2048 + 41*c, Stored: true})
		postOff := fPost.Intercept - loopOffset
		postGain := fPost.Slope/loopGain - 1
		res := []sequencer.Result{
			{Name: "pre_offset", Stage: sequencer.AsFound, Value: fPre.Intercept - loopOffset, Unit: "A", Valid: true, Unc: unc(0.6e-6, inf, 2, "GUM")},
			{Name: "pre_gain_error", Stage: sequencer.AsFound, Value: fPre.Slope/loopGain - 1, Unit: "ratio", Valid: true, Unc: unc(30e-6, 40, 2.02, "GUM")},
			{Name: "post_offset", Stage: sequencer.AsLeft, Value: postOff, Unit: "A", Valid: true, Unc: unc(0.55e-6, inf, 2, "GUM")},
			{Name: "post_gain_error", Stage: sequencer.AsLeft, Value: postGain, Unit: "ratio", Valid: true, Unc: unc(28e-6, 40, 2.02, "GUM")},
			{Name: "post_nonlinearity", Stage: sequencer.AsLeft, Value: fPost.Nonlinearity, Unit: "ratio", Valid: true, Unc: unc(1e-6, 9, 2.32, "GUM")},
			{Name: "post_noise", Stage: sequencer.AsLeft, Value: fPost.ResidualSD, Unit: "A", Valid: true, Unc: unc(0.05e-6, 9, 2.32, "GUM")},
			{Name: "offset_code", Stage: sequencer.Adjustment, Value: float64(2048 + 41*c), Unit: "code", Valid: true},
			{Name: "supply_current", Stage: sequencer.AsLeft, Value: 0.0214 + 0.0003*float64(c), Unit: "A", Valid: true, Unc: unc(2e-6, inf, 2, "GUM")},
		}
		for i := range res {
			res[i].Channel = ch
		}
		rec.Results = append(rec.Results, res...)
		tolA := func(name, result string, v, u, lo, hi float64) limits.Outcome {
			o := limits.Outcome{Name: name, Channel: ch, Unit: "uA", Uses: []string{result}, Values: map[string]float64{result: v * 1e6}}
			o.Decision = decide(result, v*1e6, ptr(lo), ptr(hi), "guarded", 1, false, u*1e6, 2, inf)
			o.Pass = o.Decision.Zone == limits.ZonePass
			return o
		}
		rec.Outcomes = append(rec.Outcomes,
			limits.Outcome{Name: "pre_offset_in_range", Channel: ch, Description: "Untrimmed offset within the trim range", Expr: "abs(pre_offset) <= 200",
				Unit: "uA", Uses: []string{"pre_offset"}, Values: map[string]float64{"pre_offset": (fPre.Intercept - loopOffset) * 1e6}, Pass: true},
			tolA("post_offset", "post_offset", postOff, 0.55e-6, -8, 8),
			limits.Outcome{Name: "post_gain", Channel: ch, Unit: "ppm", Uses: []string{"post_gain_error"}, Values: map[string]float64{"post_gain_error": postGain * 1e6},
				Decision: decide("post_gain_error", postGain*1e6, ptr(-500), ptr(500), "guarded", 1, false, 28, 2.02, 40), Pass: true},
			limits.Outcome{Name: "post_linearity", Channel: ch, Expr: "post_nonlinearity <= 50", Unit: "ppm", Uses: []string{"post_nonlinearity"},
				Values: map[string]float64{"post_nonlinearity": fPost.Nonlinearity * 1e6}, Pass: true},
			limits.Outcome{Name: "supply_current", Channel: ch, Description: "Loop supply current", Expr: "supply_current <= 25", Unit: "mA",
				Uses: []string{"supply_current"}, Values: map[string]float64{"supply_current": (0.0214 + 0.0003*float64(c)) * 1e3}, Pass: true},
		)
		// Firmware coefficients: gain in Q2.14 (hex), offset in int16 of 0.1 µA,
		// held in mA by the firmware.
		k := 1 / (1 + gErr)
		kq := math.Round(k*16384) / 16384
		m := -oErr * 1e3 // mA
		mq := math.Round(m/1e-4) * 1e-4
		offText := fmt.Sprint(int(math.Round(mq / 1e-4)))
		rb, rbv, match := offText, mq, true
		if c == 3 {
			rb, rbv, match = "0", 0, false
		}
		rec.Coefficients = append(rec.Coefficients,
			sequencer.CoefficientWrite{Step: "write coefficients", Name: "gain", Channel: ch, Adjusts: "gain", Format: "Q2.14 hex",
				Ideal: k, IdealU: 31e-6, Value: kq, Text: fmt.Sprintf("0x%04X", int(kq*16384)), Resolution: 1.0 / 16384, Written: true,
				Readback: fmt.Sprintf("0x%04X", int(kq*16384)), ReadbackValue: kq, Match: true},
			sequencer.CoefficientWrite{Step: "write coefficients", Name: "offset", Channel: ch, Adjusts: "offset", Format: "int16 decimal", Unit: "mA",
				Ideal: m, IdealU: 0.6e-3, Value: mq, Text: offText, Resolution: 1e-4, Written: true,
				Readback: rb, ReadbackValue: rbv, Match: match},
		)
		// Offset re-trim: channel 2 in four passes (nominal LSB, then measured
		// secants), the others in two.
		lsb := 0.39e-6
		if c == 2 {
			rec.Retrims = append(rec.Retrims,
				sequencer.RetrimPass{Step: "re-trim offset", DAC: "offset", Channel: ch, Pass: 1, Code: 2130, Error: 5.2e-6, ErrorU: 0.3e-6, Sensitivity: lsb, Next: 2117},
				sequencer.RetrimPass{Step: "re-trim offset", DAC: "offset", Channel: ch, Pass: 2, Code: 2117, Error: 1.1e-6, ErrorU: 0.3e-6, Sensitivity: 0.315e-6, Measured: true, Next: 2114},
				sequencer.RetrimPass{Step: "re-trim offset", DAC: "offset", Channel: ch, Pass: 3, Code: 2114, Error: 0.31e-6, ErrorU: 0.3e-6, Sensitivity: 0.263e-6, Measured: true, Next: 2113},
				sequencer.RetrimPass{Step: "re-trim offset", DAC: "offset", Channel: ch, Pass: 4, Code: 2113, Error: -0.04e-6, ErrorU: 0.3e-6, Sensitivity: 0.35e-6, Measured: true, Within: true, Next: 2113},
			)
			continue
		}
		code := 2048 + 41*c
		rec.Retrims = append(rec.Retrims,
			sequencer.RetrimPass{Step: "re-trim offset", DAC: "offset", Channel: ch, Pass: 1, Code: code, Error: -0.9e-6, ErrorU: 0.3e-6, Sensitivity: lsb, Next: code + 2},
			sequencer.RetrimPass{Step: "re-trim offset", DAC: "offset", Channel: ch, Pass: 2, Code: code + 2, Error: 0.05e-6, ErrorU: 0.3e-6, Sensitivity: 0.475e-6, Measured: true, Within: true, Next: code + 2},
		)
	}
	return rec
}

// The four-channel record's certificate: amperes wherever the response is
// printed, gains as mA/V, a band per stage and channel, the coefficients with a
// mismatch in words, the re-trim passes and how each ended.
func TestChannelCertificateText(t *testing.T) {
	text := pdfText(t, render(t, channelRecord(), opt))
	requireText(t, text,
		"output = 1.6 mA/V × input + 4 mA; full scale 16 mA",
		"End-of-line trim of offset and firmware coefficients on 4 channels, verified by a second sweep",
		"As left: after adjustment (verify sweep) — channel 3",
		"As found: before adjustment (pre-trim sweep) — channel 1",
		"Correction coefficients written",
		"0x4063", // channel 1: gain error −0.006, k = 1/0.994 = 1.0060362, ×16384 = 16482.9 → 16483 = 0x4063
		"differs from written",
		"this rounding (rectangular, resolution/√12) is counted in the uncertainty",
		"Re-trim passes",
		"Re-trim “re-trim offset” of the offset DAC — channel 2",
		"within the bound on pass 4 with code 2113",
		"k = 2.00 (normal distribution; the record's coverage probability)",
		"Before trim, as found · channel 4",
		"Sweep “verify” (as left) · channel 2",
		"error (µA)",
		"Applies to limits post_offset and post_gain on 4 channels.",
	)
	if strings.Contains(text, " V/V") {
		t.Error("a gain of a current output is printed in V/V")
	}
}

// countRecord is a one-channel unit that reports its output as counts of its
// own converter: 0 to 10 V in, 2048 + 300 counts/V out, 0.6 count noise.
func countRecord() *sequencer.Record {
	rng := rand.New(rand.NewPCG(3, 200))
	rec := passRecord()
	rec.StimulusUnit, rec.ResponseUnit = "V", "count"
	rec.IdealGain, rec.IdealOffset, rec.FullScale = 300, 2048, 3000
	pre := loopSweep("pre-trim", "", sequencer.AsFound, rng, t0, 301.2, 2051.4, 0.6, 8)
	post := loopSweep("verify", "", sequencer.AsLeft, rng, t0.Add(time.Minute), 300.02, 2048.1, 0.6, 8)
	rec.Sweeps = []sequencer.Sweep{pre, post}
	rec.Fits = []sequencer.FitSummary{fitSweep(pre), fitSweep(post)}
	rec.Fits[0].Nonlinearity, rec.Fits[1].Nonlinearity = 0.4/3000, 0.3/3000
	inf := math.Inf(1)
	rec.Results = []sequencer.Result{
		{Name: "post_offset", Stage: sequencer.AsLeft, Value: rec.Fits[1].Intercept - 2048, Unit: "count", Valid: true, Unc: unc(0.21, inf, 2, "GUM")},
		{Name: "post_noise", Stage: sequencer.AsLeft, Value: rec.Fits[1].ResidualSD, Unit: "count", Valid: true, Unc: unc(0.05, 9, 2.32, "GUM")},
	}
	v := rec.Results[0].Value
	rec.Outcomes = []limits.Outcome{{Name: "post_offset", Unit: "count", Uses: []string{"post_offset"}, Values: map[string]float64{"post_offset": v},
		Decision: decide("post_offset", v, ptr(-2), ptr(2), "guarded", 1, false, 0.21, 2, inf), Pass: true}}
	return rec
}

// A unit that reports counts: counts wherever the response is printed, the gain
// in count/V.
func TestCountCertificateText(t *testing.T) {
	text := pdfText(t, render(t, countRecord(), opt))
	requireText(t, text, "output = 300 count/V × input + 2048 counts; full scale 3000 counts",
		"−2 … 2 counts", "error (counts)", "count/V", "accept −1.58 … 1.58 counts",
		"Mean output, error and s are in counts")
	if strings.Contains(text, "V/V") {
		t.Error("a count output is printed in volts")
	}
}

// A unit driven by a current: its fits read "line at 0 A in", not 0 V, and
// its gain is per ampere (a loop receiver: 4–20 mA in, 250 V/A out).
func TestCurrentStimulusCertificateText(t *testing.T) {
	rec := countRecord()
	rec.StimulusUnit, rec.ResponseUnit = "A", "V"
	rec.IdealGain, rec.IdealOffset, rec.FullScale = 250, 0, 5
	for i := range rec.Results {
		rec.Results[i].Unit = "V"
	}
	rec.Outcomes[0].Unit = "V"
	text := pdfText(t, render(t, rec, opt))
	requireText(t, text, "Line at 0 A in", "250 V/A")
	if strings.Contains(text, "at 0 V in") {
		t.Error("the fits of a current-driven unit say 0 V in")
	}
}
