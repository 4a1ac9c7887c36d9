// Package limitstest holds result sets of the demo product (BRX-200) for the tests
// and benchmarks of limits and of the packages that judge with it, so that they
// share one fixture.
package limitstest

import (
	"math"
	"math/rand/v2"

	"trimline/limits"
)

// Unit makes one BRX-200 unit's results in SI units, spread as a production line
// would give them (the demo limit file's comments: U(post_offset) ≈ 150 µV at
// k = 2, trim DACs of 4096 codes), with about 1 in 200 units carrying an invalid
// result. The same r gives the same units.
func Unit(r *rand.Rand) map[string]limits.Value {
	inf := math.Inf(1)
	n := r.NormFloat64
	code := func(mid, sd float64) float64 { return math.Max(0, math.Min(4095, math.Round(mid+sd*n()))) }
	v := map[string]limits.Value{
		"pre_offset":        {V: 6e-3 * n(), Valid: true, U: 20e-6, K: 2, DOF: inf},
		"pre_gain_error":    {V: 6e-3 * n(), Valid: true, U: 50e-6, K: 2, DOF: inf},
		"pre_nonlinearity":  {V: math.Abs(5e-4 * n()), Valid: true},
		"offset_code":       {V: code(2048, 700), Valid: true},
		"gain_code":         {V: code(2048, 600), Valid: true},
		"post_offset":       {V: 250e-6 * n(), Valid: true, U: 150e-6, K: 2, DOF: inf},
		"post_gain_error":   {V: 20e-6 + 150e-6*n(), Valid: true, U: 40e-6, DOF: 12},
		"post_nonlinearity": {V: math.Abs(30e-6 * n()), Valid: true, U: 5e-6, DOF: 12},
		"post_max_error":    {V: 300e-6 + math.Abs(200e-6*n()), Valid: true, U: 60e-6, DOF: 12},
		"post_noise":        {V: 20e-6 + math.Abs(10e-6*n()), Valid: true, Std: 2e-6, DOF: 12},
	}
	if r.IntN(200) == 0 {
		names := []string{"post_offset", "post_gain_error", "post_noise", "offset_code"}
		k := names[r.IntN(len(names))]
		v[k] = limits.Value{V: math.NaN(), Why: "meter overload"}
	}
	return v
}

// Passing is one BRX-200 unit that passes the demo limit file
// (sequences/brx200-limits.yaml), every result with an uncertainty: half at k = 2,
// half with ν = 12 (Student's t for the coverage factor, the re-expansion and the
// probability).
func Passing() map[string]limits.Value {
	inf := math.Inf(1)
	return map[string]limits.Value{
		"pre_offset":        {V: 3.1e-3, Valid: true, U: 20e-6, K: 2, DOF: inf},
		"pre_gain_error":    {V: 0.013, Valid: true, U: 50e-6, K: 2, DOF: inf},
		"pre_nonlinearity":  {V: 0.001, Valid: true},
		"offset_code":       {V: 512, Valid: true},
		"gain_code":         {V: 2048, Valid: true},
		"post_offset":       {V: 1.23e-5, Valid: true, U: 8e-6, K: 2, DOF: inf},
		"post_gain_error":   {V: 12e-6, Valid: true, U: 6e-6, DOF: 12},
		"post_nonlinearity": {V: 5e-5, Valid: true, U: 5e-6, DOF: 12},
		"post_max_error":    {V: 1.2e-4, Valid: true, U: 30e-6, DOF: 12},
		"post_noise":        {V: 8e-6, Valid: true, Std: 1e-6, DOF: 12},
	}
}
