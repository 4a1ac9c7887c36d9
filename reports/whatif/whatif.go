package whatif

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"time"

	"github.com/jung-kurt/gofpdf"

	"trimline/reports/internal/atomicfile"
	"trimline/reports/internal/pdfdoc"
)

// MaxFlipRows is how many flips the table lists; the rest are counted in a
// closing "… and N more" line.
const MaxFlipRows = 200

// Write renders the report to w as a PDF. generated is the document's date (and
// creation date); a zero time is written as the Unix epoch so the output stays
// reproducible.
func Write(w io.Writer, r Report, generated time.Time) error {
	pdf, err := render(r, generated)
	if err != nil {
		return err
	}
	if err := pdf.Output(w); err != nil {
		return fmt.Errorf("whatif: write PDF: %w", err)
	}
	return nil
}

// WriteFile renders the report and writes it to path atomically: a temporary
// file in the same directory is written, synced and renamed over path. On error
// nothing is left behind and an existing file at path is untouched.
func WriteFile(path string, r Report, generated time.Time) error {
	if path == "" {
		return errors.New("whatif: empty path")
	}
	var buf bytes.Buffer
	if err := Write(&buf, r, generated); err != nil {
		return err
	}
	if err := atomicfile.Write(path, buf.Bytes(), 0o644); err != nil {
		return fmt.Errorf("whatif: %w", err)
	}
	return nil
}

// render lays out the whole report and returns it ready for Output.
func render(r Report, generated time.Time) (*gofpdf.Fpdf, error) {
	stamp := generated.UTC()
	if generated.IsZero() {
		stamp = time.Unix(0, 0).UTC()
	}
	pdf := pdfdoc.New(stamp, marginL, marginT, marginR)
	pdf.SetTitle("What-if re-judging", true)
	pdf.SetSubject(orDash(r.Old)+" → "+orDash(r.New), true)
	pdf.SetCreator("trimline", true)
	pdf.SetProducer("trimline/reports/whatif", true)

	d := &doc{Doc: pdfdoc.Doc{PDF: pdf, Left: marginL, Width: contentW}, r: r, gen: stamp}
	d.Need = d.need
	d.newPage()
	d.summary()
	d.pareto()
	for _, dist := range r.Distributions {
		d.histogram(dist)
	}
	d.flips()
	d.footers()
	if err := pdf.Error(); err != nil {
		return nil, fmt.Errorf("whatif: render: %w", err)
	}
	return pdf, nil
}
