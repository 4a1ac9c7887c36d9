//go:build !windows

package main

import (
	"bytes"
	"context"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"trimline/reports/ledger"
	"trimline/reports/signing"
)

// Two stations, each with its own id, certificate prefix and key, run into one
// ledger at once, each as two processes that start one short batch after another:
// no start-up is refused because of the other station's runs in flight, and no
// certificate is published twice (one document, one issue entry each), with no
// "interrupted run" warning, since nothing was interrupted.
func TestTwoStationsShareOneLedger(t *testing.T) {
	if testing.Short() {
		t.Skip("200 units in 20 processes")
	}
	const (
		workers = 2  // processes of one station at a time
		batches = 5  // batches each worker runs, one after another
		units   = 10 // units per batch: 2 × 5 × 10 = 100 units a station
	)
	dir := t.TempDir()
	tl1, sequence := writeReleasedDemo(t, dir, 1)
	if _, _, err := signing.Init(filepath.Join(dir, "keys"), "TL2"); err != nil {
		t.Fatal(err)
	}
	data, err := os.ReadFile(tl1)
	if err != nil {
		t.Fatal(err)
	}
	r := strings.NewReplacer("id: TL1", "id: TL2", "certificate_prefix: TL1", "certificate_prefix: TL2",
		"keys/TL1.key", "keys/TL2.key", "trim station 1", "trim station 2")
	tl2 := filepath.Join(dir, "tl2-station.yaml")
	if err := os.WriteFile(tl2, []byte(r.Replace(string(data))), 0o644); err != nil {
		t.Fatal(err)
	}

	type result struct {
		station string
		code    int
		out     string
	}
	var (
		mu      sync.Mutex
		results []result
		wg      sync.WaitGroup
	)
	start := time.Now()
	for s, station := range []string{tl1, tl2} {
		for w := 0; w < workers; w++ {
			wg.Add(1)
			go func() {
				defer wg.Done()
				for b := 0; b < batches; b++ {
					args := []string{"run", "--station", station, "--sequence", sequence, "--out", dir}
					for u := 0; u < units; u++ {
						args = append(args, "--serial", fmt.Sprintf("BRX-%d%d%d%02d", s+1, w, b, u))
					}
					cmd := exec.Command(os.Args[0], "-test.run=^$")
					cmd.Env = append(os.Environ(), "TRIMLINE_AS_MAIN=1", "TRIMLINE_ARGS="+strings.Join(args, " "))
					var out bytes.Buffer
					cmd.Stdout, cmd.Stderr = &out, &out
					err := cmd.Run()
					code := 0
					if ee, ok := err.(*exec.ExitError); ok {
						code = ee.ExitCode()
					} else if err != nil {
						code = -1
					}
					mu.Lock()
					results = append(results, result{filepath.Base(station), code, out.String()})
					mu.Unlock()
				}
			}()
		}
	}
	wg.Wait()
	took := time.Since(start)

	refused, warned := 0, 0
	for _, r := range results {
		if r.code != 0 && r.code != exitFail {
			refused++
			t.Errorf("%s: start-up refused, exit %d\n%s", r.station, r.code, r.out)
		}
		if strings.Contains(r.out, "interrupted run") {
			warned++
			t.Errorf("%s: warns of an interrupted run that never happened\n%s", r.station, r.out)
		}
	}
	led, err := ledger.Open(context.Background(), filepath.Join(dir, "ledger.db"))
	if err != nil {
		t.Fatal(err)
	}
	defer led.Close()
	runs, err := led.Runs(context.Background(), "")
	if err != nil {
		t.Fatal(err)
	}
	perStation, certs, republished := map[string]int{}, 0, 0
	for _, run := range runs {
		perStation[run.Station]++
		if run.Certificate == "" {
			continue
		}
		certs++
		docs, err := led.DocumentsFor(context.Background(), run.Certificate)
		if err != nil {
			t.Fatal(err)
		}
		if len(docs) != 1 {
			republished += len(docs) - 1
			t.Errorf("%s has %d documents (issue entries), want 1", run.Certificate, len(docs))
		}
	}
	for _, st := range []string{"TL1", "TL2"} {
		if perStation[st] != workers*batches*units {
			t.Errorf("station %s: %d runs, want %d", st, perStation[st], workers*batches*units)
		}
	}
	rep, err := led.VerifyChain(context.Background(), "")
	if err != nil || !rep.OK {
		t.Errorf("chain: %+v %v", rep, err)
	}
	t.Logf("%d start-ups, %d units (TL1 %d, TL2 %d), %d certificates: %d refused start-ups, %d republished, %d false warnings, in %v",
		len(results), len(runs), perStation["TL1"], perStation["TL2"], certs, refused, republished, warned, took.Round(time.Millisecond))
}
