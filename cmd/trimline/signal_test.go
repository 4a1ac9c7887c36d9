//go:build !windows

package main

import (
	"bytes"
	"context"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"

	"trimline/reports/ledger"
	"trimline/sequencer"
)

// TestMain lets a test re-run this binary as the trimline command itself.
func TestMain(m *testing.M) {
	if os.Getenv("TRIMLINE_AS_MAIN") == "1" {
		os.Args = append([]string{"trimline"}, strings.Fields(os.Getenv("TRIMLINE_ARGS"))...)
		main()
		return
	}
	os.Exit(m.Run())
}

// SIGINT or SIGTERM during a sweep: the output goes off, the run is recorded as
// aborted, and the process exits within 2 s with the station-fault code.
func TestSignalDuringSweep(t *testing.T) {
	for _, sig := range []syscall.Signal{syscall.SIGINT, syscall.SIGTERM} {
		t.Run(sig.String(), func(t *testing.T) {
			dir := t.TempDir()
			station, sequence := writeReleasedDemo(t, dir, 1)
			// Real time: every reading really takes its 20 ms aperture, so a unit
			// takes seconds and the signal lands mid-sweep.
			data, _ := os.ReadFile(station)
			os.WriteFile(station, bytes.Replace(data, []byte(`seed: "1"`), []byte(`seed: "1"
      time: real`), 1), 0o644)
			cmd := exec.Command(os.Args[0], "-test.run=^$")
			cmd.Env = append(os.Environ(), "TRIMLINE_AS_MAIN=1",
				"TRIMLINE_ARGS=run --station "+station+" --sequence "+sequence+" --serial BRX-00101 --serial BRX-00102 --out "+dir)
			var out bytes.Buffer
			cmd.Stdout, cmd.Stderr = &out, &out
			if err := cmd.Start(); err != nil {
				t.Fatal(err)
			}
			// The signal goes when the sweep has started: the log has its first
			// point. A fixed sleep let it land during start-up on a loaded machine.
			waitForLog(t, filepath.Join(dir, "trimline.log"), `"message":"point"`, 30*time.Second)
			sent := time.Now()
			cmd.Process.Signal(sig)
			err := cmd.Wait()
			took := time.Since(sent)
			if took > 2*time.Second {
				t.Errorf("exited %v after the signal, want < 2 s", took)
			}
			var ee *exec.ExitError
			if !errorsAs(err, &ee) || ee.ExitCode() != exitStation {
				t.Fatalf("exit %v, want %d\n%s", err, exitStation, out.String())
			}
			led, err := ledger.Open(context.Background(), filepath.Join(dir, "ledger.db"))
			if err != nil {
				t.Fatal(err)
			}
			defer led.Close()
			runs, err := led.Runs(context.Background(), "")
			if err != nil || len(runs) != 1 || runs[0].Verdict != sequencer.Aborted || runs[0].Certificate != "" {
				t.Fatalf("ledger: %+v %v\n%s", runs, err, out.String())
			}
			log, _ := os.ReadFile(filepath.Join(dir, "trimline.log"))
			if !bytes.Contains(log, []byte("source output off")) {
				t.Errorf("no record of the output going off in the log")
			}
		})
	}
}

// waitForLog waits until the log file at path holds want, for up to limit.
func waitForLog(t *testing.T, path, want string, limit time.Duration) {
	t.Helper()
	deadline := time.Now().Add(limit)
	for {
		if b, _ := os.ReadFile(path); bytes.Contains(b, []byte(want)) {
			return
		}
		if time.Now().After(deadline) {
			t.Fatalf("no %s in %s after %v", want, path, limit)
		}
		time.Sleep(10 * time.Millisecond)
	}
}
