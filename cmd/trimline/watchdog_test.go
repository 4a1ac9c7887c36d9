package main

import (
	"bytes"
	"os"
	"os/exec"
	"regexp"
	"testing"
	"time"

	"trimline/sequencer"
)

// kill -9 of a station in the middle of a sweep leaves the source driving the unit,
// since nothing is left to switch it off. With the source's output watchdog armed
// by the station file's templates, the source switches its own output off and
// programs 0 V once the watchdog's time has run out; the next start then opens the
// bench as usual (reset, output off, 0 V) and runs.
func TestKillNineLeavesTheOutputToTheWatchdog(t *testing.T) {
	if testing.Short() {
		t.Skip("subprocess kill")
	}
	dir, station, sequence, srv := wire(t, "tcp", nil)
	data, err := os.ReadFile(station)
	if err != nil {
		t.Fatal(err)
	}
	// The served station file arms the watchdog (serve.Templates, serve.Settings);
	// a shorter time keeps the test short.
	st, err := sequencer.LoadStation(station)
	if err != nil {
		t.Fatal(err)
	}
	if src := st.Instruments["source"]; src.Templates["arm_watchdog"] != "OUTP:WATC {seconds}" || src.Settings["watchdog"] != "5 s" {
		t.Fatalf("the served station file does not arm the watchdog:\n%s", data)
	}
	armed := regexp.MustCompile(`(?m)^(\s+watchdog: )"?5 s"?$`).ReplaceAllString(string(data), `${1}"1 s"`)
	if armed == string(data) {
		t.Fatalf("no watchdog time to shorten:\n%s", data)
	}
	if err := os.WriteFile(station, []byte(armed), 0o644); err != nil {
		t.Fatal(err)
	}
	cmd := exec.Command(os.Args[0], "-test.run=^$")
	cmd.Env = append(os.Environ(), "TRIMLINE_AS_MAIN=1",
		"TRIMLINE_ARGS=run --station "+station+" --sequence "+sequence+" --out "+dir+" --serial BRX-00001 --serial BRX-00002 --serial BRX-00003")
	var out bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &out
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	deadline := time.Now().Add(20 * time.Second)
	for on := false; !on; on, _ = srv.Bench().Source().State() {
		if time.Now().After(deadline) {
			cmd.Process.Kill()
			cmd.Wait()
			t.Fatalf("the source output never went on\n%s", out.String())
		}
		time.Sleep(time.Millisecond)
	}
	cmd.Process.Kill()
	cmd.Wait()
	if on, _ := srv.Bench().Source().State(); !on {
		t.Fatal("the output went off with the kill: nothing is left for the watchdog to do")
	}
	time.Sleep(1300 * time.Millisecond)
	if on, lvl := srv.Bench().Source().State(); on || lvl != 0 {
		t.Fatalf("1.3 s after kill -9: on=%v level=%g, want off at 0 V (watchdog 1 s)", on, lvl)
	}
	code, stdout, stderr := runCLI(t, "run", "--station", station, "--sequence", sequence, "--serial", "BRX-00004", "--out", dir)
	if code != exitPass {
		t.Fatalf("next start: exit %d\n%s%s", code, stdout, stderr)
	}
	if on, _ := srv.Bench().Source().State(); on {
		t.Error("source left on after the next start's run")
	}
	if armed, _, _ := srv.Bench().Source().Watchdog(); armed {
		t.Error("the watchdog is still armed after a run that ended")
	}
}
