package main

import (
	"context"
	"crypto/tls"
	"errors"
	"fmt"
	"net"
	"net/http"
	"os"
	"time"

	"trimline/cmd/trimline/console"
	"trimline/cmd/trimline/internal/shift"
	"trimline/sequencer"
)

func newConsoleCmd() *command {
	c := &command{
		UsageLine: "trimline console --station FILE --sequence FILE [--listen ADDR --tls-cert FILE --tls-key FILE] [--out DIR] [--bench tcp] [--ambient T] [--lot ID] [--engineering]",
		Short:     "serve the operator's station screen for a shift (a local web console)",
		Long: `Opens the station for a shift and serves its operator screen on
http://127.0.0.1:8470/ (open it in the station PC's browser). Operators sign in by
name or badge (and their passphrase, where the station file's people give them
one) and scan serials; each unit runs as ` + "`trimline run`" + ` runs it (same engine,
ledger, certificates and signatures), with its progress, its verdict in plain
words, retests confirmed on screen, a station fault locking the station until it
is cleared with a note, and the units held for review decided by a reviewer.
Every unit records the production lot in force: --lot at the start, then the
lot the operator scans into the screen's Lot field (each change is in the
ledger's audit trail under the operator's name).

The console listens on loopback unless --listen names another address; then it
serves HTTPS only (--tls-cert and --tls-key; also usable on loopback), every
sign-in needs the person's passphrase, and sessions end after 30 minutes idle.
Sessions last 12 hours at most. With --bench tcp the station's sim://
instruments are served on loopback TCP in this process, on real time, as
` + "`trimline bench`" + ` serves them.
Runs until Ctrl-C.`,
	}
	station := c.Flag.String("station", "", "station `file` (what is on this bench)")
	sequence := c.Flag.String("sequence", "", "sequence `file` (how the product is trimmed)")
	listen := c.Flag.String("listen", console.DefaultListen, "`address` to serve on (beyond loopback: HTTPS and passphrases required)")
	out := c.Flag.String("out", "", "output `folder` (default: the station file's output.folder)")
	bench := c.Flag.String("bench", "", "serve the station's simulated bench over `tcp` in this process")
	ambient := c.Flag.String("ambient", "", "ambient `temperature` to record on every run, e.g. \"23.1 °C\"")
	tlsCert := c.Flag.String("tls-cert", "", "TLS certificate `file` (PEM) to serve HTTPS with; required beyond loopback")
	tlsKey := c.Flag.String("tls-key", "", "TLS private key `file` (PEM) of --tls-cert")
	lot := c.Flag.String("lot", "", "production `lot` id in force when the shift starts (the operator changes it on screen)")
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
		if err := sequencer.CheckLot(*lot); err != nil {
			return usagef("--lot: %v", err)
		}
		if (*tlsCert == "") != (*tlsKey == "") {
			return usagef("--tls-cert and --tls-key go together")
		}
		useTLS := *tlsCert != ""
		if !console.IsLoopback(*listen) && !useTLS {
			return usagef("--listen %s is beyond loopback: give --tls-cert and --tls-key, so that passphrases and session cookies do not cross the network in clear text", *listen)
		}
		var certs []tls.Certificate
		if useTLS {
			c, err := tls.LoadX509KeyPair(*tlsCert, *tlsKey)
			if err != nil {
				return badInput(fmt.Errorf("--tls-cert/--tls-key: %w", err))
			}
			certs = []tls.Certificate{c}
		}
		// The address first: a port taken fails before any instrument opens.
		ln, err := net.Listen("tcp", *listen)
		if err != nil {
			return err
		}
		defer ln.Close()
		srv, err := console.New(ctx, console.Options{StationPath: *station, SequencePath: *sequence, Out: *out, Listen: *listen,
			Bench: *bench, Ambient: *ambient, Lot: *lot, Engineering: *engineering, Log: e.stderr, Software: "trimline " + version(), TLS: useTLS})
		if errors.Is(err, console.ErrNoPassphrase) {
			return badInput(err)
		}
		if err != nil {
			return err
		}
		defer srv.Close()
		// No WriteTimeout: the event stream is one long response.
		hs := &http.Server{Handler: srv.Handler(), ReadHeaderTimeout: 10 * time.Second, ReadTimeout: 30 * time.Second, IdleTimeout: 2 * time.Minute}
		scheme := "http"
		if useTLS {
			scheme = "https"
			hs.TLSConfig = &tls.Config{Certificates: certs, MinVersion: tls.VersionTLS12}
			ln = tls.NewListener(ln, hs.TLSConfig)
		}
		for _, u := range consoleURLs(scheme, ln.Addr()) {
			fmt.Fprintf(e.stdout, "trimline console: %s\n", u)
		}
		fmt.Fprintln(e.stdout, "Ctrl-C stops.")
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

// consoleURLs are the addresses to open the console at: the listening
// address itself, or for an unspecified one (0.0.0.0, ::) this PC's name and
// each of its non-loopback addresses.
func consoleURLs(scheme string, addr net.Addr) []string {
	host, port, err := net.SplitHostPort(addr.String())
	if err != nil {
		return []string{scheme + "://" + addr.String() + "/"}
	}
	if ip := net.ParseIP(host); ip == nil || !ip.IsUnspecified() {
		return []string{scheme + "://" + net.JoinHostPort(host, port) + "/"}
	}
	var out []string
	if name, err := os.Hostname(); err == nil && name != "" {
		out = append(out, scheme+"://"+net.JoinHostPort(name, port)+"/")
	}
	if as, err := net.InterfaceAddrs(); err == nil {
		for _, a := range as {
			if n, ok := a.(*net.IPNet); ok && !n.IP.IsLoopback() && !n.IP.IsLinkLocalUnicast() {
				out = append(out, scheme+"://"+net.JoinHostPort(n.IP.String(), port)+"/")
			}
		}
	}
	if len(out) == 0 {
		out = append(out, scheme+"://"+net.JoinHostPort(host, port)+"/")
	}
	return out
}
