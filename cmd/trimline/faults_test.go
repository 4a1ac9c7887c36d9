package main

import (
	"context"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"
	"time"

	"trimline/instruments/sim/serve"
	"trimline/reports/ledger"
	"trimline/sequencer"
)

// wire starts the demo bench served over transport with the given faults and
// returns a station file pointing at it, a quick sequence (short settle, 2 readings
// per point, 0.1 PLC) and the server.
func wire(t *testing.T, transport string, faults map[string]serve.Fault) (dir, station, sequence string, srv *serve.Server) {
	t.Helper()
	dir = t.TempDir()
	simStation, sequence, err := writeDemoFiles(dir, 1, time.Now())
	if err != nil {
		t.Fatal(err)
	}
	seq, _ := os.ReadFile(sequence)
	quick := strings.NewReplacer("settle: 20 ms", "settle: 12 ms", "readings: 8", "readings: 2", "nplc: 1 ", "nplc: 0.1 ").Replace(string(seq))
	os.WriteFile(sequence, []byte(quick), 0o644)
	// The served station keeps the demo's require_release: release the quick files.
	var rel strings.Builder
	if err := releaseDemo(context.Background(), &env{stdout: &rel, stderr: &rel}, dir); err != nil {
		t.Fatal(err)
	}
	st, err := sequencer.LoadStation(simStation)
	if err != nil {
		t.Fatal(err)
	}
	srv, err = serveStation(context.Background(), st, transport, faults)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { srv.Close() })
	yaml, err := st.Rewired(srv.Addresses(), served(srv))
	if err != nil {
		t.Fatal(err)
	}
	// Short per-command timeouts so silent instruments are found quickly.
	yaml = []byte(strings.ReplaceAll(string(yaml), "    asset: ", "    timeout: 300 ms\n    asset: "))
	station = filepath.Join(dir, "served.yaml")
	if err := os.WriteFile(station, yaml, 0o644); err != nil {
		t.Fatal(err)
	}
	return dir, station, sequence, srv
}

func TestServedBenchPasses(t *testing.T) {
	transports := []string{"tcp"}
	if runtime.GOOS == "linux" || runtime.GOOS == "darwin" {
		transports = append(transports, "serial")
	}
	for _, tr := range transports {
		t.Run(tr, func(t *testing.T) {
			dir, station, sequence, srv := wire(t, tr, nil)
			code, out, errOut := runCLI(t, "run", "--station", station, "--sequence", sequence, "--serial", "BRX-00001", "--out", dir)
			if code != exitPass {
				t.Fatalf("exit %d\n%s\n%s", code, out, errOut)
			}
			if on, _ := srv.Bench().Source().State(); on {
				t.Error("source left on")
			}
		})
	}
}

// Every injected fault ends the unit as a station fault (exit code 3), never PASS:
// the source output is off afterwards, no certificate is issued, the ledger
// records the fault with the instrument's message and names that instrument
// (its role, asset and address: the record's fault detail), and the next unit
// runs once the fault is cleared.
func TestInjectedFaultsAreStationFaults(t *testing.T) {
	cases := []struct {
		name  string
		role  string
		fault serve.Fault
		want  string // in the recorded fault message
	}{
		{"reply delay beyond the timeout", "meter", serve.Fault{Delay: 600 * time.Millisecond}, "timeout"},
		{"no reply", "meter", serve.Fault{NoReply: true, NoReplyAfter: 12}, "timeout"},
		{"dropped link", "source", serve.Fault{DropAfter: 14}, "link"},
		{"garbled reply", "meter", serve.Fault{Garble: true, GarbleAt: 10}, "malformed"},
		{"truncated reply", "meter", serve.Fault{Truncate: true, GarbleAt: 10}, "malformed"},
		{"error-queue entry", "source", serve.Fault{ErrorAfter: "SOUR:VOLT", ErrorEntry: `-221,"Settings conflict"`}, "Settings conflict"},
		{"meter error raised by a reading", "meter", serve.Fault{ErrorAfter: "READ?", ErrorEntry: `-230,"Data corrupt or stale"`}, "Data corrupt or stale"},
		{"overload reading", "meter", serve.Fault{Overload: true}, "overload"},
		{"DUT read-back mismatch", "dut", serve.Fault{ReadbackMismatch: true}, "read back"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			dir, station, sequence, srv := wire(t, "tcp", nil)
			// Let the station open cleanly, then break the instrument.
			if err := srv.SetFault(c.role, c.fault); err != nil {
				t.Fatal(err)
			}
			code, out, errOut := runCLI(t, "run", "--station", station, "--sequence", sequence, "--serial", "BRX-00001", "--out", dir)
			if code != exitStation {
				t.Fatalf("exit %d, want 3\n%s\n%s", code, out, errOut)
			}
			if on, _ := srv.Bench().Source().State(); on {
				t.Error("source output left on after the fault")
			}
			led, err := ledger.Open(context.Background(), filepath.Join(dir, "ledger.db"))
			if err != nil {
				t.Fatal(err)
			}
			defer led.Close()
			runs, _ := led.Runs(context.Background(), "")
			if len(runs) != 1 || runs[0].Verdict != sequencer.Fault || runs[0].Certificate != "" {
				t.Fatalf("ledger %+v\n%s%s", runs, out, errOut)
			}
			rec, err := led.Run(context.Background(), runs[0].RunID)
			if err != nil || !strings.Contains(strings.ToLower(rec.Fault), strings.ToLower(c.want)) {
				t.Errorf("recorded fault %q, want it to mention %q (%v)", rec.Fault, c.want, err)
			}
			if d := rec.FaultDetail; d == nil || d.Role != c.role || d.Address != srv.Addresses()[c.role] || d.Asset == "" || d.Said == "" {
				t.Errorf("recorded fault detail %+v, want the %s at %s (fault %q)", d, c.role, srv.Addresses()[c.role], rec.Fault)
			} else {
				t.Logf("%s at %s said %q", d.Role, d.Address, d.Said)
			}
			if pdfs, _ := filepath.Glob(filepath.Join(dir, "certificates", "*.pdf")); len(pdfs) != 0 {
				t.Errorf("a certificate was issued for a faulted run: %v", pdfs)
			}
			// The operator clears the fault; the next unit runs.
			srv.SetFault(c.role, serve.Fault{})
			if code, out, errOut := runCLI(t, "run", "--station", station, "--sequence", sequence, "--serial", "BRX-00002", "--out", dir); code != exitPass {
				t.Errorf("after clearing: exit %d\n%s%s", code, out, errOut)
			}
		})
	}
}

// A station fault ends a batch: the units after the faulted one are not run
// (the one-off error-queue entry of the first unit's first reading would have
// let them pass: the station waits for a person all the same) but reported as
// not run, and the exit code is 3.
func TestBatchStopsAtAStationFault(t *testing.T) {
	dir, station, sequence, srv := wire(t, "tcp", nil)
	if err := srv.SetFault("meter", serve.Fault{ErrorAfter: "READ?", ErrorEntry: `-230,"Data corrupt or stale"`}); err != nil {
		t.Fatal(err)
	}
	code, out, errOut := runCLI(t, "run", "--station", station, "--sequence", sequence,
		"--serial", "BRX-00001", "--serial", "BRX-00002", "--serial", "BRX-00003", "--out", dir)
	if code != exitStation {
		t.Fatalf("exit %d, want 3\n%s\n%s", code, out, errOut)
	}
	if !strings.Contains(errOut, "stopped at the station fault of BRX-00001 (fix it, then run these): 2 unit(s) not run: BRX-00002 BRX-00003") {
		t.Errorf("stderr does not list the units not run:\n%s", errOut)
	}
	led, err := ledger.Open(context.Background(), filepath.Join(dir, "ledger.db"))
	if err != nil {
		t.Fatal(err)
	}
	defer led.Close()
	runs, _ := led.Runs(context.Background(), "")
	if len(runs) != 1 || runs[0].Serial != "BRX-00001" || runs[0].Verdict != sequencer.Fault {
		t.Fatalf("ledger %+v, want the one faulted run of BRX-00001", runs)
	}

	// For scripts: the faulted unit names the meter, the summary the units
	// the fault kept from running.
	srv.SetFault("meter", serve.Fault{ErrorAfter: "READ?", ErrorEntry: `-230,"Data corrupt or stale"`})
	code, out, errOut = runCLI(t, "run", "--station", station, "--sequence", sequence, "--json",
		"--serial", "BRX-00004", "--serial", "BRX-00005", "--out", dir)
	lines := jsonLines(t, out)
	if code != exitStation || len(lines) != 2 {
		t.Fatalf("exit %d, %d lines, want 3 and a unit and a summary\n%s\n%s", code, len(lines), out, errOut)
	}
	var u unitOut
	var sum summaryOut
	decodeStrict(t, lines[0], &u)
	decodeStrict(t, lines[1], &sum)
	if d := u.FaultDetail; u.Verdict != "FAULT" || d == nil || d.Role != "meter" || d.Address != srv.Addresses()["meter"] || !strings.Contains(d.Said, "Data corrupt or stale") {
		t.Errorf("unit %s %s: fault detail %+v", u.Serial, u.Verdict, u.FaultDetail)
	}
	if strings.Join(sum.Skipped, " ") != "BRX-00005" {
		t.Errorf("summary skipped %q, want BRX-00005", sum.Skipped)
	}
}
