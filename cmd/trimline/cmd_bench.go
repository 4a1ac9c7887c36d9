package main

import (
	"context"
	"fmt"
	"os"
	"sort"
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
			data, err := st.Rewired(addrs, served(srv))
			if err != nil {
				return err
			}
			if err := os.WriteFile(*write, data, 0o644); err != nil {
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
	for _, s := range st.Specs(st.Roles()) {
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

// served is what srv's instruments ask of the station file that reaches them,
// per role (whatever the station names its roles).
func served(srv *serve.Server) sequencer.Served {
	settings, templates := srv.Wiring()
	return sequencer.Served{Settings: settings, Templates: templates}
}
