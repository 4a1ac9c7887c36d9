package certificate

import (
	"fmt"
	"math"
	"strconv"
	"strings"
	"testing"

	_ "trimline/instruments/sim" // the simulated bench, scheme sim://
	"trimline/limits"
	"trimline/sequencer"
	"trimline/sequences"
)

// demoRecords runs the demo's 25 BRX-200 units (seed 8, the files of
// sequences/) on the simulated bench, as `trimline demo` does.
func demoRecords(t *testing.T) []*sequencer.Record {
	t.Helper()
	p, err := sequences.Find(sequences.Default)
	if err != nil {
		t.Fatal(err)
	}
	return productRecords(t, p, 25)
}

// parse reads a number as the certificate writes it (real minus sign).
func parse(t *testing.T, s string) float64 {
	t.Helper()
	v, err := strconv.ParseFloat(strings.Replace(s, "−", "-", 1), 64)
	if err != nil {
		t.Fatalf("%q is not a number: %v", s, err)
	}
	return v
}

// One number, one rounding: on the demo's certificates every toleranced
// limit's value, U, acceptance limits, TUR and PFA are the same string in the
// results table and in the decision statement, U as the record states it (JCGM
// 100:2008 §7.2.6: two significant digits, rounded up), the value to U's decimal
// place, the acceptance limits computed from the printed U (ILAC-G8:09/2019
// §4.1: AL = TL ∓ r·U) and the TUR from it (ANSI/NCSL Z540.3-2006 §5.3).
func TestOneNumberPerQuantity(t *testing.T) {
	limitsSeen, noisy := 0, false
	for _, rec := range demoRecords(t) {
		d := &doc{rec: rec}
		outs := d.outcomesByStage()
		table := d.resultsTable()
		if len(table.rows) != len(outs) {
			t.Fatalf("%s: %d rows for %d outcomes", rec.Serial, len(table.rows), len(outs))
		}
		for i, o := range outs {
			dd := o.Decision
			if dd == nil || !hasU(dd.U) {
				continue
			}
			limitsSeen++
			if rec.Serial == "BRX-00022" && o.Name == "offset after trim" {
				noisy = true
			}
			o = d.shownOutcome(o)
			row := table.rows[i]
			unit := dispUnit(o.Unit)
			with := func(s string) string { return strings.TrimSpace(s + " " + unit) }
			where := fmt.Sprintf("%s limit %q", rec.Serial, o.Name)
			st := dd.Statement

			// U: the record's, stated; the statement's and the table's one string.
			U := dd.UText()
			if u := parse(t, U); math.Abs(u-dd.U) > 1e-9*dd.U {
				t.Errorf("%s: printed U %s, but the decision judged with U = %v (JCGM 100:2008 §7.2.6: the U stated is the U used)", where, U, dd.U)
			}
			valueU := with(dd.ValueText()) + " ± " + with(U)
			if got := cellText(row[1]); !strings.HasPrefix(got, valueU) {
				t.Errorf("%s: table shows %q, want %q", where, got, valueU)
			}
			if want := "measured " + with(dd.ValueText()) + " with U = " + with(U); !strings.Contains(st, want) {
				t.Errorf("%s: statement lacks %q:\n  %s", where, want, st)
			}
			// Acceptance limits from the printed U (ILAC-G8:09/2019 §4.1).
			if dd.Rule == limits.RuleGuarded {
				w := dd.GuardFactor * parse(t, U)
				for _, side := range []struct {
					al, tl *float64
					upper  bool
					sign   float64
				}{{dd.AcceptLower, dd.Lower, false, 1}, {dd.AcceptUpper, dd.Upper, true, -1}} {
					if side.al == nil {
						continue
					}
					text := dd.AcceptText(side.upper)
					if got, want := parse(t, text), *side.tl+side.sign*w; math.Abs(got-want) > 1e-9*math.Max(1, math.Abs(want)) {
						t.Errorf("%s: acceptance limit printed %s, want TL ∓ r·U = %v from the printed U %s (ILAC-G8:09/2019 §4.1)", where, text, want, U)
					}
					empty := dd.AcceptLower != nil && dd.AcceptUpper != nil && *dd.AcceptLower > *dd.AcceptUpper
					if empty && !strings.Contains(cellText(row[2]), "accept none") {
						t.Errorf("%s: table's acceptance %q: want none for a guard band wider than half the tolerance", where, cellText(row[2]))
					}
					if !empty && !strings.Contains(cellText(row[2]), text) {
						t.Errorf("%s: table's acceptance %q lacks %s", where, cellText(row[2]), text)
					}
					// (A guard band wider than half the tolerance leaves no acceptance
					// interval; the statement then says so instead of naming limits.)
					if (strings.Contains(st, "acceptance interval") || strings.Contains(st, "acceptance limit")) && !strings.Contains(st, text) &&
						!strings.Contains(st, "the acceptance interval is empty") {
						t.Errorf("%s: statement names the acceptance interval without %s:\n  %s", where, text, st)
					}
				}
				if want := "w = " + strconv.FormatFloat(dd.GuardFactor, 'f', -1, 64) + "·U = " + with(dd.GuardText()); !strings.Contains(st, want) {
					t.Errorf("%s: statement lacks %q:\n  %s", where, want, st)
				}
			}
			// TUR (ANSI/NCSL Z540.3-2006 §5.3), one rounding.
			if dd.Lower != nil && dd.Upper != nil {
				tur := dd.TURText()
				if got := strings.TrimSuffix(cellText(row[4]), " ¹"); got != tur {
					t.Errorf("%s: table TUR %q, statement's %q", where, got, tur)
				}
				if !strings.Contains(st, "TUR "+tur+" ") {
					t.Errorf("%s: statement lacks TUR %s:\n  %s", where, tur, st)
				}
			}
			// k and νeff: the table's line under the value and the statement
			// say the same (JCGM 100:2008 G.4.1, truncated; "νeff ≥ 1000" from
			// there on), and a Monte Carlo U names no νeff (JCGM 101:2008 §7.7).
			if _, sub, ok := strings.Cut(cellText(row[1]), " | "); ok {
				parts := strings.Split(sub, " · ")
				if !strings.Contains(st, "(k = "+strings.TrimPrefix(parts[0], "k = ")) {
					t.Errorf("%s: table's %q, statement's k differs:\n  %s", where, parts[0], st)
				}
				for _, p := range parts[1:] {
					if strings.HasPrefix(p, "νeff") && !strings.Contains(st, ", "+p+")") {
						t.Errorf("%s: table's %q is not the statement's:\n  %s", where, p, st)
					}
					if p == "MC" && strings.Contains(st, "νeff") {
						t.Errorf("%s: a Monte Carlo U, the statement names νeff:\n  %s", where, st)
					}
				}
			}
			// PFA, one format.
			pfa := dd.PFAText()
			if !strings.Contains(st, "outside the tolerance: "+pfa+".") {
				t.Errorf("%s: statement lacks PFA %s:\n  %s", where, pfa, st)
			}
			if accepted(dd) && cellText(row[5]) != pfa {
				t.Errorf("%s: table PFA %q, statement's %q", where, cellText(row[5]), pfa)
			}
			// The reasons above the table say the same numbers.
			if !o.Pass && o.Reason != "" && !strings.Contains(o.Reason, " = "+with(dd.ValueText())+" ") {
				t.Errorf("%s: reason %q does not write the value as %q", where, o.Reason, with(dd.ValueText()))
			}
		}
	}
	if limitsSeen == 0 || !noisy {
		t.Fatalf("checked %d limits (BRX-00022 offset after trim among them: %v): the demo judges toleranced limits with U", limitsSeen, noisy)
	}
}
