package certificate_test

import (
	"io"
	"testing"

	"trimline/reports/certificate"
)

func BenchmarkWrite(b *testing.B) {
	rec := sampleRecord()
	b.ReportAllocs()
	for b.Loop() {
		if err := certificate.Write(io.Discard, rec, opt); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkWriteFault(b *testing.B) {
	rec := faultRecord()
	b.ReportAllocs()
	for b.Loop() {
		if err := certificate.Write(io.Discard, rec, opt); err != nil {
			b.Fatal(err)
		}
	}
}
