package certificate

import (
	"math"
	"strconv"
)

// trims is the table of trim codes written to the unit.
func (d *doc) trims() {
	cols := []column{
		{title: "Trim DAC", w: 30, align: "L"},
		{title: "Code before", w: 24, align: "R"},
		{title: "Ideal (unrounded)", w: 30, align: "R"},
		{title: "Written", w: 22, align: "R"},
		{title: "Read back", w: 24, align: "R"},
		{title: "Stored", w: 24, align: "C"},
		{title: "Saturated", w: 26, align: "C"},
	}
	var rows []row
	for _, t := range d.rec.Trims {
		ideal := "—"
		if !math.IsNaN(t.Ideal) && !math.IsInf(t.Ideal, 0) {
			ideal = strconv.FormatFloat(t.Ideal, 'f', 3, 64)
		}
		written := c1(strconv.Itoa(t.Code), stBold)
		rb := c1(strconv.Itoa(t.Readback), stBody)
		switch {
		case !t.Written && !t.Stored && t.Readback == 0:
			// The run stopped before the code was written (a saturated trim, no fit):
			// the unit still holds its code from before.
			written = cell{{"—", stBody}, {"not written", stSmall.with(colMuted)}}
			rb = c1("—", stBody)
		case t.Readback != t.Code:
			rb = cell{{strconv.Itoa(t.Readback), stBold.with(colFail)}, {"differs from written", stSmall.with(colFail)}}
		}
		sat := c1("no", stBody)
		if t.Saturated {
			sat = c1("yes", stBold.with(colFail))
		}
		rows = append(rows, row{
			c1(dash(t.DAC), stBold),
			c1(strconv.Itoa(t.Before), stBody),
			c1(ideal, stBody),
			written,
			rb,
			c1(yesNo(t.Stored), stBody),
			sat,
		})
	}
	d.heading("Trim codes written", keep(d.tableHeight(cols, rows)))
	d.table(cols, rows)
}
