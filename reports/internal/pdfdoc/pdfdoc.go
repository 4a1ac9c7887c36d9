// Package pdfdoc is the small PDF toolkit trimline's documents (the certificate
// and the what-if report) share: a reproducible A4 document with the Go fonts
// embedded, so µ, ±, °, Ω render (New); colours, text styles and the drawing of
// text, boxes and rules on a page with a cursor (Doc, draw.go); tables with
// wrapped cells, group titles and bands that break across pages (Table,
// table.go); and plot axes with round ticks (Axis, axis.go).
//
// Everything here draws through gofpdf in a fixed order, so the same calls give
// the same bytes: the documents built on it stay byte-identical for identical
// inputs. Nothing is safe for concurrent use except New; each document is drawn
// by one goroutine.
package pdfdoc

import (
	"bytes"
	"time"

	"github.com/jung-kurt/gofpdf"
	"golang.org/x/image/font/gofont/gobold"
	"golang.org/x/image/font/gofont/gomono"
	"golang.org/x/image/font/gofont/goregular"
)

// Font family names registered by New: Sans in regular ("") and bold ("B"), Mono
// in regular.
const (
	Sans = "gosans"
	Mono = "gomono"
)

// Pristine copies of the Go fonts, taken before anything can touch them.
// gofpdf v1.16.2 writes into the byte slice given to AddUTF8FontFromBytes (its
// hmtx reader appends to a sub-slice of the font), so every document gets a fresh
// clone: handing it goregular.TTF itself would corrupt that shared slice and make
// the next document differ.
var (
	ttfRegular = bytes.Clone(goregular.TTF)
	ttfBold    = bytes.Clone(gobold.TTF)
	ttfMono    = bytes.Clone(gomono.TTF)
)

// New returns an A4 portrait document in millimetres dated stamp (the Unix epoch
// for a zero time: gofpdf would otherwise use the wall clock), with sorted catalog
// and compression so that the same content gives the same bytes, no automatic page
// breaks, the given margins, no cell margin, and the fonts registered. Safe for
// concurrent use: each call makes its own document.
func New(stamp time.Time, left, top, right float64) *gofpdf.Fpdf {
	stamp = stamp.UTC()
	if stamp.IsZero() {
		stamp = time.Unix(0, 0).UTC()
	}
	pdf := gofpdf.New("P", "mm", "A4", "")
	pdf.SetCreationDate(stamp)
	pdf.SetModificationDate(stamp)
	pdf.SetCatalogSort(true)
	pdf.SetCompression(true)
	pdf.SetAutoPageBreak(false, 0)
	pdf.SetMargins(left, top, right)
	pdf.SetCellMargin(0)
	pdf.AddUTF8FontFromBytes(Sans, "", bytes.Clone(ttfRegular))
	pdf.AddUTF8FontFromBytes(Sans, "B", bytes.Clone(ttfBold))
	pdf.AddUTF8FontFromBytes(Mono, "", bytes.Clone(ttfMono))
	return pdf
}
