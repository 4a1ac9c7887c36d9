package main

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"trimline/reports/ledger"
	"trimline/reports/signing"
	"trimline/sequencer"
)

// writeHeldDemo writes the demo files into dir with the upper tolerance of
// "offset after trim" at 20 µV, releases them, and runs serials: a good unit's
// trimmed offset (a few µV, U ≈ 0.1 mV) lies inside that tolerance but within
// w of it, a conditional pass, which the demo's policy (conditional_pass:
// review) holds for REVIEW. It returns the station and sequence files.
func writeHeldDemo(t *testing.T, dir string, serials ...string) (station, sequence string) {
	t.Helper()
	station, sequence, err := writeDemoFiles(dir, 8, time.Now())
	if err != nil {
		t.Fatal(err)
	}
	limitsPath := filepath.Join(dir, "brx200-limits.yaml")
	data, err := os.ReadFile(limitsPath)
	if err != nil {
		t.Fatal(err)
	}
	const tol = "uses: [post_offset]\n    tolerance: {lower: -800, upper: 800}"
	if !bytes.Contains(data, []byte(tol)) {
		t.Fatal("the demo limit file no longer has the offset-after-trim tolerance this test narrows")
	}
	data = bytes.Replace(data, []byte(tol), []byte("uses: [post_offset]\n    tolerance: {lower: -800, upper: 20}"), 1)
	if err := os.WriteFile(limitsPath, data, 0o644); err != nil {
		t.Fatal(err)
	}
	var out bytes.Buffer
	if err := releaseDemo(context.Background(), &env{stdout: &out, stderr: &out}, dir); err != nil {
		t.Fatal(err)
	}
	args := []string{"run", "--station", station, "--sequence", sequence, "--out", dir, "--operator", "Otto Benchley"}
	for _, sn := range serials {
		args = append(args, "--serial", sn)
	}
	if code, out, errOut := runCLI(t, args...); code != exitFail || strings.Count(out, " REVIEW ") != len(serials) {
		t.Fatalf("run: exit %d, want 1 with every unit REVIEW\n%s%s", code, out, errOut)
	}
	return station, sequence
}

// trimline review list shows the units held for REVIEW; a decision recorded
// (as review accept records it, the station's people given) reissues the
// certificate, which audit verify calls genuine and accepted on review, the
// REVIEW certificate superseded; the decision replays exactly; what is not a
// decision, a person who may not review and a certificate already decided are
// refused (exit 2) with nothing recorded.
func TestReviewCommands(t *testing.T) {
	ctx := context.Background()
	dir := t.TempDir()
	station, sequence := writeHeldDemo(t, dir, "BRX-00001", "BRX-00002")
	code, out, errOut := runCLI(t, "review", "list", "--station", station, "--out", dir)
	words := strings.Join(strings.Fields(out), " ")
	if code != exitPass || !strings.Contains(out, "2 unit(s) of station TL1 held for review") ||
		!strings.Contains(words, "TL1-000001 BRX-00001 BRX-200") || !strings.Contains(words, "TL1-000002 BRX-00002 BRX-200") ||
		!strings.Contains(out, `limit "offset after trim"`) {
		t.Fatalf("review list: exit %d\n%s%s", code, out, errOut)
	}

	// Refused before anything is recorded: someone the station file does not
	// list, someone it lists without the review right, no reason.
	accept := func(extra ...string) []string {
		return append([]string{"review", "accept", "TL1-000001", "--station", station, "--sequence", sequence, "--out", dir}, extra...)
	}
	for _, c := range []struct {
		args []string
		says string
	}{
		{accept("--reviewer", "Mallory", "--reason", "offset rechecked"), `lists nobody named "Mallory"`},
		{accept("--reviewer", "B-1042", "--reason", "offset rechecked"), "Ada Quillfeather may not decide on units held for REVIEW"},
		{accept("--reviewer", "Tobias Wrenhollow"), "usage: trimline review accept CERT"},
	} {
		if code, out, errOut := runCLI(t, c.args...); code != exitUsage || !strings.Contains(errOut, c.says) {
			t.Errorf("%v: exit %d, want 2 saying %q\n%s%s", c.args[1:3], code, c.says, out, errOut)
		}
	}

	// With people set here directly (the demo's people are used as the file
	// lists them by TestReviewAcceptFromStationPeople).
	st, seq, err := loadFiles(ctx, station, sequence)
	if err != nil {
		t.Fatal(err)
	}
	priv, pub, err := signing.Init(filepath.Join(dir, "people"), "ada")
	if err != nil {
		t.Fatal(err)
	}
	key, err := signing.Load(priv)
	if err != nil {
		t.Fatal(err)
	}
	st.People = []sequencer.Person{
		{Name: "Otto Benchley", Badge: "B-2001", May: []string{sequencer.RightOperate}},
		{Name: "Ada Quillfeather", Badge: "B-1042", May: []string{sequencer.RightOperate, sequencer.RightReview}, Key: pub},
	}
	f := &reviewFlags{station: station, sequence: sequence, out: dir}
	var o bytes.Buffer
	e := &env{stdout: &o, stderr: &o}
	d := sequencer.Disposition{Decision: sequencer.DecisionAccept, Reviewer: "B-2001", Reason: "offset rechecked on the bench meter"}
	if err := decide(ctx, e, f, st, seq, "TL1-000001", d, nil); exitCode(err) != exitUsage || !strings.Contains(err.Error(), "Otto Benchley may not decide") {
		t.Fatalf("an operator's decision: %v", err)
	}
	d.Reviewer = "B-1042"
	if err := decide(ctx, e, f, st, seq, "TL1-000009", d, key); exitCode(err) != exitUsage || !strings.Contains(err.Error(), "no certificate with that number") {
		t.Fatalf("a decision on a certificate the ledger does not know: %v", err)
	}
	if err := decide(ctx, e, f, st, seq, "TL1-000001", d, key); err != nil {
		t.Fatalf("accept: %v\n%s", err, o.String())
	}
	for _, want := range []string{"TL1-000001 BRX-00001: accepted on review by Ada Quillfeather (key " + key.ID() + "): offset rechecked on the bench meter",
		"certificate TL1-000003 (PASS) issued; it supersedes TL1-000001", "TL1-000003_BRX-00001.pdf"} {
		if !strings.Contains(o.String(), want) {
			t.Errorf("accept says\n%s\nwant %q", o.String(), want)
		}
	}
	if err := decide(ctx, e, f, st, seq, "TL1-000001", d, key); exitCode(err) != exitUsage || !strings.Contains(err.Error(), "superseded by TL1-000003") {
		t.Errorf("the same unit decided twice: %v", err)
	}
	d = sequencer.Disposition{Decision: sequencer.DecisionReject, Reviewer: "Ada Quillfeather", Reason: "too near the limit for this order", Authenticated: "named on the command line"}
	if err := decide(ctx, e, f, st, seq, "TL1-000002", d, nil); err != nil {
		t.Fatalf("reject: %v", err)
	}
	if code, out, _ := runCLI(t, "review", "list", "--station", station, "--out", dir); code != exitPass || !strings.Contains(out, "no unit of station TL1 is held for review") {
		t.Errorf("review list after both decisions: exit %d\n%s", code, out)
	}

	keys := filepath.Join(dir, "keys")
	verify := func(cert string) (int, string) {
		t.Helper()
		matches, _ := filepath.Glob(filepath.Join(dir, "certificates", cert+"_*.pdf"))
		if len(matches) != 1 {
			t.Fatalf("%s: %d PDFs", cert, len(matches))
		}
		code, out, _ := runCLI(t, "audit", "verify", matches[0], "--keys", keys)
		return code, out
	}
	if code, out := verify("TL1-000003"); code != exitPass || !strings.Contains(out, "GENUINE") ||
		!strings.Contains(out, "accepted on review by Ada Quillfeather") || !strings.Contains(out, "signature in audit trail entry") {
		t.Errorf("verify the accepted unit's certificate: exit %d\n%s", code, out)
	}
	if code, out := verify("TL1-000001"); code != exitFail || !strings.Contains(out, "SUPERSEDED") ||
		!strings.Contains(out, "superseded by TL1-000003: serial BRX-00001 held for REVIEW, was accepted on review by Ada Quillfeather") {
		t.Errorf("verify the REVIEW certificate: exit %d\n%s", code, out)
	}
	if code, out := verify("TL1-000004"); code != exitPass || !strings.Contains(out, "rejected on review by Ada Quillfeather") ||
		!strings.Contains(out, "named on the command line") || !strings.Contains(out, "unsigned by the reviewer") {
		t.Errorf("verify the rejected unit's certificate: exit %d\n%s", code, out)
	}
	for _, sn := range []string{"BRX-00001", "BRX-00002"} {
		code, out, errOut := runCLI(t, "audit", "replay", sn, "--keys", keys, "--ledger", filepath.Join(dir, "ledger.db"))
		if code != exitPass || strings.Count(out, "reproduced exactly") != 2 || !strings.Contains(out, "on review by Ada Quillfeather, held as TL1-00000") {
			t.Errorf("replay %s: exit %d\n%s%s", sn, code, out, errOut)
		}
	}
	if code, out, errOut := runCLI(t, "audit", "ledger", "--keys", keys, "--ledger", filepath.Join(dir, "ledger.db")); code != exitPass {
		t.Errorf("audit ledger after the decisions: exit %d\n%s%s", code, out, errOut)
	}
	led, err := ledger.Open(ctx, filepath.Join(dir, "ledger.db"))
	if err != nil {
		t.Fatal(err)
	}
	defer led.Close()
	if e, ok, err := led.ReviewDecision(ctx, "TL1-000002"); err != nil || !ok || e.Reviewer != "Ada Quillfeather" || e.Certificate != "TL1-000004" {
		t.Errorf("the reject's audit entry: %+v %v %v", e, ok, err)
	}
}

// review accept as a reviewer runs it, with the demo station file's people: a
// reviewer (Tobias Wrenhollow, badge B-2077, may: [operate, review], key:
// keys/people/tobias-wrenhollow.pub, which the demo makes) signs the decision
// with --key; a key that is not theirs and a person without the review right
// are refused; a unit decided once is not decided again.
func TestReviewAcceptFromStationPeople(t *testing.T) {
	dir := t.TempDir()
	station, sequence := writeHeldDemo(t, dir, "BRX-00001")
	st, err := sequencer.LoadStation(station)
	if err != nil {
		t.Fatal(err)
	}
	if p, ok := st.Person("B-2077"); !ok || p.Name != "Tobias Wrenhollow" || !p.Can(sequencer.RightReview) {
		t.Fatalf("the demo station's reviewer: %+v %v", p, ok)
	}
	tobias := filepath.Join(dir, "keys", "people", "tobias-wrenhollow.key")
	accept := func(extra ...string) []string {
		return append([]string{"review", "accept", "TL1-000001", "--station", station, "--sequence", sequence, "--out", dir,
			"--reason", "offset rechecked on the bench meter"}, extra...)
	}
	for _, c := range []struct {
		args []string
		says string
	}{
		{accept("--reviewer", "B-1042", "--key", tobias), "Ada Quillfeather may not decide"},
		{accept("--reviewer", "B-2077", "--key", filepath.Join(dir, "keys", "TL1.key")), "is not Tobias Wrenhollow's"},
	} {
		if code, out, errOut := runCLI(t, c.args...); code != exitUsage || !strings.Contains(errOut, c.says) {
			t.Errorf("%v: exit %d, want 2 saying %q\n%s%s", c.args[len(c.args)-4:], code, c.says, out, errOut)
		}
	}
	code, out, errOut := runCLI(t, accept("--reviewer", "B-2077", "--key", tobias)...)
	if code != exitPass || !strings.Contains(out, "accepted on review by Tobias Wrenhollow (key ed25519:") ||
		!strings.Contains(out, "certificate TL1-000002 (PASS) issued; it supersedes TL1-000001") {
		t.Fatalf("accept: exit %d\n%s%s", code, out, errOut)
	}
	code, out, errOut = runCLI(t, "review", "reject", "TL1-000002", "--station", station, "--sequence", sequence, "--out", dir,
		"--reason", "second thoughts", "--reviewer", "Tobias Wrenhollow")
	if code != exitUsage || !strings.Contains(errOut, "PASS (accepted on review by Tobias Wrenhollow), not held for REVIEW") {
		t.Errorf("a decided unit decided again: exit %d\n%s%s", code, out, errOut)
	}
	// A unit retested after the decision is refused without --retest, naming
	// the decision's certificate.
	code, out, errOut = runCLI(t, "run", "--station", station, "--sequence", sequence, "--out", dir, "--serial", "BRX-00001")
	if code != exitUsage || !strings.Contains(errOut, "certificate TL1-000002") {
		t.Errorf("a run of the decided unit: exit %d\n%s%s", code, out, errOut)
	}
}
