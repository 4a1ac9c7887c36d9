package main

import (
	"regexp"
	"strings"
	"testing"

	"trimline/instruments/sim/serve"
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
	if !strings.Contains(out, "BRX-00009    FAIL") || !strings.Contains(out, "↳ offset after trim is −12.4 mV, limit ±0.8 mV (+1 more)") {
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
	if len(u.OperatorReasons) != 2 || !strings.HasPrefix(u.OperatorReasons[0], "offset after trim is −") || !strings.HasSuffix(u.OperatorReasons[0], " mV, limit ±0.8 mV") ||
		len(u.Reasons) != 2 || !strings.Contains(u.Reasons[0], "by more than w = ") {
		t.Errorf("reasons %q, operator_reasons %q", u.Reasons, u.OperatorReasons)
	}
}

// A station fault's live line says, under the message, which instrument failed
// and what to check, in the operator's words.
func TestLiveLineExplainsAFault(t *testing.T) {
	dir, station, sequence, srv := wire(t, "tcp", nil)
	if err := srv.SetFault("meter", serve.Fault{ErrorAfter: "READ?", ErrorEntry: `-230,"Data corrupt or stale"`}); err != nil {
		t.Fatal(err)
	}
	code, out, errOut := runCLI(t, "run", "--station", station, "--sequence", sequence, "--serial", "BRX-00001", "--out", dir)
	if code != exitStation || !strings.Contains(out, "FAULT") ||
		!regexp.MustCompile(`\n\s+↳ the meter \(DMM-0203 at tcp://[0-9.:]+\) reported an error; check its front panel for a message`).MatchString(out) {
		t.Errorf("exit %d, want 3 with the fault explained\n%s%s", code, out, errOut)
	}
}
