// Package certificate renders the per-unit trim and calibration certificate of a
// sequencer.Record as a PDF (A4 portrait).
//
// Page 1 carries what ISO/IEC 17025:2017 §7.8.4.1 and §7.8.6 ask of a calibration
// certificate: the unit, the conditions (ambient temperature, or that it was not
// recorded), the results as found (before adjustment) and as left (after it), by
// the stage the results table declares (sequencer.Stage), each with its expanded
// uncertainty U, coverage factor k and unit; for toleranced limits the tolerance,
// the acceptance interval of a guarded rule, the zone (pass, conditional pass,
// conditional fail, fail), the TUR and the specific false-accept probability; the
// decision rules in force (ILAC-G8:09/2019) with the coverage probability; and the
// traceability of the reference instruments. The measurement detail follows: each
// limit's decision statement, results no limit judged, fits, plots and every sweep
// point. Records without uncertainties (made before they were evaluated) render
// with "U not evaluated".
//
// Stimuli and responses print in the record's units (Record.StimulusUnit and
// ResponseUnit: volts, amperes with an SI prefix, or counts the unit reports),
// gains with their unit pair (V/V, mA/V, count/V); a record in volts reads as it
// always did. A unit of several channels has its limits banded by stage and
// channel and its fits, plots, sweep points, codes and coefficients labelled
// with their channel. Firmware correction coefficients (word written, value it
// stands for, resolution, read-back) and the passes of a closed-loop re-trim
// have a table each, shown only when the record has them; the coefficients
// are banded by the step that wrote them, the clear step's rows saying what
// the unit held as found. A unit corrected by coefficients alone has no trim
// code table and reads "corrected", not "trimmed". Measurements at one level
// (a measure step's) and re-trim passes are rows of one table, never plots,
// each in the unit of the quantity it read (a supply current in amperes beside a
// voltage output, with no error against the output's ideal).
//
// The document is made from the Record and the Options alone: identical inputs give
// byte-identical files. The creation date is the record's finish time, resource
// catalogues are sorted and no map is iterated in output order, so a certificate
// can be re-issued from the ledger and compared byte for byte.
//
// A sealed certificate (Options.KeyID, VerificationCode, RecordSHA256, Signer)
// shows the seal in a block at the foot of page 1 and its verification code in
// the footer of every page; without them it says "Unsigned". The signature over
// the PDF itself is detached (reports/signing). The document keywords carry the
// certificate number and run id in plain text, so that Metadata can identify even
// an altered PDF.
//
// Text is set in the Go fonts (golang.org/x/image/font/gofont), embedded as UTF-8
// subsets, so µ, ±, °, Ω and the like render on every viewer; the PDF core fonts
// are never used.
package certificate

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"strings"
	"time"

	"github.com/jung-kurt/gofpdf"

	"trimline/reports/internal/atomicfile"
	"trimline/reports/internal/pdfdoc"
	"trimline/sequencer"
)

// Options are the parts of the certificate that are not in the record.
type Options struct {
	Number string // certificate number, e.g. "TL1-000042" (issued by the ledger)
	Maker  string // maker's name printed in the header (from the station/sequence; may be empty)

	// The seal, printed in a block at the foot of page 1; the verification code is
	// repeated in the footer of every page. With neither KeyID nor
	// VerificationCode the certificate says plainly that it is unsigned.
	RecordSHA256     string         // lowercase hex SHA-256 of the ledger record, in full
	VerificationCode string         // signing.VerificationCode of the record signature, e.g. "K7QF-2M9D-XA4P"
	KeyID            string         // ID of the station key that sealed it, e.g. "ed25519:3f9a0c1d2e4b5a69"
	Signer           *Manifestation // the person's signature manifestation; printed only when set

	// The run's link in its station's hash chain in the ledger (its chain_hash,
	// lowercase hex, and its position chain_seq), printed in the seal block and
	// carried in the document keywords, so that the certificate anchors the chain
	// outside the ledger: a ledger rebuilt later no longer has this link. Empty
	// (and 0) print nothing.
	ChainLink string
	ChainSeq  int64
}

// Manifestation is what a certificate shows of a person's electronic signature
// (21 CFR 11.50): the printed name of the signer, the date and time of signing and
// the meaning of the signature.
type Manifestation struct {
	Name    string    // printed name of the signer
	Meaning string    // what the signature means, e.g. "released", "approved"
	Signed  time.Time // when it was signed; printed in UTC
}

// Write renders the certificate for rec to w. Identical (rec, opt) give
// byte-identical PDFs. Records of any verdict render; FAULT and ABORTED records are
// marked as not certified. A REVIEW record is a certificate whose verdict box says
// the unit is held for review. A record that carries a review decision
// (Record.Disposition) is a certificate of the final verdict with a “Review
// decision” section (review.go).
func Write(w io.Writer, rec *sequencer.Record, opt Options) error {
	if rec == nil {
		return errors.New("certificate: nil record")
	}
	pdf, err := render(rec, opt)
	if err != nil {
		return err
	}
	if err := pdf.Output(w); err != nil {
		return fmt.Errorf("certificate: write PDF: %w", err)
	}
	return nil
}

// WriteFile renders the certificate and writes it to path atomically: the PDF goes
// to a temporary file in the same directory, which is synced and then renamed over
// path. On error no temporary file is left behind and an existing file at path is
// untouched.
func WriteFile(path string, rec *sequencer.Record, opt Options) error {
	if rec == nil {
		return errors.New("certificate: nil record")
	}
	// Render into memory first so that a rendering error never touches the disk.
	var buf bytes.Buffer
	if err := Write(&buf, rec, opt); err != nil {
		return err
	}
	if err := atomicfile.Write(path, buf.Bytes(), 0o644); err != nil {
		return fmt.Errorf("certificate: %w", err)
	}
	return nil
}

// FileName returns the conventional file name "<number>_<serial>.pdf". Characters
// other than ASCII letters, digits, '-', '+' and '.' are replaced with '_', and a
// leading '.' is replaced too, so the name is safe on every file system and never
// hidden or a path. A missing number or serial is left out; with neither the name
// is "certificate.pdf".
func FileName(rec *sequencer.Record, opt Options) string {
	var parts []string
	if s := safeName(opt.Number); s != "" {
		parts = append(parts, s)
	}
	if rec != nil {
		if s := safeName(rec.Serial); s != "" {
			parts = append(parts, s)
		}
	}
	if len(parts) == 0 {
		return "certificate.pdf"
	}
	return strings.Join(parts, "_") + ".pdf"
}

func safeName(s string) string {
	s = strings.TrimSpace(s)
	const max = 80
	var b strings.Builder
	n := 0
	for _, r := range s {
		if n == max {
			break
		}
		n++
		switch {
		case r >= 'a' && r <= 'z', r >= 'A' && r <= 'Z', r >= '0' && r <= '9', r == '-', r == '+':
			b.WriteRune(r)
		case r == '.' && b.Len() > 0:
			b.WriteRune(r)
		default:
			b.WriteByte('_')
		}
	}
	return b.String()
}

// render lays out the whole document and returns it ready for Output.
func render(rec *sequencer.Record, opt Options) (*gofpdf.Fpdf, error) {
	// A zero date (a record that never finished) becomes the epoch in pdfdoc.New,
	// keeping the output reproducible.
	pdf := pdfdoc.New(rec.Finished, marginL, marginT, marginR)

	title := "Trim and calibration certificate"
	pdf.SetTitle(strings.TrimSpace(title+" "+opt.Number), true)
	pdf.SetSubject(strings.TrimSpace(rec.Product+" "+rec.Serial), true)
	if opt.Maker != "" {
		pdf.SetAuthor(opt.Maker, true)
	}
	pdf.SetCreator(strings.TrimSpace("trimline "+rec.Software), true)
	pdf.SetProducer("trimline/reports/certificate", true)
	pdf.SetKeywords(keywords(opt.Number, rec.RunID, opt.ChainLink), false)

	d := &doc{Doc: pdfdoc.Doc{PDF: pdf, Left: marginL, Width: contentW}, rec: rec, opt: opt, sim: sequencer.SimulationOf(rec)}
	d.Need = d.need
	d.build()
	if err := pdf.Error(); err != nil {
		return nil, fmt.Errorf("certificate: render: %w", err)
	}
	return pdf, nil
}
