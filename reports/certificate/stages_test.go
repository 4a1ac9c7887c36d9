package certificate_test

import (
	"math/rand/v2"
	"strings"
	"testing"
	"time"

	"trimline/sequencer"
)

// stagedRecord is a record of schema 2 from a product other than the demo's: one
// sweep as found and two as left, none named pre-trim or verify, one trim DAC
// named "coarse", and a run that stopped before its last step.
func stagedRecord() *sequencer.Record {
	r := sampleRecord()
	rng := rand.New(rand.NewPCG(3, 5))
	found := sweep("incoming", rng, t0.Add(3*time.Second), idealGain*1.0081, idealOffset+3.214e-3, 0.42e-3, 2.1e-6, 8)
	found.Stage = sequencer.AsFound
	warm := sweep("warm check", rng, t0.Add(26*time.Second), idealGain*(1+17.9e-6), idealOffset-4.2e-6, 18e-6, 1.8e-6, 8)
	warm.Stage = sequencer.AsLeft
	final := sweep("final", rng, t0.Add(40*time.Second), idealGain*(1+12e-6), idealOffset-3e-6, 15e-6, 1.8e-6, 8)
	final.Stage = sequencer.AsLeft
	// Record order puts an as-left sweep first: the certificate groups by stage.
	r.Sweeps = []sequencer.Sweep{warm, found, final}
	fw, ff, fl := fitSweep(warm), fitSweep(found), fitSweep(final)
	fw.Step, ff.Step, fl.Step = "warm fit", "incoming fit", "final fit"
	fq := fitSweep(final) // a second fit of the same sweep, a quadratic
	fq.Step, fq.Order = "final curve", 2
	r.Fits = []sequencer.FitSummary{fw, ff, fl, fq}
	r.Trims = []sequencer.TrimCode{{DAC: "coarse", Before: 128, Ideal: 97.25, Code: 97, Readback: 97, Written: true, Stored: true}}
	r.Steps = []sequencer.StepRun{
		{Name: "identify", Kind: "identify", Status: sequencer.StepDone},
		{Name: "incoming", Kind: "sweep", Stage: sequencer.AsFound, Status: sequencer.StepDone},
		{Name: "incoming fit", Kind: "fit", Stage: sequencer.AsFound, Status: sequencer.StepDone},
		{Name: "trim", Kind: "trim", Stage: sequencer.Adjustment, Status: sequencer.StepDone},
		{Name: "warm check", Kind: "sweep", Stage: sequencer.AsLeft, Status: sequencer.StepDone},
		{Name: "warm fit", Kind: "fit", Stage: sequencer.AsLeft, Status: sequencer.StepDone},
		{Name: "bake", Kind: "dut", Status: sequencer.StepSkipped, Note: "skip_if: pre_offset < 1 mV"},
		{Name: "final", Kind: "sweep", Stage: sequencer.AsLeft, Status: sequencer.StepNotReached, Note: "not measured: trim saturated"},
	}
	return r
}

func TestStagedRecordGroupsSweepsByStage(t *testing.T) {
	text := pdfText(t, render(t, stagedRecord(), opt))
	requireText(t, text,
		"End-of-line trim by the coarse DAC, verified by 2 further sweeps",
		"As found: before adjustment (incoming sweep)",
		"As left: after adjustment (warm check and final sweeps)",
		"Before trim, as found", "sweep “incoming”, 11 valid points",
		"After trim, as left", "sweep “warm check”, 11 valid points", "sweep “final”, 11 valid points",
		"before trim (sweep “incoming”)", "after trim (sweep “warm check”)", "after trim (sweep “final”)",
		"Sweep “incoming” (as found)", "Sweep “warm check” (as left)", "Sweep “final” (as left)",
		"coarse", "97.250",
		"Fits of the sweeps", "as left · final fit", "as left · final curve · quadratic",
		"Steps of the sequence: not every step was done",
		"bake", "skipped", "skip_if: pre_offset < 1 mV",
		"not reached", "the run ended earlier: trim saturated",
	)
	ft := flat(text)
	for _, bad := range []string{"pre-trim", "“verify”", "no data", "trim of gain and offset", "second sweep"} {
		if strings.Contains(ft, bad) {
			t.Errorf("text holds %q", bad)
		}
	}
	// As found before as left, whatever the record's order: the plots, the
	// fits and the point tables.
	for _, names := range [][2]string{
		{"before trim (sweep “incoming”)", "after trim (sweep “warm check”)"},
		{"Sweep “incoming” (as found)", "Sweep “warm check” (as left)"},
		{"Sweep “warm check” (as left)", "Sweep “final” (as left)"},
	} {
		if i, j := strings.Index(ft, names[0]), strings.Index(ft, names[1]); i < 0 || j < i {
			t.Errorf("%q is not before %q", names[0], names[1])
		}
	}
}

// A run that did every step says nothing of its steps.
func TestStepsHiddenWhenAllDone(t *testing.T) {
	r := stagedRecord()
	r.Steps = r.Steps[:6]
	text := pdfText(t, render(t, r, opt))
	if strings.Contains(flat(text), "Steps of the sequence") {
		t.Error("a run that did every step lists its steps")
	}
}

// A record of schema 1 has no stages: its sweeps are grouped by the first
// layout's names, as before.
func TestSchema1RecordGroupsByName(t *testing.T) {
	r := sampleRecord()
	r.Schema = 1
	for _, sw := range r.Sweeps {
		if sw.Stage != 0 {
			t.Fatalf("fixture: sweep %q has stage %v", sw.Name, sw.Stage)
		}
	}
	text := pdfText(t, render(t, r, opt))
	requireText(t, text,
		"As found: before adjustment (pre-trim sweep)", "As left: after adjustment (verify sweep)",
		"Before trim, as found", "After trim, as left",
		"before trim (sweep “pre-trim”)", "after trim (sweep “verify”)",
		"Sweep “pre-trim” (as found)", "Sweep “verify” (as left)",
	)
	if strings.Contains(flat(text), "Steps of the sequence") {
		t.Error("a record of schema 1 lists steps")
	}
}
