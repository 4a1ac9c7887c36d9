package spc

import (
	"errors"
	"math"
	"strings"
	"testing"

	"trimline/sequencer/fit"
)

// ReadColumn never panics, and what it refuses it refuses as an InputError
// with a position (or a reading error, which a string reader never gives).
func FuzzReadColumn(f *testing.F) {
	f.Add("serial,v\nA,1\nB,2\n", "")
	f.Add("a;b\n1;2\n3\n", "b")
	f.Add("1\n2\n", "x")
	f.Add("\uFEFF# c\nv\n\"1\n", "")
	f.Add("a,b\n,\n", "")
	f.Fuzz(func(t *testing.T, text, column string) {
		xs, _, err := ReadColumn("f.csv", strings.NewReader(text), column)
		var ie *fit.InputError
		switch {
		case err != nil && !errors.As(err, &ie):
			t.Fatalf("error of type %T: %v", err, err)
		case err == nil && len(xs) == 0:
			t.Fatal("no error and no values")
		}
		for _, v := range xs {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				t.Fatalf("non-finite value %g", v)
			}
		}
	})
}
