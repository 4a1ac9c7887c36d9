package main

import (
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
