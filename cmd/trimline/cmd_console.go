package main

import (
	"context"
	"errors"
	"fmt"
	"net"
	"net/http"
	"time"

	"trimline/cmd/trimline/console"
	"trimline/cmd/trimline/internal/shift"
)

func newConsoleCmd() *command {
	c := &command{
		UsageLine: "trimline console --station FILE --sequence FILE [--listen ADDR] [--out DIR] [--bench tcp] [--ambient T] [--engineering]",
		Short:     "serve the operator's station screen for a shift (a local web console)",
		Long: `Opens the station for a shift and serves its operator screen on
http://127.0.0.1:8470/ (open it in the station PC's browser). Operators sign in by
name or badge and scan serials; each unit runs as ` + "`trimline run`" + ` runs it (same
engine, ledger, certificates and signatures), with its progress, its verdict in
plain words, retests confirmed on screen, a station fault locking the station until
it is cleared with a note, and the units held for review decided by a reviewer.

The console listens on loopback unless --listen names another address; then every
sign-in needs the person's passphrase (the station file's people) and sessions end
after 30 minutes idle. With --bench tcp the station's sim:// instruments are served
on loopback TCP in this process, on real time, as ` + "`trimline bench`" + ` serves them.
Runs until Ctrl-C.`,
	}
	station := c.Flag.String("station", "", "station `file` (what is on this bench)")
	sequence := c.Flag.String("sequence", "", "sequence `file` (how the product is trimmed)")
	listen := c.Flag.String("listen", console.DefaultListen, "`address` to serve on (beyond loopback: passphrases required)")
	out := c.Flag.String("out", "", "output `folder` (default: the station file's output.folder)")
	bench := c.Flag.String("bench", "", "serve the station's simulated bench over `tcp` in this process")
	ambient := c.Flag.String("ambient", "", "ambient `temperature` to record on every run, e.g. \"23.1 °C\"")
	engineering := c.Flag.Bool("engineering", false, "run files that were never released; certificates are marked ENGINEERING RUN — NOT FOR SHIPMENT and numbered apart")
	c.Run = func(ctx context.Context, e *env, args []string) error {
		if *station == "" || *sequence == "" {
			return usagef("need --station and --sequence")
		}
		if len(args) > 0 {
			return usagef("unexpected argument %q", args[0])
		}
		if *bench != "" && *bench != "tcp" {
			return usagef("--bench must be tcp")
		}
		if _, err := shift.ParseAmbient(*ambient); err != nil {
			return usagef("--ambient: %v", err)
		}
		srv, err := console.New(ctx, console.Options{StationPath: *station, SequencePath: *sequence, Out: *out, Listen: *listen,
			Bench: *bench, Ambient: *ambient, Engineering: *engineering, Log: e.stderr, Software: "trimline " + version()})
		if errors.Is(err, console.ErrNoPassphrase) {
			return badInput(err)
		}
		if err != nil {
			return err
		}
		defer srv.Close()
		ln, err := net.Listen("tcp", *listen)
		if err != nil {
			return err
		}
		hs := &http.Server{Handler: srv.Handler(), ReadHeaderTimeout: 10 * time.Second}
		fmt.Fprintf(e.stdout, "trimline console: http://%s/  (Ctrl-C stops)\n", ln.Addr())
		errc := make(chan error, 1)
		go func() { errc <- hs.Serve(ln) }()
		select {
		case err := <-errc:
			return err
		case <-ctx.Done():
		}
		// Ctrl-C: a running unit is stopped safely (ABORTED) by Close.
		sctx, cancel := context.WithTimeout(context.WithoutCancel(ctx), 2*time.Second)
		defer cancel()
		if err := srv.Close(); err != nil {
			fmt.Fprintln(e.stderr, "console:", err)
		}
		if err := hs.Shutdown(sctx); err != nil && !errors.Is(err, context.DeadlineExceeded) {
			return err
		}
		return nil
	}
	return c
}
