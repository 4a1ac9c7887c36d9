package certificate

import (
	"strings"

	"trimline/reports/internal/pdfdoc"
	"trimline/sequencer"
)

// colSimulated marks a simulated run: a violet no verdict or zone uses.
var colSimulated = pdfdoc.Color{R: 118, G: 32, B: 150}

// simulated reports whether the record is of a run on a simulated bench.
func (d *doc) simulated() bool { return d.sim != nil }

// simulatedMark is the record's mark, or sequencer.SimulatedMark when the
// record gives none.
func (d *doc) simulatedMark() string {
	if m := strings.TrimSpace(d.sim.Mark); m != "" {
		return m
	}
	return sequencer.SimulatedMark
}

// simulatedBanner is page 1's block under the title: the mark, and in words
// what it means for every number and time on the certificate.
func (d *doc) simulatedBanner() {
	if !d.simulated() {
		return
	}
	d.Stripe(d.Y, 11, colSimulated)
	d.Cell(marginL, d.Y, contentW, 11, d.simulatedMark(), pdfdoc.Bold.Sized(18).With(pdfdoc.White), "C")
	d.Y += 11
	s := d.sim
	text := "This run was made on a simulated bench (" + joinAnd(s.Roles) + " " + map[bool]string{true: "is", false: "are"}[len(s.Roles) == 1] +
		" a simulation): every reading was computed by the simulator, so no value on this certificate is a measurement of a unit and nothing is traceable to the SI."
	if s.BenchClock {
		text += " Its times are simulated-bench times: the simulator's own clock, which runs ahead of the wall clock by every simulated wait."
	}
	st := pdfdoc.Bold.Sized(8).With(colSimulated)
	lines := d.Wrap(text, contentW-6, st)
	h := float64(len(lines))*st.LineH() + 2
	d.Box(marginL, d.Y, contentW, h, pdfdoc.Color{R: 246, G: 238, B: 250}, colSimulated, 0.4)
	for i, l := range lines {
		d.Cell(marginL+3, d.Y+1+float64(i)*st.LineH(), contentW-6, st.LineH(), l, st, "L")
	}
	d.Y += h + 3
}

// simulatedPage marks the current page of a simulated run: a violet band with
// the mark in the top margin and a violet frame round the page, outside the
// content, so the page reads as before but cannot pass for a real one. The
// mark is drawn, not watermarked across the text, so that the text a reader
// copies or extracts from the page stays in order. Called once per page after
// its content is laid out.
func (d *doc) simulatedPage() {
	if !d.simulated() {
		return
	}
	const edge, lw = 4.0, 1.6
	d.Frame(edge, edge, pdfdoc.PageW-2*edge, pdfdoc.PageH-2*edge, colSimulated, lw)
	d.FillRect(marginL, edge+lw/2, contentW, 7.5, colSimulated)
	d.Cell(marginL, edge+lw/2, contentW, 7.5, d.simulatedMark(), pdfdoc.Bold.Sized(12).With(pdfdoc.White), "C")
}

// benchTime reports whether the record's times are the simulated bench's own
// clock, which the certificate then labels "simulated-bench time".
func (d *doc) benchTime() bool {
	return d.simulated() && d.sim.BenchClock
}
