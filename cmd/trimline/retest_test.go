package main

import (
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"trimline/reports/ledger"
)

// A serial with a measured run is refused (exit 2, nothing recorded, no
// instrument opened) unless --retest is given; a retest links to the earlier run
// and supersedes its certificate, which audit verify then calls superseded (exit
// 1). Running a unit twice with --retest leaves exactly one current certificate.
// Engineering runs are counted among engineering runs only.
func TestRetestRefusedUnlessAsked(t *testing.T) {
	dir := t.TempDir()
	station, sequence := writeReleasedDemo(t, dir, 1)
	ledgerPath := filepath.Join(dir, "ledger.db")
	runs := func() []ledger.RunSummary {
		t.Helper()
		led, err := ledger.Open(context.Background(), ledgerPath)
		if err != nil {
			t.Fatal(err)
		}
		defer led.Close()
		rs, err := led.Runs(context.Background(), "")
		if err != nil {
			t.Fatal(err)
		}
		return rs
	}
	runArgs := func(extra ...string) []string {
		return append([]string{"run", "--station", station, "--sequence", sequence, "--out", dir}, extra...)
	}
	if code, out, errOut := runCLI(t, runArgs("--serial", "BRX-00001")...); code != exitPass || !strings.Contains(out, "TL1-000001") {
		t.Fatalf("first test: exit %d\n%s%s", code, out, errOut)
	}
	// Again without --retest, alone or in a batch, and twice in one batch: refused
	// before the station opens (an unreachable source would be a station fault).
	data, _ := os.ReadFile(station)
	unreachable := filepath.Join(dir, "unreachable.yaml")
	os.WriteFile(unreachable, []byte(strings.Replace(string(data), "address: sim://source", "address: tcp://127.0.0.1:1", 1)), 0o644)
	for _, c := range []struct {
		args []string
		want string
	}{
		{runArgs("--serial", "BRX-00001"), "serial BRX-00001 already has a recorded run"},
		{runArgs("--serial", "BRX-00002", "--serial", "BRX-00001"), "certificate TL1-000001"},
		{[]string{"run", "--station", unreachable, "--sequence", sequence, "--out", dir, "--serial", "BRX-00001"}, "give --retest"},
		{runArgs("--serial", "BRX-00003", "--serial", "BRX-00003"), "BRX-00003 is given twice in this batch"},
	} {
		code, out, errOut := runCLI(t, c.args...)
		if code != exitUsage || !strings.Contains(errOut, c.want) || strings.Contains(out, "FAULT") {
			t.Errorf("%v: exit %d, want 2 saying %q\n%s%s", c.args[len(c.args)-2:], code, c.want, out, errOut)
		}
	}
	if rs := runs(); len(rs) != 1 {
		t.Fatalf("refused runs were recorded: %+v", rs)
	}
	// Twice with --retest: each retest supersedes the certificate before it.
	for _, want := range []string{"TL1-000002", "TL1-000003"} {
		if code, out, errOut := runCLI(t, runArgs("--retest", "--serial", "BRX-00001")...); code != exitPass || !strings.Contains(out, want) {
			t.Fatalf("retest: exit %d, want %s\n%s%s", code, want, out, errOut)
		}
	}
	led, err := ledger.Open(context.Background(), ledgerPath)
	if err != nil {
		t.Fatal(err)
	}
	rs, _ := led.Runs(context.Background(), "BRX-00001")
	var current []string
	for _, r := range rs {
		st, err := led.CertificateStatus(context.Background(), r.Certificate)
		if err != nil {
			t.Fatal(err)
		}
		if st.Current() {
			current = append(current, r.Certificate)
		}
	}
	if len(rs) != 3 || len(current) != 1 || current[0] != "TL1-000003" {
		t.Errorf("BRX-00001: %d runs, current certificates %v; want 3 runs and only TL1-000003", len(rs), current)
	}
	newest, _ := led.Run(context.Background(), rs[0].RunID)
	if newest.RetestOf != rs[1].RunID {
		t.Errorf("the retest links to %q, want the run before it %q", newest.RetestOf, rs[1].RunID)
	}
	led.Close()
	cert := func(n string) string { return filepath.Join(dir, "certificates", n+"_BRX-00001.pdf") }
	if code, out, _ := runCLI(t, "audit", "verify", "--keys", filepath.Join(dir, "keys"), cert("TL1-000001")); code != exitFail || !strings.HasPrefix(out, "SUPERSEDED") || !strings.Contains(out, "superseded by TL1-000002") {
		t.Errorf("first certificate: exit %d\n%s", code, out)
	}
	// The same as JSON: the certificate, its serial and the one that replaced it.
	if code, out, _ := runCLI(t, "audit", "verify", "--json", "--keys", filepath.Join(dir, "keys"), cert("TL1-000001")); code != exitFail {
		t.Errorf("first certificate, JSON: exit %d\n%s", code, out)
	} else {
		var v verificationOut
		decodeStrict(t, out, &v)
		if v.Verdict != "SUPERSEDED" || v.Certificate != "TL1-000001" || v.Serial != "BRX-00001" || v.SupersededBy != "TL1-000002" || v.RunID != rs[2].RunID {
			t.Errorf("first certificate, JSON: %+v (run %s)", v, rs[2].RunID)
		}
	}
	if code, out, _ := runCLI(t, "audit", "verify", "--keys", filepath.Join(dir, "keys"), cert("TL1-000003")); code != exitPass || !strings.HasPrefix(out, "GENUINE") {
		t.Errorf("current certificate: exit %d\n%s", code, out)
	}
	if code, out, _ := runCLI(t, "audit", "ledger", "--ledger", ledgerPath, "--keys", filepath.Join(dir, "keys")); code != exitPass || !strings.Contains(out, "chain intact") {
		t.Errorf("audit ledger: exit %d\n%s", code, out)
	}
	// Engineering runs: the production tests do not count, an earlier engineering run does.
	if code, out, errOut := runCLI(t, runArgs("--engineering", "--serial", "BRX-00001")...); code != exitPass || !strings.Contains(out, "TL1-ENG-000001") {
		t.Fatalf("first engineering run: exit %d\n%s%s", code, out, errOut)
	}
	if code, _, errOut := runCLI(t, runArgs("--engineering", "--serial", "BRX-00001")...); code != exitUsage || !strings.Contains(errOut, "already has a recorded engineering run") {
		t.Errorf("second engineering run: exit %d\n%s", code, errOut)
	}
	if code, out, _ := runCLI(t, "audit", "verify", "--keys", filepath.Join(dir, "keys"), cert("TL1-000003")); code != exitPass {
		t.Errorf("an engineering run superseded the production certificate: exit %d\n%s", code, out)
	}
}

// A faulted or aborted run is no test: the serial runs again without --retest.
func TestFaultedRunIsNoTest(t *testing.T) {
	dir := t.TempDir()
	station, sequence := writeReleasedDemo(t, dir, 1)
	data, _ := os.ReadFile(station)
	small := filepath.Join(dir, "small-source.yaml")
	os.WriteFile(small, []byte(strings.Replace(string(data), "    address: sim://source ", "    settings: {range: 5 mV}\n    address: sim://source ", 1)), 0o644)
	if code, out, _ := runCLI(t, "run", "--station", small, "--sequence", sequence, "--serial", "BRX-00004", "--out", dir); code != exitStation {
		t.Fatalf("source fault: exit %d\n%s", code, out)
	}
	if code, out, errOut := runCLI(t, "run", "--station", station, "--sequence", sequence, "--serial", "BRX-00004", "--out", dir); code != exitPass {
		t.Errorf("after a fault: exit %d\n%s%s", code, out, errOut)
	}
}

// The demo refuses to run its units again into a folder that has them, unless
// --retest is given.
func TestDemoAgainNeedsRetest(t *testing.T) {
	dir := t.TempDir()
	if code, out, errOut := runCLI(t, "demo", "--out", dir, "--units", "2"); code != exitPass {
		t.Fatalf("demo: exit %d\n%s%s", code, out, errOut)
	}
	if code, _, errOut := runCLI(t, "demo", "--out", dir, "--units", "2"); code != exitUsage || !strings.Contains(errOut, "BRX-00002 already has a recorded run") {
		t.Errorf("demo again: exit %d\n%s", code, errOut)
	}
	if code, out, errOut := runCLI(t, "demo", "--out", dir, "--units", "2", "--retest"); code != exitPass || !strings.Contains(out, "TL1-000004") {
		t.Errorf("demo --retest: exit %d\n%s%s", code, out, errOut)
	}
}
