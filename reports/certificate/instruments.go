package certificate

import (
	"strings"
	"time"

	"trimline/sequencer"
)

// instrumentsUsed is the traceability table of the instruments.
func (d *doc) instrumentsUsed() {
	cols := []column{
		{title: "Role", w: 15, align: "L"},
		{title: "Asset", w: 19, align: "L"},
		{title: "Identity", w: 44, align: "L"},
		{title: "Address", w: 42, align: "L"},
		{title: "Cal. due", w: 19, align: "L"},
		{title: "Accuracy", w: 41, align: "L"},
	}
	var rows []row
	for _, in := range d.rec.Instruments {
		id := in.Identity
		id.Maker, id.Model, id.Serial, id.Firmware = said(id.Maker), said(id.Model), said(id.Serial), said(id.Firmware)
		name := strings.TrimSpace(id.Maker + " " + id.Model)
		if name == "" {
			name = "did not identify itself"
		}
		ident := cell{{name, stBody}}
		var sub []string
		if id.Serial != "" {
			sub = append(sub, "s/n "+id.Serial)
		}
		if id.Firmware != "" {
			sub = append(sub, "firmware "+id.Firmware)
		}
		if len(sub) > 0 {
			ident = append(ident, span{strings.Join(sub, " · "), stSmall})
		}
		due := c1(dash(in.CalDue), stBody)
		if d.overdue(in) {
			due = cell{{in.CalDue, stBold.with(colFail)}, {"overdue at test", stSmall.with(colFail)}}
		}
		rows = append(rows, row{
			c1(dash(in.Role), stBold),
			c1(dash(in.Asset), stBody),
			ident,
			c1(dash(in.Address), stMono.sized(6.5)),
			due,
			c1(dash(in.Accuracy), stBody),
		})
	}
	d.heading("Instruments used and traceability", keep(d.tableHeight(cols, rows)))
	d.table(cols, rows)
	d.y += 1.2
	d.fields([]para{{"Traceability", d.traceability()}})
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
// instruments (the source and the meter).
func (d *doc) traceability() string {
	var refs, gaps []string
	for _, in := range d.rec.Instruments {
		if in.Role != "source" && in.Role != "meter" {
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
