package fit_test

import (
	"errors"
	"math"
	"strings"
	"testing"

	"trimline/sequencer/fit"
)

// Finite data whose fit overflows (values near the largest float64, 1.8e308)
// is refused with ErrNotFinite rather than returned as NaN or ±Inf
// coefficients. Source: the ErrNotFinite contract in the doc of fit.Poly.
func TestNotFiniteResultRefused(t *testing.T) {
	big := 1e308
	for _, tc := range []struct {
		name    string
		x, y, u []float64
		order   int
	}{
		{"line through ±1e308", []float64{big, -big, 0}, []float64{big, -big, big / 2}, nil, 1},
		{"alternating 1e308", []float64{1, 2, 3, 4}, []float64{big, -big, big, -big}, nil, 1},
		{"quadratic of 1e308", []float64{1, 2, 3, 4, 5}, []float64{big, -big, big, -big, big}, nil, 2},
		{"weighted alternating 1e308", []float64{1, 2, 3, 4}, []float64{big, -big, big, -big}, []float64{1, 1, 1, 1}, 1},
	} {
		var r fit.Result
		var err error
		if tc.u == nil {
			r, err = fit.Poly(tc.x, tc.y, tc.order, 0)
		} else {
			r, err = fit.Weighted(tc.x, tc.y, tc.u, tc.order, 0, true)
		}
		switch {
		case err == nil:
			t.Errorf("%s: accepted, coefficients %v, u %v, residual SD %v", tc.name, r.Coef, r.StdUnc, r.ResidualSD)
		case !errors.Is(err, fit.ErrNotFinite):
			t.Errorf("%s: error %v, want ErrNotFinite", tc.name, err)
		default:
			t.Logf("%s: %v", tc.name, err)
		}
	}
}

// Prediction refuses an x or a result that is not a finite number.
func TestPredictionNotFinite(t *testing.T) {
	r, err := fit.Poly([]float64{1, 2, 3}, []float64{1, 2.1, 2.9}, 1, 0)
	if err != nil {
		t.Fatal(err)
	}
	if y, u, err := r.Prediction(2); err != nil || math.Abs(y-2) > 1e-12 || !(u > 0) {
		// hand-worked: the line passes through the mean point (2, 2)
		t.Errorf("Prediction(2) = %v, %v, %v", y, u, err)
	}
	if _, _, err := r.Prediction(1e300); !errors.Is(err, fit.ErrNotFinite) {
		t.Errorf("Prediction(1e300): %v, want ErrNotFinite", err)
	}
	if _, _, err := r.Prediction(math.NaN()); !errors.Is(err, fit.ErrInvalidInput) {
		t.Errorf("Prediction(NaN): %v, want ErrInvalidInput", err)
	}
}

// ReadXY refuses more than MaxRows data rows and more than MaxBytes of input,
// at the line where the bound is crossed, and never reads past MaxBytes+1 bytes
// of an endless input. Before, any number of rows was read into memory.
func TestReadXYBounded(t *testing.T) {
	rows := strings.Repeat("1,2\n", fit.MaxRows+1)
	_, _, _, err := fit.ReadXY("rows.csv", strings.NewReader(rows))
	var ie *fit.InputError
	if !errors.As(err, &ie) || ie.Line != fit.MaxRows+1 || !strings.Contains(ie.Msg, "at most 100000 data rows") {
		t.Errorf("%d rows: %v", fit.MaxRows+1, err)
	}
	if x, _, _, err := fit.ReadXY("rows.csv", strings.NewReader(rows[4:])); err != nil || len(x) != fit.MaxRows {
		t.Errorf("%d rows: %d read, %v", fit.MaxRows, len(x), err)
	}
	r := &countingReader{src: "# an endless comment\n"}
	_, _, _, err = fit.ReadXY("endless.csv", r)
	if !errors.As(err, &ie) || !strings.Contains(ie.Msg, "at most 16 MiB") || ie.Line == 0 {
		t.Errorf("endless input: %v", err)
	}
	if r.n > fit.MaxBytes+1 {
		t.Errorf("read %d bytes of an endless input, want at most %d", r.n, fit.MaxBytes+1)
	}
}

// countingReader repeats src without end and counts the bytes read.
type countingReader struct {
	src string
	n   int
}

func (c *countingReader) Read(p []byte) (int, error) {
	for i := range p {
		p[i] = c.src[(c.n+i)%len(c.src)]
	}
	c.n += len(p)
	return len(p), nil
}
