package certificate

import (
	"strings"
	"time"

	"trimline/reports/internal/pdfdoc"
	"trimline/sequencer"
)

// instrumentsUsed is the traceability table of the instruments.
func (d *doc) instrumentsUsed() {
	cols := []pdfdoc.Column{
		{Title: "Role", W: 15, Align: "L"},
		{Title: "Asset", W: 19, Align: "L"},
		{Title: "Identity", W: 44, Align: "L"},
		{Title: "Address", W: 42, Align: "L"},
		{Title: "Cal. due", W: 19, Align: "L"},
		{Title: "Accuracy", W: 41, Align: "L"},
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
		due := c1(dash(in.CalDue), pdfdoc.Body)
		if d.overdue(in) {
			due = pdfdoc.Cell{{Text: in.CalDue, St: pdfdoc.Bold.With(pdfdoc.Fail)}, {Text: "overdue at test", St: pdfdoc.Small.With(pdfdoc.Fail)}}
		}
		rows = append(rows, pdfdoc.Row{
			c1(dash(in.Role), pdfdoc.Bold),
			c1(dash(in.Asset), pdfdoc.Body),
			ident,
			c1(dash(in.Address), stMono.Sized(6.5)),
			due,
			accuracyCell(in.Accuracy),
		})
	}
	d.tableSection("Instruments used and traceability", cols, rows, nil)
	d.Y += 1.2
	d.fields([]para{{"Traceability", d.traceability()}})
}

// accuracyCell is the instrument's specs, one paragraph each (the record
// joins them with "; "), so a meter with a spec per range reads as a list.
func accuracyCell(text string) pdfdoc.Cell {
	var c pdfdoc.Cell
	for _, s := range strings.Split(dash(text), "; ") {
		c = append(c, pdfdoc.Span{Text: s, St: pdfdoc.Body})
	}
	return c
}

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
	return err == nil && !d.rec.Finished.IsZero() && d.rec.Finished.UTC().After(t.Add(24*time.Hour))
}

// traceability is the statement of metrological traceability through the reference
// instruments: the roles that bind a source or a meter, whatever the station
// names them.
func (d *doc) traceability() string {
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
