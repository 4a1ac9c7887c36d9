package main

import (
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// trimline fit on finite values near 1e308 whose fit overflows is bad input (exit
// 2) with a message, never NaN or Inf printed under exit 0; so is a prediction
// (--at) that overflows.
func TestFitRefusesNotFinite(t *testing.T) {
	dir := t.TempDir()
	for _, tc := range []struct{ name, csv string }{
		{"line through ±1e308", "1e308,1e308\n-1e308,-1e308\n0,5e307\n1,4e307\n"},
		{"alternating 1e308", "1,1e308\n2,-1e308\n3,1e308\n4,-1e308\n"},
	} {
		path := filepath.Join(dir, "big.csv")
		os.WriteFile(path, []byte(tc.csv), 0o644)
		for _, args := range [][]string{{"fit", path}, {"fit", "--json", path}, {"fit", "--order", "2", path}} {
			code, out, errOut := runCLI(t, args...)
			if code != exitUsage || errOut == "" || strings.Contains(out, "NaN") || strings.Contains(out, "Inf") {
				t.Errorf("%s: %v: exit %d, want %d\nstdout: %s\nstderr: %s", tc.name, args, code, exitUsage, out, errOut)
			}
		}
	}
	path := filepath.Join(dir, "ok.csv")
	os.WriteFile(path, []byte("1,1\n2,2.1\n3,2.9\n"), 0o644)
	code, out, errOut := runCLI(t, "fit", "--at", "1e300", path)
	if code != exitUsage || !strings.Contains(errOut, "not finite") || strings.Contains(out, "Inf") {
		t.Errorf("--at 1e300: exit %d, want %d\nstdout: %s\nstderr: %s", code, exitUsage, out, errOut)
	}
}

// trimline check refuses, as bad input naming file:line:col and the bound, a
// station file nested deeper than the parser's bound, one larger than the size
// bound and a sequence file whose mapping has too many keys, before the YAML
// library sees them; FileKind does not parse them either.
func TestCheckRefusesHostileFiles(t *testing.T) {
	dir := t.TempDir()
	deep := filepath.Join(dir, "deep.yaml")
	os.WriteFile(deep, []byte("station: {id: TL1}\nx: "+strings.Repeat("[", 100)+strings.Repeat("]", 100)+"\n"), 0o644)
	big := filepath.Join(dir, "big.yaml")
	os.WriteFile(big, []byte("station: {id: TL1}\n"+strings.Repeat("# a comment line of some length\n", 9000)), 0o644)
	var keys strings.Builder
	keys.WriteString("sequence: {product: P, revision: A}\nideal:\n")
	for i := range 300 {
		fmt.Fprintf(&keys, "  k%d: 1\n", i)
	}
	wide := filepath.Join(dir, "wide.yaml")
	os.WriteFile(wide, []byte(keys.String()), 0o644)
	for _, tc := range []struct{ path, want string }{
		{deep, "deep.yaml:2:35: nested too deep: expected at most 32 levels"},
		{big, "big.yaml:4097:14: file too large: expected at most 128 KiB"},
		{wide, "wide.yaml:259:3: too many keys in one mapping: expected at most 256"},
	} {
		code, out, errOut := runCLI(t, "check", tc.path)
		if code != exitUsage || !strings.Contains(out+errOut, tc.want) {
			t.Errorf("check %s: exit %d, want %d and %q\nstdout: %s\nstderr: %s", filepath.Base(tc.path), code, exitUsage, tc.want, out, errOut)
		}
	}
	for _, args := range [][]string{{"run", "--station", deep, "--sequence", wide, "--serial", "BRX-00001"}, {"limits", "lint", deep}} {
		code, out, errOut := runCLI(t, args...)
		if code != exitUsage || !strings.Contains(out+errOut, "refused before parsing") {
			t.Errorf("%v: exit %d, want %d and a bound named\nstdout: %s\nstderr: %s", args, code, exitUsage, out, errOut)
		}
	}
}

// trimline fit refuses a table of more rows than fit.MaxRows as bad input at the
// line where the bound is crossed, instead of reading any number into memory.
func TestFitRefusesTooManyRows(t *testing.T) {
	path := filepath.Join(t.TempDir(), "rows.csv")
	var b strings.Builder
	for i := range 100_001 {
		fmt.Fprintf(&b, "%d,%d.5\n", i, 2*i)
	}
	os.WriteFile(path, []byte(b.String()), 0o644)
	code, out, errOut := runCLI(t, "fit", path)
	if code != exitUsage || !strings.Contains(errOut, "rows.csv:100001:1: expected at most 100000 data rows") {
		t.Errorf("exit %d, want %d\nstdout: %s\nstderr: %s", code, exitUsage, out, errOut)
	}
}

// trimline audit verify refuses a file larger than any certificate as bad input,
// without reading it whole.
func TestAuditVerifyRefusesHugeFile(t *testing.T) {
	path := filepath.Join(t.TempDir(), "huge.pdf")
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	f.Truncate(17 << 20) // sparse: 17 MiB of zeros
	f.Close()
	code, out, errOut := runCLI(t, "audit", "verify", path, "--no-ledger", "--keys", t.TempDir())
	if code != exitUsage || !strings.Contains(errOut, "more than 16 MiB") {
		t.Errorf("exit %d, want %d\nstdout: %s\nstderr: %s", code, exitUsage, out, errOut)
	}
}
