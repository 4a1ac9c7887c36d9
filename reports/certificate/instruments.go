package certificate

import (
	"slices"
	"strconv"
	"strings"
	"time"

	"trimline/reports/internal/pdfdoc"
	"trimline/sequencer"
)

// instrumentsUsed is the traceability table of the instruments: each role's
// identity and address, its calibration (date, due date, certificate,
// laboratory) and its specs with when they hold; then the traceability
// statement and how the specs were applied at the run's ambient.
func (d *doc) instrumentsUsed() {
	cols := []pdfdoc.Column{
		{Title: "Role", W: 15, Align: "L"},
		{Title: "Asset", W: 25, Align: "L"},
		{Title: "Identity · address", W: 41, Align: "L"},
		{Title: "Calibration", W: 40, Align: "L"},
		{Title: "Accuracy · when it holds", W: 59, Align: "L"},
	}
	var rows []pdfdoc.Row
	for _, in := range d.rec.Instruments {
		id := in.Identity
		id.Maker, id.Model, id.Serial, id.Firmware = said(id.Maker), said(id.Model), said(id.Serial), said(id.Firmware)
		name := strings.TrimSpace(id.Maker + " " + id.Model)
		if name == "" {
			name = "did not identify itself"
		}
		ident := pdfdoc.Cell{{Text: name, St: pdfdoc.Body}}
		var sub []string
		if id.Serial != "" {
			sub = append(sub, "s/n "+id.Serial)
		}
		if id.Firmware != "" {
			sub = append(sub, "firmware "+id.Firmware)
		}
		if len(sub) > 0 {
			ident = append(ident, pdfdoc.Span{Text: strings.Join(sub, " · "), St: pdfdoc.Small})
		}
		ident = append(ident, pdfdoc.Span{Text: dash(in.Address), St: stMono.Sized(6.5)})
		if d.simulated() && slices.Contains(d.sim.Roles, in.Role) {
			ident = append(ident, pdfdoc.Span{Text: "SIMULATED", St: pdfdoc.Bold.Sized(7).With(colSimulated)})
		}
		rows = append(rows, pdfdoc.Row{
			c1(dash(in.Role), pdfdoc.Bold),
			c1(dash(in.Asset), pdfdoc.Body),
			ident,
			d.calibrationCell(in),
			accuracyCell(in),
		})
	}
	d.tableSection("Instruments used and traceability", cols, rows, nil)
	d.Y += 1.2
	fs := []para{{"Traceability", d.traceability()}}
	if s := d.specsApplied(); s != "" {
		fs = append(fs, para{"Specifications", s})
	}
	d.fields(fs)
}

// calibrationCell is what the record says of an instrument's calibration: the
// due date (in red when it had passed at the test), the date it was
// calibrated, the certificate and the laboratory.
func (d *doc) calibrationCell(in sequencer.InstrumentRef) pdfdoc.Cell {
	k := in.RoleKind()
	if k != sequencer.VoltageSource && k != sequencer.CurrentSource && k != sequencer.VoltMeter && in.CalDue == "" {
		return c1("—", pdfdoc.Body)
	}
	c := pdfdoc.Cell{{Text: "due " + dash(in.CalDue), St: pdfdoc.Body}}
	if d.overdue(in) {
		c = pdfdoc.Cell{{Text: "due " + in.CalDue, St: pdfdoc.Bold.With(pdfdoc.Fail)}, {Text: "overdue at test", St: pdfdoc.Small.With(pdfdoc.Fail)}}
	}
	if in.CalDate == "" && in.CalCertificate == "" && in.CalLab == "" {
		return append(c, pdfdoc.Span{Text: "calibration date, certificate and laboratory not recorded", St: pdfdoc.Small})
	}
	if in.CalDate != "" {
		c = append(c, pdfdoc.Span{Text: "calibrated " + in.CalDate, St: pdfdoc.Body})
	}
	if in.CalCertificate != "" {
		c = append(c, pdfdoc.Span{Text: "certificate " + in.CalCertificate, St: pdfdoc.Body})
	}
	if in.CalLab != "" {
		c = append(c, pdfdoc.Span{Text: in.CalLab, St: pdfdoc.Small})
	}
	return c
}

// accuracyCell is the instrument's specs, one paragraph each (the record
// joins them with "; "), so a meter with a spec per range reads as a list;
// then when they hold (the data sheet's period, the temperature band and the
// tempco outside it) and, when the ambient lay outside the band, the widened
// specs the uncertainties used.
func accuracyCell(in sequencer.InstrumentRef) pdfdoc.Cell {
	var c pdfdoc.Cell
	for _, s := range strings.Split(dash(in.Accuracy), "; ") {
		c = append(c, pdfdoc.Span{Text: s, St: pdfdoc.Body})
	}
	var when []string
	if in.SpecPeriod != "" {
		when = append(when, in.SpecPeriod+" spec")
	}
	if in.SpecBand != nil {
		when = append(when, "holds "+fmtBand(*in.SpecBand)+"; outside, "+in.Tempco)
	}
	if len(when) > 0 {
		c = append(c, pdfdoc.Span{Text: strings.Join(when, ", "), St: pdfdoc.Small})
	}
	if in.AccuracyAtAmbient != "" {
		c = append(c, pdfdoc.Span{Text: "used at " + fmtC(in.OutsideBandC) + " outside the band:", St: pdfdoc.Bold.Sized(6.8).With(colCondPass)})
		for _, s := range strings.Split(in.AccuracyAtAmbient, "; ") {
			c = append(c, pdfdoc.Span{Text: s, St: pdfdoc.Body.With(colCondPass)})
		}
	}
	return c
}

// fmtBand is a temperature band in words: "18 °C to 28 °C".
func fmtBand(b sequencer.TempBand) string { return fmtC(b.LowC) + " to " + fmtC(b.HighC) }

// fmtC is a temperature as the station file wrote it: "18 °C", "−0.5 °C".
func fmtC(c float64) string { return pdfdoc.Minus(strconv.FormatFloat(c, 'g', 6, 64)) + " °C" }

// said is an *IDN? field, or "" for "0", which is what *IDN? gives for "not told".
func said(s string) string {
	if s = strings.TrimSpace(s); s == "0" {
		return ""
	}
	return s
}

// overdue reports whether an instrument's calibration was due before the test.
func (d *doc) overdue(in sequencer.InstrumentRef) bool {
	t, err := time.Parse("2006-01-02", in.CalDue)
	tested := d.testedAt()
	return err == nil && !tested.IsZero() && tested.UTC().After(t.Add(24*time.Hour))
}

// traceability is the statement of metrological traceability through the reference
// instruments: the roles that bind a source or a meter, whatever the station
// names them.
func (d *doc) traceability() string {
	if d.simulated() {
		return "Nothing on this certificate is traceable to the SI: the " + joinAnd(d.sim.Roles) + " " +
			map[bool]string{true: "role was", false: "roles were"}[len(d.sim.Roles) == 1] +
			" bound to simulated instruments, whose readings the simulator computes. The calibrations listed are those the station file declares; no reading of this run was taken through them."
	}
	var refs, gaps []string
	for _, in := range d.rec.Instruments {
		if k := in.RoleKind(); k != sequencer.VoltageSource && k != sequencer.CurrentSource && k != sequencer.VoltMeter {
			continue
		}
		desc := in.Role
		if id := strings.TrimSpace(said(in.Identity.Maker) + " " + said(in.Identity.Model)); id != "" {
			desc += ", " + id
		}
		if sn := said(in.Identity.Serial); sn != "" {
			desc += " s/n " + sn
		}
		name := in.Asset
		if name == "" {
			name = "an instrument without asset number"
		}
		switch {
		case in.CalDue == "":
			desc += ", no calibration due date on record"
			gaps = append(gaps, name+" has no calibration due date on record")
		case d.overdue(in):
			desc += ", calibration was due " + in.CalDue
			gaps = append(gaps, name+" was past its calibration due date ("+in.CalDue+") when the unit was tested")
		default:
			desc += ", cal. due " + in.CalDue
		}
		if in.CalCertificate != "" {
			desc += ", calibration certificate " + in.CalCertificate
			if in.CalLab != "" {
				desc += " of " + in.CalLab
			}
		}
		refs = append(refs, name+" ("+desc+")")
	}
	if len(refs) == 0 {
		return "No reference instrument (source or meter) is recorded for this run, so traceability of the results is not established."
	}
	s := "The results are traceable to the SI through the reference instruments " + joinAnd(refs) +
		"; each is calibrated against standards that are themselves traceable to national measurement standards."
	if len(gaps) > 0 {
		s += " Traceability is not assured for this run: " + joinAnd(gaps) + "."
	}
	return s
}

// specsApplied says how the reference instruments' specs were applied at the
// run's ambient: assumed to hold (no ambient recorded; the band named),
// applied as written (the ambient within every band), or widened by their
// tempco (the ambient outside a band; by how much). "" when the record names
// no band for any reference instrument.
func (d *doc) specsApplied() string {
	var bands, widened []string
	for _, in := range d.rec.Instruments {
		if in.SpecBand == nil {
			continue
		}
		bands = append(bands, in.Role+" "+fmtBand(*in.SpecBand))
		if in.AccuracyAtAmbient != "" {
			widened = append(widened, "the "+in.Role+"'s (band "+fmtBand(*in.SpecBand)+", "+fmtC(in.OutsideBandC)+" outside it) by "+
				strings.TrimSuffix(in.Tempco, " per °C")+" per °C × "+fmtC(in.OutsideBandC)+", to "+in.AccuracyAtAmbient)
		}
	}
	if len(bands) == 0 {
		return ""
	}
	c, ok := d.rec.Conditions.Ambient()
	amb := pdfdoc.Minus(strconv.FormatFloat(c, 'f', 1, 64)) + " °C" // as the conditions line prints it
	switch {
	case !ok:
		return "The ambient temperature was not recorded, so the specifications were assumed to hold: they hold only within their temperature bands (" +
			joinAnd(bands) + "). Enter the ambient (--ambient) to have them checked and widened outside the band."
	case len(widened) == 0:
		return "The ambient temperature " + amb + " lay within the temperature band of every specification (" + joinAnd(bands) +
			"): the specifications were applied as written."
	}
	return "The ambient temperature " + amb + " lay outside the temperature band of a specification, so the uncertainties use that specification widened by its temperature coefficient for each degree outside the band: " +
		strings.Join(widened, "; ") + "."
}
