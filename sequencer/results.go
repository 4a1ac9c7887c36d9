package sequencer

import (
	"trimline/instruments/units"
	"trimline/limits"
)

// Result names the engine computes for every unit. Limit files may judge these and
// only these. Voltages are in volts, ratios are plain fractions (a limit written in
// ppm or % sees them scaled), codes are counts.
const (
	ResPreOffset        = "pre_offset"        // output error at zero input before trim, V
	ResPreGainError     = "pre_gain_error"    // slope/ideal − 1 before trim, fraction
	ResPreNonlinearity  = "pre_nonlinearity"  // max |residual| / full scale before trim, fraction
	ResOffsetCode       = "offset_code"       // offset trim code written
	ResGainCode         = "gain_code"         // gain trim code written
	ResPostOffset       = "post_offset"       // output error at zero input after trim, V
	ResPostGainError    = "post_gain_error"   // slope/ideal − 1 after trim, fraction
	ResPostNonlinearity = "post_nonlinearity" // max |residual| / full scale after trim, fraction
	ResPostMaxError     = "post_max_error"    // max |mean − ideal| over the verification points, V
	ResPostNoise        = "post_noise"        // pooled standard deviation of the verification readings, V rms
)

// ResultCatalog is every result name with its dimension, for limits.Load.
var ResultCatalog = limits.Catalog{
	ResPreOffset: units.Volt, ResPreGainError: units.Ratio, ResPreNonlinearity: units.Ratio,
	ResOffsetCode: units.Count, ResGainCode: units.Count,
	ResPostOffset: units.Volt, ResPostGainError: units.Ratio, ResPostNonlinearity: units.Ratio,
	ResPostMaxError: units.Volt, ResPostNoise: units.Volt,
}

// resultOrder is the order results appear in the record.
var resultOrder = []string{ResPreOffset, ResPreGainError, ResPreNonlinearity, ResOffsetCode, ResGainCode,
	ResPostOffset, ResPostGainError, ResPostNonlinearity, ResPostMaxError, ResPostNoise}

func unitName(d units.Dim) string {
	switch d {
	case units.Volt:
		return "V"
	case units.Count:
		return "code"
	}
	return "ratio"
}
