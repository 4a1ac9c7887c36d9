// Package transporttest provides a raw line peer for tests and benchmarks of the
// line transports and of what runs over them (the SCPI session), like
// net/http/httptest does for HTTP.
package transporttest

import (
	"bufio"
	"bytes"
	"net"
	"sync"
	"testing"
)

// LineServer listens on a loopback TCP port and answers every line it receives,
// on every connection, with answer(line) written as is; the line passed to answer
// has its terminator term removed and is valid only during the call. A line longer
// than 4 KiB, or a failed write, ends that connection. It returns the listening
// address as "host:port"; the server stops, and every connection is closed, when
// tb's test or benchmark ends.
func LineServer(tb testing.TB, term byte, answer func(line []byte) []byte) string {
	tb.Helper()
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		tb.Fatal(err)
	}
	var wg sync.WaitGroup
	tb.Cleanup(func() { ln.Close(); wg.Wait() })
	wg.Add(1)
	go func() {
		defer wg.Done()
		for {
			c, err := ln.Accept()
			if err != nil {
				return
			}
			wg.Add(1)
			go func() {
				defer wg.Done()
				defer c.Close()
				r := bufio.NewReader(c)
				for {
					l, err := r.ReadSlice(term)
					if err != nil {
						return
					}
					if _, err := c.Write(answer(bytes.TrimSuffix(l, []byte{term}))); err != nil {
						return
					}
				}
			}()
		}
	}()
	return ln.Addr().String()
}
