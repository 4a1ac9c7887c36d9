package main

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// fitJSON is what `trimline fit --json` writes.
type fitJSON struct {
	Order         int         `json:"order"`
	N             int         `json:"n"`
	ThroughOrigin bool        `json:"through_origin"`
	Coefficients  []float64   `json:"coefficients"`
	StdUnc        []float64   `json:"std_uncertainties"`
	Covariance    [][]float64 `json:"covariance"`
	ResidualSD    float64     `json:"residual_sd"`
	DOF           int         `json:"dof"`
	RSquared      float64     `json:"r_squared"`
	LackOfFit     struct {
		Tested bool    `json:"tested"`
		Reason string  `json:"reason"`
		Method string  `json:"method"`
		Levels int     `json:"levels"`
		SSLOF  float64 `json:"ss_lack_of_fit"`
		DOFLOF int     `json:"dof_lack_of_fit"`
		SSPE   float64 `json:"ss_pure_error"`
		DOFPE  int     `json:"dof_pure_error"`
		F      float64 `json:"f"`
		P      float64 `json:"p"`
	} `json:"lack_of_fit"`
}

func runFitJSON(t *testing.T, args ...string) fitJSON {
	t.Helper()
	code, out, errOut := runCLI(t, append([]string{"fit", "--json"}, args...)...)
	if code != 0 {
		t.Fatalf("fit %v: exit %d: %s", args, code, errOut)
	}
	var r fitJSON
	if err := json.Unmarshal([]byte(out), &r); err != nil {
		t.Fatalf("fit %v: %v\n%s", args, err, out)
	}
	return r
}

func near(t *testing.T, what string, got, want, tol float64) {
	t.Helper()
	if !(math.Abs(got-want) <= tol*math.Abs(want)) {
		t.Errorf("%s = %.15g, want %.15g (relative tolerance %g)", what, got, want, tol)
	}
}

// trimline fit --through-origin on NIST StRD NoInt1 and NoInt2 prints the
// certified values to 10 significant digits or better (NIST: a correct
// double-precision solver agrees to at least 10). NoInt2's are from memory
// (testdata/nist-strd-noint2.csv says so; its exact values are hand-worked
// in sequencer/fit's TestNoInt2). Neither dataset repeats an x value, so no
// lack-of-fit test is claimed.
func TestFitThroughOriginNIST(t *testing.T) {
	for _, c := range []struct {
		file            string
		n, dof          int
		b1, sb1, sd, r2 float64
	}{
		// source: NIST StRD NoInt1, certified B1, s(B1), residual SD, R² (uncentred), residual dof 10
		{"nist-strd-noint1.csv", 11, 10, 2.07438016528926, 0.165289256198347e-01, 3.56753034006338, 0.999365492298663},
		// source: NIST StRD NoInt2 (from memory), certified B1, s(B1), residual SD, R² (uncentred), residual dof 2
		{"nist-strd-noint2.csv", 3, 2, 0.727272727272727, 0.420827318078432e-01, 0.369274472937998, 0.993348115299335},
	} {
		path := filepath.Join("..", "..", "testdata", c.file)
		r := runFitJSON(t, "--through-origin", path)
		if !r.ThroughOrigin || r.Order != 1 || r.N != c.n || r.DOF != c.dof || len(r.Coefficients) != 1 || len(r.StdUnc) != 1 || len(r.Covariance) != 1 {
			t.Fatalf("%s: %+v; want one coefficient through the origin, n %d, dof %d", c.file, r, c.n, c.dof)
		}
		near(t, c.file+" B1", r.Coefficients[0], c.b1, 1e-10)
		near(t, c.file+" s(B1)", r.StdUnc[0], c.sb1, 1e-10)
		near(t, c.file+" residual SD", r.ResidualSD, c.sd, 1e-10)
		near(t, c.file+" R²", r.RSquared, c.r2, 1e-10)
		if r.LackOfFit.Tested || !strings.Contains(r.LackOfFit.Reason, "no x value is repeated") || r.LackOfFit.F != 0 {
			t.Errorf("%s: lack of fit %+v; without replicates no F test may be claimed", c.file, r.LackOfFit)
		}

		code, out, errOut := runCLI(t, "fit", "--through-origin", path)
		if code != 0 {
			t.Fatalf("exit %d: %s", code, errOut)
		}
		for _, want := range []string{"model: y = b1·x (through the origin)", "R² (uncentred)", "lack of fit: not tested: no x value is repeated"} {
			if !strings.Contains(out, want) {
				t.Errorf("%s: text lacks %q:\n%s", c.file, want, out)
			}
		}
		if strings.Contains(out, "b0") || strings.Contains(out, "F =") || strings.Contains(out, "correlation") {
			t.Errorf("%s: text of a one-coefficient fit without replicates shows b0, a correlation or an F:\n%s", c.file, out)
		}
	}
}

// The lack-of-fit F test against pure error (NIST/SEMATECH e-Handbook §4.4.4),
// hand-worked on six points with replicates, for both models:
//
//	x = 1, 1, 2, 2, 3, 3;  y = 2, 4, 3, 5, 9, 9;  group means 3, 4, 9.
//	Pure error: SS_PE = (1 + 1) + (1 + 1) + 0 = 4 on n − levels = 3 dof, MS_PE = 4/3.
//
//	With intercept: slope = Σ(x−2)(m−16/3)/Σ(x−2)² over the means = 3, fitted
//	7/3, 16/3, 25/3; means − fitted = 2/3, −4/3, 2/3; SS_LOF = 2·(4 + 16 + 4)/9 = 16/3
//	on levels − 2 = 1 dof; F = (16/3)/(4/3) = 4 on (1, 3).
//	p = P(F(1,3) > 4) = P(|t₃| > 2) = 1 − (2/π)[2/(√3·(1 + 4/3)) + atan(2/√3)]
//	(Student t with 3 dof in closed form) = 0.139326…
//
//	Through the origin: b1 = Σxy/Σx² = 76/28 = 19/7, fitted 19/7, 38/7, 57/7;
//	means − fitted = 2/7, −10/7, 6/7; SS_LOF = 2·(4 + 100 + 36)/49 = 40/7 on
//	levels − 1 = 2 dof; F = (20/7)/(4/3) = 15/7 on (2, 3).
//	p = P(F(2,3) > 15/7) = (1 + 2F/3)^(−3/2) = (7/17)^(3/2) (F with 2 numerator dof
//	in closed form) = 0.264225…
func TestFitLackOfFitHandWorked(t *testing.T) {
	path := filepath.Join(t.TempDir(), "replicates.csv")
	os.WriteFile(path, []byte("x,y\n1,2\n1,4\n2,3\n2,5\n3,9\n3,9\n"), 0o644)

	pT := 1 - 2/math.Pi*(2/(math.Sqrt(3)*(1+4.0/3))+math.Atan(2/math.Sqrt(3)))
	for _, c := range []struct {
		args        []string
		sslof, f, p float64
		doflof      int
	}{
		{nil, 16.0 / 3, 4, pT, 1}, // source: hand-worked above, with intercept
		{[]string{"--through-origin"}, 40.0 / 7, 15.0 / 7, math.Pow(7.0/17, 1.5), 2}, // source: hand-worked above, through the origin
	} {
		r := runFitJSON(t, append(c.args, path)...)
		l := r.LackOfFit
		if !l.Tested || l.Levels != 3 || l.DOFLOF != c.doflof || l.DOFPE != 3 || !strings.Contains(l.Method, "§4.4.4") {
			t.Fatalf("%v: lack of fit %+v; want an F test on (%d, 3) dof over 3 levels", c.args, l, c.doflof)
		}
		near(t, "SS_PE", l.SSPE, 4, 1e-12)
		near(t, "SS_LOF", l.SSLOF, c.sslof, 1e-12)
		near(t, "F", l.F, c.f, 1e-12)
		near(t, "p", l.P, c.p, 1e-9)
		// source: e-Handbook §4.4.4, the residual sum of squares is SS_LOF + SS_PE.
		near(t, "residual SD² · dof", r.ResidualSD*r.ResidualSD*float64(r.DOF), c.sslof+4, 1e-12)
		t.Logf("%v: F = %.12g on (%d, %d), p = %.6f", c.args, l.F, l.DOFLOF, l.DOFPE, l.P)

		code, out, errOut := runCLI(t, append([]string{"fit"}, append(c.args, path)...)...)
		if code != 0 {
			t.Fatalf("exit %d: %s", code, errOut)
		}
		for _, want := range []string{"lack of fit (F test against pure error, NIST/SEMATECH e-Handbook §4.4.4; 3 distinct x, 6 points)", "pure error", "F = MS_LOF/MS_PE", "no significant lack of fit at the 5 % level"} {
			if !strings.Contains(out, want) {
				t.Errorf("%v: text lacks %q:\n%s", c.args, want, out)
			}
		}
	}
}

// The e-Handbook's load cell (§4.6.1.5): the straight line shows lack of fit,
// F = 214.7464 on (18, 20) dof; the command says so.
func TestFitLackOfFitLoadCell(t *testing.T) {
	path := filepath.Join("..", "..", "testdata", "nist-loadcell-pontius.csv")
	r := runFitJSON(t, path)
	if !r.LackOfFit.Tested || r.LackOfFit.DOFLOF != 18 || r.LackOfFit.DOFPE != 20 {
		t.Fatalf("lack of fit %+v; want F on (18, 20)", r.LackOfFit)
	}
	near(t, "F", r.LackOfFit.F, 214.7464, 5e-6) // source: NIST/SEMATECH e-Handbook §4.6.1.5, lack-of-fit F statistic 214.7464
	code, out, _ := runCLI(t, "fit", path)
	if code != 0 || !strings.Contains(out, "significant lack of fit at the 5 % level: the model does not describe the data") || !strings.Contains(out, "p < 1e-10") {
		t.Errorf("exit %d:\n%s", code, out)
	}
}

// What a fit that cannot be tested for lack of fit says, and flags that
// exclude each other.
func TestFitLackOfFitNotClaimed(t *testing.T) {
	dir := t.TempDir()
	write := func(name, body string) string {
		p := filepath.Join(dir, name)
		os.WriteFile(p, []byte(body), 0o644)
		return p
	}
	same := write("same.csv", "1,2\n1,2\n2,3\n2,3\n3,5\n")
	two := write("two.csv", "1,2\n1,2.5\n2,3\n2,3.2\n")
	weighted := write("weighted.csv", "1,2,0.1\n1,2.2,0.1\n2,3,0.2\n2,3.1,0.2\n3,5,0.1\n")
	for _, c := range []struct {
		args []string
		why  string
	}{
		{[]string{same}, "identical y"},                      // SS_PE = 0: e-Handbook §4.4.4 has no pure error to divide by
		{[]string{two}, "2 distinct x for 2 coefficient(s)"}, // levels − params = 0 lack-of-fit dof
		{[]string{"--through-origin", two}, ""},              // one coefficient: 1 lack-of-fit dof, tested
		{[]string{weighted}, "the fit is weighted"},          // the F test assumes one common SD
	} {
		r := runFitJSON(t, c.args...)
		if c.why == "" {
			if !r.LackOfFit.Tested || r.LackOfFit.DOFLOF != 1 || r.LackOfFit.DOFPE != 2 {
				t.Errorf("%v: %+v; want an F test on (1, 2)", c.args, r.LackOfFit)
			}
			continue
		}
		if r.LackOfFit.Tested || !strings.Contains(r.LackOfFit.Reason, c.why) {
			t.Errorf("%v: %+v; want not tested because %q", c.args, r.LackOfFit, c.why)
		}
	}
	for _, args := range [][]string{{"--through-origin", "--order", "2", same}, {"--through-origin", "--x0", "2", same}} {
		if code, _, errOut := runCLI(t, append([]string{"fit"}, args...)...); code != exitUsage || !strings.Contains(errOut, "--through-origin") {
			t.Errorf("%v: exit %d: %s", args, code, errOut)
		}
	}
	bad := write("bad.csv", "x,y\n1,2\n2,abc\n")
	if code, _, errOut := runCLI(t, "fit", "--through-origin", bad); code != exitUsage || !strings.Contains(errOut, "bad.csv:3:3") {
		t.Errorf("bad csv: exit %d: %s", code, errOut)
	}
	zero := write("zero.csv", "0,1\n0,2\n")
	if code, _, errOut := runCLI(t, "fit", "--through-origin", zero); code != exitUsage || !strings.Contains(errOut, "every x is 0") {
		t.Errorf("all x zero: exit %d: %s", code, errOut)
	}
}
