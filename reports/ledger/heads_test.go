package ledger_test

import (
	"bytes"
	"fmt"
	"strings"
	"testing"

	"trimline/reports/ledger"
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
