package sequencer_test

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"trimline/sequencer"
)

// A limit file no sequence names, beside a sequence for the product it names
// (limit_set.product), is judged against that product's steps, with a note.
func TestCatalogForFindsTheProductsSequence(t *testing.T) {
	dir := t.TempDir()
	src := filepath.Join("testdata", "ofx10")
	for _, n := range []string{"ofx10-sequence.yaml", "ofx10-limits.yaml"} {
		data, err := os.ReadFile(filepath.Join(src, n))
		if err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(dir, n), data, 0o644); err != nil {
			t.Fatal(err)
		}
		if n == "ofx10-limits.yaml" {
			if err := os.WriteFile(filepath.Join(dir, "ofx10-limits-rev2.yaml"), data, 0o644); err != nil {
				t.Fatal(err)
			}
			if got := sequencer.LimitsProduct(data); got != "OFX-10" {
				t.Fatalf("LimitsProduct = %q, want OFX-10", got)
			}
		}
	}
	cat, seq, note := sequencer.CatalogFor(filepath.Join(dir, "ofx10-limits-rev2.yaml"))
	if seq == nil || seq.Product != "OFX-10" || !strings.Contains(note, "for its product OFX-10") {
		t.Fatalf("CatalogFor(draft): seq %v, note %q", seq, note)
	}
	if _, ok := cat["pre_offset"]; !ok {
		t.Fatalf("catalogue lacks the product's pre_offset: %v", cat)
	}
	// Another product's draft still falls back to the first layout.
	other := filepath.Join(dir, "other-limits.yaml")
	data, _ := os.ReadFile(filepath.Join(dir, "ofx10-limits.yaml"))
	if err := os.WriteFile(other, []byte(strings.Replace(string(data), "product: OFX-10", "product: OFX-20", 1)), 0o644); err != nil {
		t.Fatal(err)
	}
	if _, seq, note := sequencer.CatalogFor(other); seq != nil || !strings.Contains(note, "first layout") {
		t.Fatalf("CatalogFor(other product): seq %v, note %q", seq, note)
	}
}
