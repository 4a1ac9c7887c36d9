package files_test

import (
	"fmt"
	"runtime"
	"strings"
	"testing"
	"time"

	"trimline/instruments/files"
)

// WorstFiles returns, for each shape the YAML library is slowest or hungriest
// on, the largest file of that shape that Check accepts (just under
// MaxFileSize). Each must pass Check.
func worstFiles() map[string]string {
	fill := func(head, unit, tail string) string {
		var b strings.Builder
		b.WriteString(head)
		for b.Len()+len(unit)+len(tail) <= files.MaxFileSize {
			b.WriteString(unit)
		}
		b.WriteString(tail)
		return b.String()
	}
	var keys strings.Builder
	for i := range files.MaxMappingKeys {
		fmt.Fprintf(&keys, "  %x: 1\n", i)
	}
	return map[string]string{
		"deepest flow":       fill("", "- "+nestedFlow(files.MaxDepth - 2)[3:], ""),
		"deepest flow pairs": fill("", "- "+strings.Repeat("[a: ", files.MaxDepth-2)+"1"+strings.Repeat("]", files.MaxDepth-2)+"\n", ""),
		"deepest block":      fill("", "- "+strings.Repeat("- ", files.MaxDepth-2)+"x\n", ""),
		"widest mappings":    fill("", "- m:\n"+indent(keys.String(), "    "), ""),
		"long flow list":     fill("a: [", "1,", "1]\n"),
		"long block list":    fill("a:\n", "  - 1\n", ""),
		"list of mappings":   fill("a:\n", "  - {x: 1}\n", ""),
		"aliases":            fill("x: &x 1\na:\n", "  - *x\n", ""),
		"most documents":     strings.Repeat(strings.Repeat("---\na:\n", 1)+strings.Repeat("  - 1\n", files.MaxFileSize/files.MaxDocuments/6-2), files.MaxDocuments),
		"one long scalar":    "a: " + strings.Repeat("x", files.MaxFileSize-5) + "\n",
		"trailing comments":  fill("a:\n", "  - 1 # c\n", ""),
	}
}

func indent(s, pre string) string {
	lines := strings.SplitAfter(strings.TrimSuffix(s, "\n"), "\n")
	for i, l := range lines {
		lines[i] = pre + strings.TrimPrefix(l, "  ")
	}
	return strings.Join(lines, "") + "\n"
}

// BenchmarkWorstAcceptedFile parses and decodes the worst file of each shape the
// bounds accept and reports the bytes allocated per parse (MB-alloc/op, an upper
// bound on the peak) and the peak heap in use during the parse (MB-peak-heap).
// It is the measurement behind the bounds in files.Check: run with
//
//	go test -run XXX -bench WorstAcceptedFile -benchtime 3x ./instruments/files
func BenchmarkWorstAcceptedFile(b *testing.B) {
	for name, src := range worstFiles() {
		data := []byte(src)
		if err := files.Check("worst.yaml", data); err != nil {
			b.Fatalf("%s: %v", name, err)
		}
		b.Run(strings.ReplaceAll(name, " ", "_"), func(b *testing.B) {
			var before, after runtime.MemStats
			peak := uint64(0)
			runtime.GC()
			runtime.ReadMemStats(&before)
			for b.Loop() {
				done := make(chan struct{})
				go func() { // sample the heap while the parse runs
					var m runtime.MemStats
					for {
						select {
						case <-done:
							return
						default:
						}
						runtime.ReadMemStats(&m)
						peak = max(peak, m.HeapInuse)
						time.Sleep(time.Millisecond)
					}
				}()
				doc, err := files.Parse("worst.yaml", data)
				if err == nil {
					var v any
					err = doc.Decode(&v)
				}
				close(done)
				if err != nil {
					b.Fatal(err)
				}
			}
			runtime.ReadMemStats(&after)
			b.ReportMetric(float64(after.TotalAlloc-before.TotalAlloc)/float64(b.N)/1e6, "MB-alloc/op")
			b.ReportMetric(float64(peak)/1e6, "MB-peak-heap")
			b.ReportMetric(float64(len(data))/1024, "KiB-file")
		})
	}
}
