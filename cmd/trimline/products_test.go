package main

import (
	"path/filepath"
	"strings"
	"testing"

	"trimline/sequences"
)

// TestDemoListPrintsProductNamesOnly: `demo --list` is for scripts, so it prints the
// products' names one per line and nothing else, and every name it prints is one
// `demo --product` accepts.
func TestDemoListPrintsProductNamesOnly(t *testing.T) {
	code, out, errOut := runCLI(t, "demo", "--list")
	if code != 0 || errOut != "" {
		t.Fatalf("demo --list: exit %d, stderr %q", code, errOut)
	}
	ps, err := sequences.Products()
	if err != nil {
		t.Fatal(err)
	}
	var want []string
	for _, p := range ps {
		want = append(want, p.Name)
	}
	if got := strings.Split(strings.TrimSuffix(out, "\n"), "\n"); strings.Join(got, "|") != strings.Join(want, "|") {
		t.Fatalf("demo --list printed %q, want the names %q one per line", out, want)
	}
	if !strings.Contains(out, sequences.Default+"\n") {
		t.Errorf("demo --list does not list the default product %s", sequences.Default)
	}
}

// TestDemoUnknownProductIsAUsageError names the products there are.
func TestDemoUnknownProductIsAUsageError(t *testing.T) {
	code, _, errOut := runCLI(t, "demo", "--product", "NOPE-1", "--out", filepath.Join(t.TempDir(), "d"))
	if code != 2 || !strings.Contains(errOut, `no demo product "NOPE-1"`) || !strings.Contains(errOut, sequences.Default) {
		t.Fatalf("exit %d, stderr %q: want exit 2 naming the products", code, errOut)
	}
}
