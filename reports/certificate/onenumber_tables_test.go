package certificate

import (
	"context"
	"strings"
	"testing"

	"trimline/limits"
	"trimline/sequencer"
	"trimline/sequences"
)

// productRecords runs units 1..n of a demo product on the simulated bench, as
// `trimline demo --product NAME` does (the files of sequences/).
func productRecords(t *testing.T, p sequences.Product, n int) []*sequencer.Record {
	t.Helper()
	st, err := sequencer.LoadStation("../../sequences/" + p.Station)
	if err != nil {
		t.Fatal(err)
	}
	seq, err := sequencer.LoadSequence("../../sequences/" + p.Sequence)
	if err != nil {
		t.Fatal(err)
	}
	e, err := sequencer.Open(context.Background(), sequencer.Config{Station: st, Sequence: seq, Operator: "test", Software: "test"})
	if err != nil {
		t.Fatal(err)
	}
	defer e.Close()
	var recs []*sequencer.Record
	for i := 1; i <= n; i++ {
		recs = append(recs, e.Run(context.Background(), p.Serial(i)))
	}
	return recs
}

// One quantity, one number, in every table: a recorded result with a U is
// written as one string (value to U's decimal place, U rounded up to two
// significant digits, JCGM 100:2008 §7.2.6, in one unit) wherever the
// certificate prints it: the results table, the straight-line fits (its
// best-fit-line offset, gain error and nonlinearity, and the line at 0 in
// where the ideal offset is 0 and the line's value is the offset), the
// budget's headings, "Other results", the trim's effect and the station
// zero. The string each is held to is the results table's for a judged result
// (else "Other results"'), read off the tables themselves, not recomputed. On
// the demo's five products.
func TestOneNumberEveryTable(t *testing.T) {
	ps, err := sequences.Products()
	if err != nil {
		t.Fatal(err)
	}
	if len(ps) < 5 {
		t.Fatalf("%d demo products, want 5", len(ps))
	}
	places := 0
	for _, p := range ps {
		n := 4
		if p.Name == sequences.Default {
			n = 25 // BRX-00022 is the demo's noisy unit
		}
		m := 0
		for _, rec := range productRecords(t, p, n) {
			m += checkOneNumber(t, rec)
		}
		t.Logf("%s: %d units, %d second places of a result compared", p.Name, n, m)
		places += m
	}
	if places == 0 {
		t.Fatal("no result printed in a second table: nothing checked")
	}
}

// checkOneNumber checks one record's tables and returns how many second
// places of a result it compared.
func checkOneNumber(t *testing.T, rec *sequencer.Record) int {
	t.Helper()
	d := &doc{rec: rec}
	key := func(name, ch string) string { return limits.ChannelKey(name, ch) }
	// The reference: the results table's "value ± U" of each judged result,
	// then "Other results"' of each result no limit used.
	ref := map[string]string{}
	table := d.resultsTable()
	for i, o := range d.outcomesByStage() {
		dd := o.Decision
		if dd == nil || dd.Result == "" || !hasU(dd.U) || !finite(dd.Value) {
			continue
		}
		cell := cellText(table.rows[i][1])
		withU, _, _ := strings.Cut(cell, " | ") // the k, νeff line follows
		k := key(dd.Result, outcomeChannel(o))
		if prev, ok := ref[k]; ok && prev != withU {
			t.Errorf("%s %s: two limits write it as %q and %q", rec.Serial, k, prev, withU)
		}
		ref[k] = withU
	}
	_, oRows, _ := d.otherResults()
	for _, row := range oRows {
		name := cellText(row[0])
		for _, r := range rec.Results {
			if r.Name == name && cellText(row[2]) == d.shown(r).withU {
				if _, ok := ref[key(r.Name, r.Channel)]; ok {
					t.Errorf("%s %s: in the results table and in Other results", rec.Serial, name)
				}
				ref[key(r.Name, r.Channel)] = cellText(row[2])
			}
		}
	}
	n := 0
	same := func(where, k, got string, valueOnly bool) {
		t.Helper()
		want, ok := ref[k]
		if !ok {
			return
		}
		if valueOnly {
			want = valueOf(want)
		}
		n++
		if got != want {
			t.Errorf("%s %s: %s writes %q, the results table %q (JCGM 100:2008 §7.2.6: one quantity, one number)", rec.Serial, k, where, got, want)
		}
	}
	// Straight-line fits: gain error (col 3), line at 0 in (4), offset (5),
	// nonlinearity (7).
	_, fRows, _ := d.fits()
	for i, f := range d.fitsByStage() {
		for q, col := range map[string]int{"gain_error": 3, "offset": 5, "nonlinearity": 7} {
			if r, ok := resultOf(rec, f.Step, f.Channel, q); ok && f.Step != "" {
				same("the fits table ("+q+", fit "+f.Step+")", key(r.Name, r.Channel), cellText(fRows[i][col]), true)
				if q == "offset" && rec.IdealOffset == 0 {
					same("the fits table (line at 0 in, fit "+f.Step+")", key(r.Name, r.Channel), cellText(fRows[i][4]), true)
				}
			}
		}
	}
	// Budget headings: "name · stage[ · channel] · value ± U".
	_, _, bands, _ := d.budgets()
	for _, b := range bands {
		parts := strings.Split(b.Title, " · ")
		name, withU := parts[0], parts[len(parts)-1]
		ch := ""
		if len(parts) == 4 {
			ch = strings.TrimPrefix(parts[2], "channel ")
		}
		for _, r := range rec.Results {
			if r.Name == name && (r.Channel == ch || chanWord(r.Channel) == parts[min(2, len(parts)-1)]) {
				same("the budget's heading", key(r.Name, r.Channel), withU, false)
				break
			}
		}
	}
	// The trim's effect.
	_, tRows, _, _, _ := d.trimEffectTable()
	i := 0 // the rows are the effects whose result the record holds, by channel
	for _, te := range byChannel(d, rec.TrimEffects, func(t sequencer.TrimEffect) string { return t.Channel }) {
		if _, ok := d.resultIn(te.Result, te.Channel); !ok || i >= len(tRows) {
			continue
		}
		same("the trim's effect", key(te.Result, te.Channel), cellText(tRows[i][1]), false)
		i++
	}
	// The station zero: ô_s at the input.
	_, zRows := d.zeroTable()
	for i, z := range rec.Zeros {
		if r, ok := resultOf(rec, z.Name, z.Channel, "source_zero"); ok && i < len(zRows) {
			in, _, _ := strings.Cut(cellText(zRows[i][2]), " | ")
			same("the station zero", key(r.Name, r.Channel), in, false)
		}
	}
	return n
}

// resultOf is the valid result of quantity that step computed on channel ch.
func resultOf(rec *sequencer.Record, step, ch, quantity string) (sequencer.Result, bool) {
	for _, r := range rec.Results {
		if r.Step == step && r.Channel == ch && r.QuantityOf() == quantity && r.Valid && finite(r.Value) {
			return r, true
		}
	}
	return sequencer.Result{}, false
}
