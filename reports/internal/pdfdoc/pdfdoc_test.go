package pdfdoc_test

import (
	"bytes"
	"testing"
	"time"

	"trimline/reports/internal/pdfdoc"
)

func TestNiceStep(t *testing.T) {
	// Hand-worked: span/n rounded to 1, 2, 2.5, 5 × 10^k.
	for _, c := range []struct {
		span float64
		n    int
		want float64
	}{{10, 5, 2}, {1, 4, 0.25}, {7, 1, 5}, {0.03, 3, 0.01}, {0, 5, 1}} {
		if got := pdfdoc.NiceStep(c.span, c.n); got != c.want {
			t.Errorf("NiceStep(%g, %d) = %g, want %g", c.span, c.n, got, c.want)
		}
	}
}

func TestNewAxis(t *testing.T) {
	a := pdfdoc.NewAxis(-10.4, 10.4, 5) // hand-worked: step 5, ticks −10 … 10
	if a.Step != 5 || len(a.Ticks) != 5 || a.Ticks[0] != -10 || a.Ticks[4] != 10 || a.Dec != 0 {
		t.Errorf("%+v", a)
	}
	if b := pdfdoc.NewAxis(3, 3, 5); !(b.Lo < 3 && b.Hi > 3) {
		t.Errorf("degenerate span not widened: %+v", b)
	}
}

func TestNewIsReproducible(t *testing.T) {
	render := func() []byte {
		pdf := pdfdoc.New(time.Date(2026, 1, 2, 3, 4, 5, 0, time.UTC), 10, 10, 10)
		pdf.AddPage()
		pdf.SetFont(pdfdoc.Sans, "", 10)
		pdf.Text(20, 20, "µ ± ° Ω")
		var b bytes.Buffer
		if err := pdf.Output(&b); err != nil {
			t.Fatal(err)
		}
		return b.Bytes()
	}
	if !bytes.Equal(render(), render()) {
		t.Error("two identical documents differ")
	}
}
