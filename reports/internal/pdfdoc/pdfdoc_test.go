package pdfdoc_test

import (
	"bytes"
	"math"
	"strings"
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

func TestLabelAndMinus(t *testing.T) {
	// Hand-worked: the print minus U+2212 for negative values, none for a value
	// that rounds to zero.
	a := pdfdoc.Axis{Dec: 1}
	for _, c := range []struct {
		v    float64
		want string
	}{{-2.5, "−2.5"}, {2.5, "2.5"}, {-0.01, "0.0"}, {0, "0.0"}} {
		if got := a.Label(c.v); got != c.want {
			t.Errorf("Label(%g) = %q, want %q", c.v, got, c.want)
		}
	}
	if got := pdfdoc.Minus("-12"); got != "−12" {
		t.Errorf("Minus(-12) = %q", got)
	}
}

func TestPaddedAxis(t *testing.T) {
	// Hand-worked: [0, 10] padded by 10 % is NewAxis(−1, 11), in either order.
	for _, a := range []pdfdoc.Axis{pdfdoc.PaddedAxis(0, 10, 0.1, 5), pdfdoc.PaddedAxis(10, 0, 0.1, 5)} {
		if want := pdfdoc.NewAxis(-1, 11, 5); a.Lo != want.Lo || a.Hi != want.Hi || a.Step != want.Step {
			t.Errorf("PaddedAxis = %+v, want %+v", a, want)
		}
	}
}

func newDoc() *pdfdoc.Doc {
	pdf := pdfdoc.New(time.Unix(0, 0), 15, 15, 15)
	d := &pdfdoc.Doc{PDF: pdf, Left: 15, Width: 180}
	d.Need = func(h float64) bool {
		if d.Y+h <= 280 {
			return false
		}
		pdf.AddPage()
		d.Y = 15
		return true
	}
	pdf.AddPage()
	d.Y = 15
	return d
}

func TestFitAndWrap(t *testing.T) {
	d := newDoc()
	d.Use(pdfdoc.Body)
	long := strings.Repeat("wide ", 40)
	if got := d.Fit(long, 30); !strings.HasSuffix(got, "…") || d.PDF.GetStringWidth(got) > 30 {
		t.Errorf("Fit = %q (%.1f mm)", got, d.PDF.GetStringWidth(got))
	}
	if got := d.Fit("short", 30); got != "short" {
		t.Errorf("Fit(short) = %q", got)
	}
	hash := strings.Repeat("0123456789abcdef", 8)
	lines := d.Wrap("sha "+hash+"\nnext", 40, pdfdoc.Body)
	if len(lines) < 4 || lines[0] != "sha" || lines[len(lines)-1] != "next" || strings.Join(lines[1:len(lines)-1], "") != hash {
		t.Errorf("Wrap = %q", lines)
	}
	for _, l := range lines {
		if w := d.TextWidth(l, pdfdoc.Body); w > 40 {
			t.Errorf("line %q is %.1f mm wide, want ≤ 40", l, w)
		}
	}
}

// A table longer than a page asks Need before each row, goes on on the next
// page and ends with Y below its last row; its height on one page is what
// TableHeight says.
func TestTableBreaksAcrossPages(t *testing.T) {
	d := newDoc()
	cols := []pdfdoc.Column{{Title: "A", W: 90, Align: "L"}, {Title: "B", W: 90, Align: "R"}}
	var rows []pdfdoc.Row
	for range 80 {
		rows = append(rows, pdfdoc.Row{{{Text: "a", St: pdfdoc.Body}}, {{Text: "b", St: pdfdoc.Body}}})
	}
	bands := []pdfdoc.Band{{At: 0, Title: "first"}, {At: 40, Title: "second"}}
	h := d.TableHeight(cols, rows[:10], nil)
	y0 := d.Y
	d.Table(cols, rows[:10], nil)
	if got := d.Y - y0; math.Abs(got-h) > 1e-9 {
		t.Errorf("10 rows took %.3f mm, TableHeight says %.3f", got, h)
	}
	d.Table(cols, rows, bands)
	if n := d.PDF.PageCount(); n < 2 {
		t.Errorf("%d pages, want the table to break", n)
	}
	if d.Y > 280 || d.PDF.Err() {
		t.Errorf("Y = %.1f, err %v", d.Y, d.PDF.Error())
	}
}
