package ledger_test

import (
	"bytes"
	"errors"
	"fmt"
	"strings"
	"testing"

	"trimline/reports/ledger"
	"trimline/reports/ledger/ledgertest"
	"trimline/sequencer"
)

// recordRuns stores runs first … first+n-1 of two stations in l.
func recordRuns(t *testing.T, l *ledger.Ledger, first, n int, tag string) {
	t.Helper()
	for i := first; i < first+n; i++ {
		rec := makeRecord(fmt.Sprintf("%s-%d", tag, i), fmt.Sprintf("SN-%s-%d", tag, i), sequencer.Pass, smallShape)
		rec.Station = []string{"EOL-A", "EOL B"}[i%2]
		mustRecord(t, l, rec, "TL1")
	}
}

func savedHeads(t *testing.T, l *ledger.Ledger) []ledger.Head {
	t.Helper()
	rep, err := l.VerifyChain(ctx, "")
	if err != nil || !rep.OK {
		t.Fatalf("VerifyChain: %+v %v", rep, err)
	}
	var buf bytes.Buffer
	if err := ledger.FormatHeads(&buf, rep.HeadList()); err != nil {
		t.Fatal(err)
	}
	heads, err := ledger.ParseHeads(&buf)
	if err != nil {
		t.Fatalf("ParseHeads of\n%s: %v", buf.String(), err)
	}
	if len(heads) != 3 || heads[0].Station != "EOL B" || heads[1].Station != "EOL-A" || heads[2].Station != "" ||
		heads[0].Seq != rep.HeadSeqs["EOL B"] || heads[2].Seq != int64(rep.AuditEntries) || heads[2].Hash != rep.AuditHead {
		t.Fatalf("heads read back: %+v from %+v", heads, rep)
	}
	return heads
}

// Heads saved from a ledger are all found in it after it grew; a ledger rebuilt
// from scratch with the same stations and as many runs or more has none of them,
// and each is reported with its chain.
func TestCheckHeads(t *testing.T) {
	l, _ := openLedger(t)
	recordRuns(t, l, 0, 4, "a")
	heads := savedHeads(t, l)

	recordRuns(t, l, 4, 3, "a") // the ledger grows
	got, err := l.CheckHeads(ctx, heads)
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range got {
		if !c.Found || c.Why != "" || c.Now < c.Seq {
			t.Errorf("%s after the ledger grew: %+v", c.Chain(), c)
		}
	}

	rebuilt, _ := openLedger(t)
	recordRuns(t, rebuilt, 0, 7, "b") // same stations, new chains
	got, err = rebuilt.CheckHeads(ctx, heads)
	if err != nil {
		t.Fatal(err)
	}
	for i, c := range got {
		if c.Found || !strings.HasPrefix(c.Why, heads[i].Chain()+": ") || !strings.Contains(c.Why, "rebuilt or rewritten") {
			t.Errorf("%s in a rebuilt ledger: %+v", heads[i].Chain(), c)
		}
	}

	short, _ := openLedger(t)
	recordRuns(t, short, 0, 2, "a") // the first runs again, fewer of them
	got, err = short.CheckHeads(ctx, heads)
	if err != nil {
		t.Fatal(err)
	}
	if got[0].Found || !strings.Contains(got[0].Why, "cut back or rebuilt") {
		t.Errorf("a shorter chain: %+v", got[0])
	}
	empty, _ := openLedger(t)
	got, err = empty.CheckHeads(ctx, heads)
	if err != nil || got[1].Found || !strings.Contains(got[1].Why, "station EOL-A: the ledger has no such chain") {
		t.Errorf("an empty ledger: %+v %v", got, err)
	}
}

func TestParseHeadsRefusesWhatItCannotRead(t *testing.T) {
	h := strings.Repeat("ab", 32)
	for _, text := range []string{
		"",
		"# only a comment\n",
		h + " 3\n",
		strings.ToUpper(h) + " 3 station A\n",
		h + " 0 station A\n",
		h + " x station A\n",
		h + " 3 stations A\n",
		h + " 3 station \n",
		h + " 3 station A\n" + h + " 4 station A\n",
	} {
		if heads, err := ledger.ParseHeads(strings.NewReader(text)); err == nil {
			t.Errorf("ParseHeads(%q) = %+v, want an error", text, heads)
		}
	}
	heads, err := ledger.ParseHeads(strings.NewReader("\r\n# c\r\n" + h + " 3 station EOL 2\r\n" + h + " 9 audit trail\r\n"))
	if err != nil || len(heads) != 2 || heads[0].Station != "EOL 2" || heads[0].Seq != 3 || heads[1].Station != "" || heads[1].Seq != 9 {
		t.Errorf("CRLF heads file: %+v %v", heads, err)
	}
}

// VerifyChain with Since checks only the runs after the saved heads and trusts
// the ones before; a changed row of a later run is found, one of an earlier run
// is not looked at; a head that is not on its chain breaks it; two heads of one
// chain are ErrInvalid.
func TestVerifyChainSince(t *testing.T) {
	l, path := openLedger(t)
	recordRuns(t, l, 0, 4, "a") // two runs of each station
	heads := savedHeads(t, l)
	recordRuns(t, l, 4, 3, "a") // two more of EOL-A, one of EOL B

	rep, err := l.VerifyChain(ctx, "", ledger.ChainOptions{Since: heads})
	if err != nil || !rep.OK || rep.Runs != 3 || rep.TrustedRuns != 4 || rep.Stations != 2 ||
		rep.HeadSeqs["EOL-A"] != 4 || rep.HeadSeqs["EOL B"] != 3 {
		t.Fatalf("since the saved heads: %+v %v", rep, err)
	}
	one, err := l.FindHead(ctx, heads[1].Hash)
	if err != nil || one != heads[1] {
		t.Fatalf("FindHead(%s) = %+v %v, want %+v", heads[1].Hash, one, err, heads[1])
	}
	if rep, err := l.VerifyChain(ctx, "", ledger.ChainOptions{Since: []ledger.Head{one}}); err != nil || !rep.OK || rep.Runs != 5 || rep.TrustedRuns != 2 {
		t.Fatalf("since the head of EOL-A alone: %+v %v", rep, err)
	}
	if _, err := l.FindHead(ctx, strings.Repeat("0", 64)); !errors.Is(err, ledger.ErrNotFound) {
		t.Errorf("FindHead of no head: %v, want ErrNotFound", err)
	}
	if _, err := l.VerifyChain(ctx, "", ledger.ChainOptions{Since: []ledger.Head{heads[0], heads[0]}}); !errors.Is(err, ledger.ErrInvalid) {
		t.Errorf("two heads of one chain: %v, want ErrInvalid", err)
	}

	for _, h := range []ledger.Head{
		{Station: "EOL-A", Seq: heads[1].Seq, Hash: heads[0].Hash}, // another chain's hash
		{Station: "EOL-A", Seq: 9, Hash: heads[1].Hash},            // beyond the chain
		{Station: "EOL-C", Seq: 1, Hash: heads[1].Hash},            // no such station
		{Seq: heads[2].Seq, Hash: heads[1].Hash},                   // not the trail's
	} {
		rep, err := l.VerifyChain(ctx, "", ledger.ChainOptions{Since: []ledger.Head{h}})
		if err != nil || rep.OK || !strings.Contains(rep.Reason, "is not on its chain") {
			t.Errorf("since %+v: %+v %v", h, rep, err)
		}
	}

	// A reading changed through SQL (the trigger dropped and put back): of a run
	// before the heads, it is not read with Since (the run is trusted through
	// them), but found without; of a run after them, it is found.
	edit := func(runID string) {
		t.Helper()
		if err := ledgertest.EditRow(path, "readings", "value_v = value_v + 1",
			"rowid = (SELECT min(rowid) FROM readings WHERE run_id = '"+runID+"')"); err != nil {
			t.Fatal(err)
		}
	}
	edit("a-1")
	if rep, err := l.VerifyChain(ctx, "", ledger.ChainOptions{Since: heads}); err != nil || !rep.OK {
		t.Fatalf("a changed reading of a trusted run, with Since: %+v %v", rep, err)
	}
	if rep, err := l.VerifyChain(ctx, ""); err != nil || rep.OK || rep.BrokenTable != "readings" || rep.BrokenAt != "a-1" {
		t.Fatalf("a changed reading of run a-1, without Since: %+v %v", rep, err)
	}
	edit("a-5")
	if rep, err := l.VerifyChain(ctx, "", ledger.ChainOptions{Since: heads}); err != nil || rep.OK || rep.BrokenTable != "readings" || rep.BrokenAt != "a-5" {
		t.Fatalf("a changed reading of run a-5, with Since: %+v %v", rep, err)
	}
}
