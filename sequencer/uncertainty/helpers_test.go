package uncertainty_test

import (
	"math"
	"os"
	"path/filepath"
	"testing"

	"trimline/sequencer/fit"
)

// readTable reads an x/y table from the module's testdata directory.
func readTable(t *testing.T, name string) (x, y []float64) {
	t.Helper()
	path := filepath.Join("..", "..", "testdata", name)
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	x, y, _, err = fit.ReadXY(path, f)
	if err != nil {
		t.Fatal(err)
	}
	return x, y
}

func relErr(got, want float64) float64 {
	if want == 0 {
		return math.Abs(got)
	}
	return math.Abs(got-want) / math.Abs(want)
}

// checkRel fails unless got agrees with want to relative error tol.
func checkRel(t *testing.T, what string, got, want, tol float64) {
	t.Helper()
	if e := relErr(got, want); !(e <= tol) {
		t.Errorf("%s = %.15g, want %.15g (relative error %.2g > %.2g)", what, got, want, e, tol)
	}
}

// checkAbs fails unless |got − want| ≤ tol.
func checkAbs(t *testing.T, what string, got, want, tol float64) {
	t.Helper()
	if !(math.Abs(got-want) <= tol) {
		t.Errorf("%s = %.15g, want %.15g ± %.2g", what, got, want, tol)
	}
}

// checkPublished fails unless got, rounded to decimals places, equals the
// published value pub (given with exactly that many decimals).
func checkPublished(t *testing.T, what string, got, pub float64, decimals int) {
	t.Helper()
	s := math.Pow(10, float64(decimals))
	if math.Round(got*s) != math.Round(pub*s) {
		t.Errorf("%s = %.*f (from %.9g), published %.*f", what, decimals, got, got, decimals, pub)
	}
}
