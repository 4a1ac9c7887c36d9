package sequencer

// The first sequence layout: one fixed flow (identify, clear the trim DACs,
// pre_trim sweep, fit, trim, store, verify sweep, fit) written as a parameter
// sheet. Records made with it carry its bytes; it is read as the step list it
// stands for, so those records still replay, and so are files not yet rewritten.

import (
	"trimline/instruments/files"
	"trimline/instruments/units"
)

// Names of the steps the first layout stands for. The sweeps keep the names the
// records of schema 1 gave them.
const (
	firstIdentify = "identify"
	firstClear    = "clear trim"
	firstPreFit   = "pre-trim fit"
	firstTrim     = "trim"
	firstStore    = "store"
	firstPostFit  = "verify fit"
)

// firstLayout builds the step list of a first-layout file; it returns each
// step's YAML path, where its problems are reported.
func firstLayout(doc *files.Doc, s *Sequence, f *sequenceFile, errs *files.List) []string {
	bad := func(path, format string, args ...any) { *errs = append(*errs, doc.Errorf(path, format, args...)) }
	var paths []string
	add := func(path, name, kind string, st Step) {
		s.Steps = append(s.Steps, &StepDecl{Name: name, Kind: kind, Step: st, Where: whereIn(doc, path)})
		paths = append(paths, path)
	}
	trim := f.Trim
	if trim == nil {
		bad("$.trim", "missing required key \"trim\" (gain, offset, gain_pivot, store)")
		trim = &firstTrimDecl{}
	}
	for _, d := range []struct {
		key, adjusts string
		decl         *dacDecl
	}{{"gain", AdjustGain, trim.Gain}, {"offset", AdjustOffset, trim.Offset}} {
		path := "$.trim." + d.key
		if d.decl == nil {
			bad("$.trim", "missing required key %q", d.key)
			continue
		}
		d.decl.Name = d.key
		s.DACs = append(s.DACs, dacFrom(doc, path, d.decl, d.adjusts, units.Volt, units.Volt, errs))
	}
	if dut := f.DUT; dut != nil && (dut.SerialQuery != "" || dut.FirmwareQuery != "") {
		add("$.dut", firstIdentify, "identify", &identifyStep{SerialQuery: dut.SerialQuery, FirmwareQuery: dut.FirmwareQuery})
	}
	add("$.trim", firstClear, "clear_trim", &clearTrimStep{})
	for _, sw := range []struct {
		key, name string
		step      *sweepStep
	}{{"pre_trim", SweepPreTrim, f.PreTrim}, {"verify", SweepVerify, f.Verify}} {
		if sw.step == nil {
			bad("$."+sw.key, "missing required key %q (from, to, points, settle, readings)", sw.key)
			sw.step = &sweepStep{Settle: new(units.Duration)}
		}
		sw.step.legacyKey = sw.key
		if sw.key == "pre_trim" {
			add("$.pre_trim", sw.name, "sweep", sw.step)
			add("$.pre_trim", firstPreFit, "fit", &fitStep{Sweep: SweepPreTrim, Order: 1,
				Results: map[string]string{"offset": ResPreOffset, "gain_error": ResPreGainError, "nonlinearity": ResPreNonlinearity},
				order:   []string{"offset", "gain_error", "nonlinearity"}})
			var pivot *units.Quantity
			if trim.GainPivot != nil {
				pivot = &units.Quantity{Value: float64(*trim.GainPivot), Dim: units.Volt}
			}
			add("$.trim", firstTrim, "trim", &trimStep{Fit: firstPreFit, Pivot: pivot,
				Results: map[string]string{"offset": ResOffsetCode, "gain": ResGainCode}, order: []string{"offset", "gain"}})
			if trim.Store != "" {
				add("$.trim.store", firstStore, "store", &storeStep{Command: trim.Store})
			}
			continue
		}
		add("$.verify", sw.name, "sweep", sw.step)
		add("$.verify", firstPostFit, "fit", &fitStep{Sweep: SweepVerify, Order: 1,
			Results: map[string]string{"offset": ResPostOffset, "gain_error": ResPostGainError, "nonlinearity": ResPostNonlinearity,
				"max_error": ResPostMaxError, "noise": ResPostNoise},
			order: []string{"offset", "gain_error", "nonlinearity", "max_error", "noise"}})
	}
	return paths
}
