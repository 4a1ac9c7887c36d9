package certificate

import (
	"strings"

	"trimline/reports/internal/pdfdoc"
	"trimline/sequencer"
)

// steps lists the sequence's steps and what each did, when the record says one
// was skipped or not reached, so that a reader sees which measurements the
// certificate lacks and why. A run that did every step (or a record of schema 1,
// which has no steps) shows nothing.
func (d *doc) steps() {
	all := true
	for _, s := range d.rec.Steps {
		all = all && s.Status == sequencer.StepDone
	}
	if all {
		return
	}
	cols := []pdfdoc.Column{
		{Title: "Step", W: 40, Align: "L"},
		{Title: "Kind", W: 26, Align: "L"},
		{Title: "Stage", W: 22, Align: "L"},
		{Title: "What it did", W: 24, Align: "L"},
		{Title: "Why", W: 68, Align: "L", Gap: 4},
	}
	var rows []pdfdoc.Row
	for _, s := range d.rec.Steps {
		st := "—"
		if s.Stage != 0 {
			st = s.Stage.String()
		}
		status := c1(s.Status, pdfdoc.Body)
		if s.Status != sequencer.StepDone {
			status = c1(s.Status, pdfdoc.Bold.With(colCondFail))
		}
		rows = append(rows, pdfdoc.Row{c1(s.Name, pdfdoc.Bold), c1(s.Kind, pdfdoc.Body), c1(st, pdfdoc.Body), status, c1(stepNote(s), pdfdoc.Small)})
	}
	d.tableSection("Steps of the sequence: not every step was done", cols, rows, nil)
}

// stepNote is why a step was skipped, not reached or ended the run. Records
// made before the engine named the step that ended the run gave a step not
// reached the note left on the results ("not measured: trim saturated"), which
// says nothing of the step: it reads as the run having ended earlier.
func stepNote(s sequencer.StepRun) string {
	if s.Status == sequencer.StepNotReached {
		if why, ok := strings.CutPrefix(s.Note, "not measured:"); ok {
			if why = strings.TrimSpace(why); why != "" {
				return "the run ended earlier: " + why
			}
			return "the run ended earlier"
		}
	}
	return s.Note
}
