package sequencer_test

import (
	"context"
	"fmt"
	"testing"
)

// BenchmarkUnitEndToEnd runs one unit through the whole sequence (2 sweeps × 11
// points × 8 readings, fits, trim, read-back, store, 8 limits) on the zero-latency
// simulated bench.
func BenchmarkUnitEndToEnd(b *testing.B) {
	e := setup(b, "sim", nil, "")
	ctx := context.Background()
	b.ReportAllocs()
	i := 0
	for b.Loop() {
		e.Run(ctx, fmt.Sprintf("B-%07d", i))
		i++
	}
}
