package fit_test

import (
	"errors"
	"io"
	"math"
	"reflect"
	"strings"
	"testing"
	"testing/iotest"

	"trimline/sequencer/fit"
)

func TestReadXYFormats(t *testing.T) {
	x2 := []float64{1, 2.5, -3}
	y2 := []float64{10, 20, 3e-3}
	// source for every row: the format contract in the doc comment of fit.ReadXY.
	for _, tc := range []struct {
		name, in string
		u        []float64
	}{
		{"comma, header", "x,y\n1,10\n2.5,20\n-3,3e-3\n", nil},
		{"comma, no header", "1,10\n2.5,20\n-3,3e-3\n", nil},
		{"comma with blanks", "x , y\n 1 , 10\n2.5,\t20 \n-3 ,3e-3\n", nil},
		{"semicolon", "x;y\n1;10\n2.5;20\n-3;3e-3\n", nil},
		{"tab", "x\ty\n1\t10\n2.5\t20\n-3\t3e-3\n", nil},
		{"aligned tabs", "1\t\t10\n2.5\t\t20\n-3\t\t3e-3\n", nil},
		{"spaces", "  x     y\n  1    10\n2.5    20\n -3  3e-3", nil},
		{"mixed blanks", "1 \t 10\n2.5\t20\n-3  3e-3\n", nil},
		{"CRLF, BOM, comments, blank lines", "\uFEFF# calibration run 7\r\n\r\nx,y\r\n1,10\r\n   \r\n# mid comment\r\n2.5,20\r\n  # indented comment\r\n-3,3e-3\r\n", nil},
		{"comment before header", "# t/°C, b/°C\nreading,correction\n1,10\n2.5,20\n-3,3e-3\n", nil},
		{"three columns", "x,y,u\n1,10,0.1\n2.5,20,0.2\n-3,3e-3,1e-4\n", []float64{0.1, 0.2, 1e-4}},
		{"three columns spaces", "1 10 0.1\n2.5 20 0.2\n-3 3e-3 1e-4\n", []float64{0.1, 0.2, 1e-4}},
		{"header with spaces in names", "reading (degC)\tcorrection (degC)\n1\t10\n2.5\t20\n-3\t3e-3\n", nil},
	} {
		x, y, u, err := fit.ReadXY("t.csv", strings.NewReader(tc.in))
		if err != nil {
			t.Errorf("%s: %v", tc.name, err)
			continue
		}
		if !reflect.DeepEqual(x, x2) || !reflect.DeepEqual(y, y2) || !reflect.DeepEqual(u, tc.u) {
			t.Errorf("%s: got x=%v y=%v u=%v, want x=%v y=%v u=%v", tc.name, x, y, u, x2, y2, tc.u)
		}
	}
}

func TestReadXYErrors(t *testing.T) {
	// source for every row: the error contract in the doc comment of
	// fit.ReadXY (name:LINE:COL, COL = 1-based byte column of the field).
	for _, tc := range []struct {
		name, in, want string
		line, col      int
	}{
		{"bad number", "x,y\n1,2\n3,abc\n", `data.csv:3:3: expected a number, found "abc"`, 3, 3},
		{"bad number after blanks", "x, y\n1,  2\n3,  4x\n", `data.csv:3:5: expected a number, found "4x"`, 3, 5},
		{"bad first field of first line", "1.0,2.O\n", `data.csv:1:5: expected a number, found "2.O"`, 1, 5},
		{"header-like data line", "x,y\n1,2\nx,y\n", `data.csv:3:1: expected a number, found "x"`, 3, 1},
		{"decimal comma in semicolon file", "x;y\n1;2\n1,5;2\n", `data.csv:3:1: expected a number, found "1,5"`, 3, 1},
		{"empty field", "1,2\n3,,4\n", `data.csv:2:3: expected a number, found ""`, 2, 3},
		{"spaces bad field", "1 2\n3   z\n", `data.csv:2:5: expected a number, found "z"`, 2, 5},
		{"NaN", "1,2\n3,NaN\n", `data.csv:2:3: expected a finite number, found "NaN"`, 2, 3},
		{"Inf", "1,2\n-Inf,3\n", `data.csv:2:1: expected a finite number, found "-Inf"`, 2, 1},
		{"out of range", "1,2\n3,1e999\n", `data.csv:2:3: number out of range, found "1e999"`, 2, 3},
		{"zero u", "1,2,0.1\n3,4,0\n", `data.csv:2:5: standard uncertainty must be positive, found "0"`, 2, 5},
		{"negative u", "1,2,-0.1\n", `data.csv:1:5: standard uncertainty must be positive, found "-0.1"`, 1, 5},
		{"ragged, too many", "x,y\n1,2\n3,4\n5,6,7\n", `data.csv:4:5: expected 2 columns as on line 2, found 3`, 4, 5},
		{"ragged, too few", "1 2 0.5\n3 4\n", `data.csv:2:4: expected 3 columns as on line 1, found 2`, 2, 4},
		{"one column", "x\n1\n", `data.csv:2:2: expected 2 or 3 columns (x, y[, u]), found 1`, 2, 2},
		{"four columns", "1,2,3,4\n", `data.csv:1:7: expected 2 or 3 columns (x, y[, u]), found 4`, 1, 7},
		{"header only", "x,y\n", `data.csv: no data rows`, 0, 0},
		{"empty", "", `data.csv: no data rows`, 0, 0},
		{"comments only", "# nothing\n\n", `data.csv: no data rows`, 0, 0},
		{"long field is shortened", "1," + strings.Repeat("z", 100) + "\n", `data.csv:1:3: expected a number, found "` + strings.Repeat("z", 40) + `"...`, 1, 3},
	} {
		_, _, _, err := fit.ReadXY("data.csv", strings.NewReader(tc.in))
		var ie *fit.InputError
		if !errors.As(err, &ie) {
			t.Errorf("%s: error %v (%T), want *fit.InputError", tc.name, err, err)
			continue
		}
		if err.Error() != tc.want {
			t.Errorf("%s: error\n\t%s\nwant\n\t%s", tc.name, err, tc.want)
		}
		if ie.File != "data.csv" || ie.Line != tc.line || ie.Col != tc.col {
			t.Errorf("%s: File %q Line %d Col %d, want data.csv %d %d", tc.name, ie.File, ie.Line, ie.Col, tc.line, tc.col)
		}
	}
}

func TestReadXYLongLineAndReadError(t *testing.T) {
	long := "1,2\n" + strings.Repeat(" ", 2<<20) + "3,4\n"
	_, _, _, err := fit.ReadXY("big.csv", strings.NewReader(long))
	var ie *fit.InputError
	if !errors.As(err, &ie) || ie.Line != 2 { // source: fit.ReadXY doc, lines over 1 MiB are an *InputError
		t.Errorf("long line: error %v, want *fit.InputError on line 2", err)
	}

	boom := errors.New("boom")
	r := io.MultiReader(strings.NewReader("1,2\n3,4\n"), iotest.ErrReader(boom))
	_, _, _, err = fit.ReadXY("dev.csv", r)
	if !errors.Is(err, boom) || errors.As(err, &ie) || !strings.HasPrefix(err.Error(), "dev.csv:") { // source: fit.ReadXY doc, read errors are wrapped, not *InputError
		t.Errorf("read error: got %v", err)
	}
}

func TestReadXYTestdata(t *testing.T) {
	x, y, u := readTable(t, "gum-h3-thermometer.csv")
	if len(x) != 11 || len(y) != 11 || u != nil { // source: JCGM 100:2008 Table H.6 has 11 readings
		t.Fatalf("GUM H.3: %d/%d points, u %v", len(x), len(y), u)
	}
	if x[0] != 21.521 || y[0] != -0.171 || x[10] != 26.511 || y[10] != -0.160 { // source: JCGM 100:2008 Table H.6 first and last rows
		t.Errorf("GUM H.3: first (%g, %g) last (%g, %g)", x[0], y[0], x[10], y[10])
	}
}

// FuzzReadXY checks that ReadXY never panics and that its results obey the
// contract: equal lengths, finite values, positive u, or an *InputError with
// a sensible position.
func FuzzReadXY(f *testing.F) {
	for _, s := range []string{
		"x,y\n1,2\n3,4\n",
		"1;2;0.5\n3;4;0.25\n",
		"1\t2\n3\t4\n",
		"  1  2\n 3 4 \n",
		"\uFEFF# c\r\nx,y\r\n1,2\r\n",
		"x,y\n1,abc\n",
		"1,2\n3,4,5\n",
		"1,,2\n",
		"NaN,1\n",
		"0x1p-3,1e308\n",
		",\n;\n\t\n",
		"a,b,c,d\n1,2,3,4\n",
		"",
	} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, in string) {
		x, y, u, err := fit.ReadXY("fuzz.csv", strings.NewReader(in))
		if err != nil {
			var ie *fit.InputError
			if !errors.As(err, &ie) {
				t.Fatalf("error %v is %T, want *fit.InputError", err, err)
			}
			if ie.File != "fuzz.csv" || ie.Line < 0 || ie.Col < 0 || !strings.HasPrefix(err.Error(), "fuzz.csv") {
				t.Fatalf("bad error %#v", ie)
			}
			if x != nil || y != nil || u != nil {
				t.Fatal("data returned with an error")
			}
			return
		}
		if len(x) == 0 || len(y) != len(x) || (u != nil && len(u) != len(x)) {
			t.Fatalf("lengths x %d y %d u %d", len(x), len(y), len(u))
		}
		for i := range x {
			if math.IsNaN(x[i]) || math.IsInf(x[i], 0) || math.IsNaN(y[i]) || math.IsInf(y[i], 0) {
				t.Fatalf("non-finite value at row %d", i)
			}
			if u != nil && !(u[i] > 0) || u != nil && math.IsInf(u[i], 0) {
				t.Fatalf("bad u at row %d: %g", i, u[i])
			}
		}
	})
}
