package main

import (
	"strings"
	"testing"
)

// The live line under a failed unit gives the operator's plain reason, not the
// decision rule's statement; --json keeps the statements in reasons and adds
// the plain words in operator_reasons.
func TestLiveLineSaysWhyInPlainWords(t *testing.T) {
	dir := t.TempDir()
	code, out, errOut := runCLI(t, "demo", "--out", dir, "--units", "9")
	if code != exitPass { // the demo shows failures; it does not fail
		t.Fatalf("demo of 9 units: exit %d\n%s%s", code, out, errOut)
	}
	if !strings.Contains(out, "BRX-00009    FAIL") || !strings.Contains(out, "↳ offset after trim is −12384 µV, limit ±800 µV (+1 more)") {
		t.Errorf("live line of BRX-00009:\n%s", out)
	}
	if strings.Contains(out, "w = ") || strings.Contains(out, "conditional") {
		t.Errorf("the live line uses the decision rule's words:\n%s", out)
	}
	station, sequence := dir+"/brx200-station.yaml", dir+"/brx200-sequence.yaml"
	code, out, errOut = runCLI(t, "run", "--json", "--retest", "--station", station, "--sequence", sequence, "--serial", "BRX-00009", "--out", dir)
	if code != exitFail {
		t.Fatalf("run --json: exit %d\n%s%s", code, out, errOut)
	}
	var u unitOut
	decodeStrict(t, strings.SplitN(out, "\n", 2)[0], &u)
	if len(u.OperatorReasons) != 2 || !strings.HasPrefix(u.OperatorReasons[0], "offset after trim is −") || !strings.HasSuffix(u.OperatorReasons[0], ", limit ±800 µV") ||
		len(u.Reasons) != 2 || !strings.Contains(u.Reasons[0], "by more than w = ") {
		t.Errorf("reasons %q, operator_reasons %q", u.Reasons, u.OperatorReasons)
	}
}
