package main

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"

	"trimline/instruments"
	"trimline/instruments/sim/serve"
	"trimline/sequencer"
)

func newBenchCmd() *command {
	c := &command{
		UsageLine: "trimline bench --station FILE [--transport tcp|serial] [--write FILE]",
		Short:     "serve the simulated bench as SCPI instruments over TCP or serial",
		Long: `Serves the simulated source and meter of the station file's sim:// instruments as
SCPI instruments, and the DUT fixture as its trim port, each on its own endpoint:
loopback TCP ports, or pseudo-terminals that behave as serial ports (Linux and
macOS). It prints the addresses to put in a station file and, with --write, writes
a copy of the station file that points at them, with the DUT's load_unit template
set so the fixture knows which serial is in it. Runs until Ctrl-C.

The served bench runs on real time: settle times and integration apertures really
elapse, as on a real bench.`,
	}
	station := c.Flag.String("station", "", "station `file` whose instruments are sim://")
	transport := c.Flag.String("transport", "tcp", "`transport`: tcp or serial")
	write := c.Flag.String("write", "", "write a station `file` that points at the served instruments")
	c.Run = func(ctx context.Context, e *env, args []string) error {
		if *station == "" || len(args) > 0 {
			return usagef("need --station and no arguments")
		}
		st, err := sequencer.LoadStation(*station)
		if err != nil {
			return badInput(err)
		}
		srv, err := serveStation(ctx, st, *transport, nil)
		if err != nil {
			return err
		}
		defer srv.Close()
		addrs := srv.Addresses()
		fmt.Fprintf(e.stdout, "serving the simulated bench of station %s over %s:\n", st.ID, *transport)
		roles := make([]string, 0, len(addrs))
		for r := range addrs {
			roles = append(roles, r)
		}
		sort.Strings(roles)
		for _, r := range roles {
			fmt.Fprintf(e.stdout, "  %-6s %s\n", r, addrs[r])
		}
		if *write != "" {
			if err := os.WriteFile(*write, servedStationYAML(st, addrs), 0o644); err != nil {
				return err
			}
			fmt.Fprintf(e.stdout, "station file for these addresses: %s\n", *write)
		}
		fmt.Fprintln(e.stdout, "Ctrl-C stops.")
		<-ctx.Done()
		return nil
	}
	return c
}

// serveStation serves the station's sim:// instruments.
func serveStation(ctx context.Context, st *sequencer.Station, transport string, faults map[string]serve.Fault) (*serve.Server, error) {
	var specs []instruments.Spec
	for _, s := range st.Specs(sequencer.Roles) {
		if !strings.HasPrefix(s.Address, "sim://") {
			return nil, usagef("%s: the %s is at %s; only sim:// instruments can be served", st.File.Name, s.Role, s.Address)
		}
		specs = append(specs, s)
	}
	srv, err := serve.Start(ctx, specs, serve.Options{Transport: transport, Faults: faults})
	if err != nil {
		return nil, fmt.Errorf("serve the simulated bench: %w", err)
	}
	return srv, nil
}

// servedStationYAML writes a station file equal to st but with each instrument at
// its served address, without the simulator's settings (the bench being served
// holds them), and with the fixture's load_unit template.
func servedStationYAML(st *sequencer.Station, addrs map[string]string) []byte {
	var b strings.Builder
	q := strconv.Quote
	fmt.Fprintf(&b, "# Station %s, served over the wire by `trimline bench` / `trimline demo --transport`.\n", st.ID)
	fmt.Fprintf(&b, "station:\n  id: %s\n  name: %s\n  certificate_prefix: %s\n", q(st.ID), q(st.Name+" (served simulator)"), q(st.CertificatePrefix))
	b.WriteString("instruments:\n")
	for _, r := range sequencer.Roles {
		in, ok := st.Instruments[r]
		if !ok {
			continue
		}
		fmt.Fprintf(&b, "  %s:\n    address: %s\n    asset: %s\n", r, q(addrs[r]), q(in.Asset))
		if !in.CalDue.IsZero() {
			fmt.Fprintf(&b, "    cal_due: %s\n", in.CalDue.Format("2006-01-02"))
		}
		if a := in.Accuracy; a != (sequencer.Accuracy{}) {
			fmt.Fprintf(&b, "    accuracy:\n      of_reading: %.9g ppm\n      of_range: %.9g ppm\n      range: %.9g V\n", a.OfReading*1e6, a.OfRange*1e6, a.Range)
			if a.Resolution > 0 {
				fmt.Fprintf(&b, "      resolution: %.9g V\n", a.Resolution)
			}
		}
		if r == "dut" {
			b.WriteString("    templates:\n      load_unit: \"FIXTURE LOAD {serial}\"\n")
		}
	}
	fmt.Fprintf(&b, "safety:\n  max_source_voltage: %g V\n  max_source_current: %g A\n", st.MaxSourceVolts, st.MaxSourceAmps)
	if st.Interlock != nil {
		fmt.Fprintf(&b, "interlock:\n  role: %s\n  query: %s\n  closed: %s\n", st.Interlock.Role, q(st.Interlock.Query), q(st.Interlock.Closed))
	}
	if st.OutputFolder != "" {
		// The folder was resolved against the original file; keep it absolute so
		// the copy writes to the same place wherever it lives.
		if abs, err := filepath.Abs(st.OutputFolder); err == nil {
			fmt.Fprintf(&b, "output:\n  folder: %s\n", q(filepath.ToSlash(abs)))
		}
	}
	return []byte(b.String())
}
