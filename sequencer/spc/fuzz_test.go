package spc_test

import (
	"encoding/binary"
	"math"
	"testing"

	"trimline/sequencer/spc"
)

// floats reads the bytes as little-endian float64s (a trailing partial
// value is dropped).
func floats(b []byte) []float64 {
	xs := make([]float64, 0, len(b)/8)
	for ; len(b) >= 8; b = b[8:] {
		xs = append(xs, math.Float64frombits(binary.LittleEndian.Uint64(b)))
	}
	return xs
}

func bytesOf(xs ...float64) []byte {
	b := make([]byte, 0, 8*len(xs))
	for _, x := range xs {
		b = binary.LittleEndian.AppendUint64(b, math.Float64bits(x))
	}
	return b
}

// FuzzBin checks that Bin counts every value that is not NaN exactly once,
// whatever the range and number of bins.
func FuzzBin(f *testing.F) {
	f.Add(bytesOf(-5, 0, 2.5, 10, 11, math.NaN()), 0.0, 10.0, 4)
	f.Add(bytesOf(1, math.Inf(1), math.Inf(-1)), 5.0, 5.0, 3)
	f.Add(bytesOf(1e308, -1e308), -1e308, 1e308, 7)
	f.Fuzz(func(t *testing.T, data []byte, lo, hi float64, n int) {
		if n > 1000 {
			n = 1000
		}
		xs := floats(data)
		h := spc.Bin(xs, lo, hi, n)
		want := 0
		for _, x := range xs {
			if !math.IsNaN(x) {
				want++
			}
		}
		got := h.Under + h.Over
		for _, c := range h.Counts {
			got += c
		}
		if got != want {
			t.Fatalf("Bin(%v, %v, %v, %d) counts %d values, want %d: %+v", xs, lo, hi, n, got, want, h)
		}
	})
}

// FuzzCharts checks that the charts never panic and that every signal
// names a point of its chart.
func FuzzCharts(f *testing.F) {
	f.Add(bytesOf(49.6, 47.6, 49.9, 51.3, 47.8, 51.2, 52.6, 52.4, 53.6, 52.1), 0.2)
	f.Add(bytesOf(1, 1), 1.0)
	f.Fuzz(func(t *testing.T, data []byte, lambda float64) {
		xs := floats(data)
		check := func(c spc.Chart, n int) {
			t.Helper()
			for _, s := range c.Signals {
				if s.Index < 1 || s.Index > n {
					t.Fatalf("%s signal %+v outside 1…%d", c.Kind, s, n)
				}
			}
		}
		if ind, mr, err := spc.IMR(xs); err == nil {
			check(ind, len(xs))
			check(mr, len(xs))
			if len(mr.Points) != len(xs)-1 {
				t.Fatalf("%d moving ranges of %d values", len(mr.Points), len(xs))
			}
		}
		if c, err := spc.EWMA(xs, spc.EWMAOptions{Lambda: lambda}); err == nil {
			check(c, len(xs))
		}
		if c, err := spc.CUSUM(xs, 0, 0.5, 4); err == nil {
			check(c, len(xs))
		}
		l, u := -1.0, 1.0
		_, _ = spc.Capable(xs, &l, &u, 0)
	})
}
