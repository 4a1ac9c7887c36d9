package bundle_test

import (
	"archive/zip"
	"bytes"
	"compress/flate"
	"errors"
	"fmt"
	"hash/crc32"
	"io"
	"runtime"
	"strings"
	"testing"

	"trimline/reports/bundle"
)

// zeros is an endless stream of zero bytes.
type zeros struct{}

func (zeros) Read(p []byte) (int, error) {
	clear(p)
	return len(p), nil
}

// deflatedZeros returns n zero bytes deflated, and their CRC-32.
func deflatedZeros(t testing.TB, n int64) ([]byte, uint32) {
	t.Helper()
	var buf bytes.Buffer
	w, _ := flate.NewWriter(&buf, flate.BestCompression)
	h := crc32.NewIEEE()
	if _, err := io.CopyN(io.MultiWriter(w, h), zeros{}, n); err != nil {
		t.Fatal(err)
	}
	w.Close()
	return buf.Bytes(), h.Sum32()
}

// withBomb rebuilds the archive data with member name replaced by n deflated
// zero bytes whose header declares declared bytes.
func withBomb(t testing.TB, data []byte, name string, n int64, declared uint64) []byte {
	t.Helper()
	raw, crc := deflatedZeros(t, n)
	zr, err := zip.NewReader(bytes.NewReader(data), int64(len(data)))
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	zw := zip.NewWriter(&buf)
	for _, f := range zr.File {
		if f.Name == name {
			fw, err := zw.CreateRaw(&zip.FileHeader{Name: name, Method: zip.Deflate, Modified: f.Modified,
				CRC32: crc, CompressedSize64: uint64(len(raw)), UncompressedSize64: declared})
			if err != nil {
				t.Fatal(err)
			}
			fw.Write(raw)
			continue
		}
		fw, err := zw.CreateRaw(&f.FileHeader)
		if err != nil {
			t.Fatal(err)
		}
		rc, _ := f.OpenRaw()
		io.Copy(fw, rc)
	}
	if err := zw.Close(); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
}

// A zip bomb in a bundle is refused by its size, whether its header declares the
// size or lies about it: the declared size is checked first, archive/zip stops
// inflating at the declared size, and the member is read through a bound one
// byte past the limit whatever the reader does. record.json may inflate to
// at most 40 MiB (the old bound, 256 MiB a member and 1 GiB in all, let a 1.3 MB
// bomb take 2.3 GB before a later check refused it). An archive over 128 MiB and
// one with more members than a bundle has are refused before any member is read.
func TestOpenRefusesBombs(t *testing.T) {
	s := newStation(t)
	data, _ := export(t, s.led, s.number, s.all())
	const n = 64 << 20 // more than record.json's 40 MiB, less than the old 256 MiB
	for _, tc := range []struct {
		name string
		arc  []byte
		size int64
		want string
	}{
		{"honest header", withBomb(t, data, "record.json", n, n), 0, "member record.json declares 67108864 bytes, more than the 41943040"},
		// archive/zip stops a member at its declared size; the bound is the belt.
		{"lying header", withBomb(t, data, "record.json", n, 100), 0, "member record.json: zip: not a valid zip file"},
		{"lying header under the bound", withBomb(t, data, "readings.csv", n, 30<<20), 0, "member readings.csv: zip: not a valid zip file"},
		{"archive over 128 MiB", data, 200 << 20, "more than the 128 MiB a bundle may have"},
		{"100 members", manyMembers(t, 100), 0, "100 members, more than the 64 a bundle may have"},
	} {
		size := tc.size
		if size == 0 {
			size = int64(len(tc.arc))
		}
		_, err := bundle.Open(paddedReader{tc.arc}, size)
		if !errors.Is(err, bundle.ErrBadBundle) || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: %v, want ErrBadBundle saying %q", tc.name, err, tc.want)
		} else {
			t.Logf("%s (%d bytes): %v", tc.name, len(tc.arc), err)
		}
	}
}

// paddedReader reads b and zeros after it, up to any size.
type paddedReader struct{ b []byte }

func (p paddedReader) ReadAt(q []byte, off int64) (int, error) {
	clear(q)
	if off < int64(len(p.b)) {
		copy(q, p.b[off:])
	}
	return len(q), nil
}

// manyMembers is an archive of n small members named as a bundle's files.
func manyMembers(t testing.TB, n int) []byte {
	var buf bytes.Buffer
	zw := zip.NewWriter(&buf)
	for i := range n {
		w, _ := zw.Create(fmt.Sprintf("files/station-%d.yaml", i))
		w.Write([]byte("station: {id: X}\n"))
	}
	if err := zw.Close(); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
}

// BenchmarkOpenZipBomb measures what refusing a bomb costs: record.json
// inflating to 1 GiB (about 1 MB deflated), with an honest and a lying header;
// and the largest members the bounds let Open read before its checks refuse
// them (record.json and readings.csv of 40 MiB, certificate.pdf of 16 MiB). It
// reports the bytes Open allocates (MB-alloc/op).
//
//	go test -run XXX -bench OpenZipBomb -benchtime 3x ./reports/bundle
func BenchmarkOpenZipBomb(b *testing.B) {
	s := newStation(&testing.T{})
	data, _ := export(&testing.T{}, s.led, s.number, s.all())
	for _, tc := range []struct {
		name     string
		n        int64
		declared uint64
	}{{"honest_header", 1 << 30, 1 << 30}, {"lying_header", 1 << 30, 100}, {"largest_members", 40 << 20, 40 << 20}} {
		arc := withBomb(b, data, "record.json", tc.n, tc.declared)
		if tc.name == "largest_members" {
			arc = withBomb(b, arc, "readings.csv", 40<<20, 40<<20)
			arc = withBomb(b, arc, "certificate.pdf", 16<<20, 16<<20)
		}
		b.Run(tc.name, func(b *testing.B) {
			var before, after runtime.MemStats
			runtime.GC()
			runtime.ReadMemStats(&before)
			for b.Loop() {
				if _, err := bundle.Open(bytes.NewReader(arc), int64(len(arc))); err == nil {
					b.Fatal("bomb accepted")
				}
			}
			runtime.ReadMemStats(&after)
			b.ReportMetric(float64(after.TotalAlloc-before.TotalAlloc)/float64(b.N)/1e6, "MB-alloc/op")
			b.ReportMetric(float64(len(arc))/1e6, "MB-archive")
		})
	}
}
