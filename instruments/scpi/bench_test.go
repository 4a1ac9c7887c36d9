package scpi_test

import (
	"bufio"
	"context"
	"net"
	"net/url"
	"sync"
	"testing"

	"trimline/instruments/scpi"
	"trimline/instruments/transport"
)

// echoServer answers every line with a fixed numeric reply over loopback TCP.
func echoServer(b *testing.B) string {
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		b.Fatal(err)
	}
	var wg sync.WaitGroup
	b.Cleanup(func() { ln.Close(); wg.Wait() })
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
				reply := []byte("+2.503100000E+00\n")
				for {
					if _, err := r.ReadSlice('\n'); err != nil {
						return
					}
					if _, err := c.Write(reply); err != nil {
						return
					}
				}
			}()
		}
	}()
	return ln.Addr().String()
}

// BenchmarkRawSocketQuery is the floor: one query and its reply over a bare socket
// with a buffered reader, no deadlines, no parsing.
func BenchmarkRawSocketQuery(b *testing.B) {
	c, err := net.Dial("tcp", echoServer(b))
	if err != nil {
		b.Fatal(err)
	}
	defer c.Close()
	c.(*net.TCPConn).SetNoDelay(true)
	r := bufio.NewReader(c)
	q := []byte("SOUR:VOLT?\n")
	b.ResetTimer()
	for b.Loop() {
		if _, err := c.Write(q); err != nil {
			b.Fatal(err)
		}
		if _, err := r.ReadSlice('\n'); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkSessionQuery is the same exchange through transport.Conn and
// scpi.Session (deadlines, cancellation hooks, the peer-closed probe, retry
// bookkeeping) and ParseNumber.
func BenchmarkSessionQuery(b *testing.B) {
	u, _ := url.Parse("tcp://" + echoServer(b))
	dial := func(ctx context.Context) (transport.Conn, error) { return transport.Dial(ctx, u, transport.Options{}) }
	ctx := context.Background()
	c, err := dial(ctx)
	if err != nil {
		b.Fatal(err)
	}
	s := scpi.NewSession(c, scpi.Options{Redial: dial, Retries: 2})
	defer s.Close()
	b.ResetTimer()
	for b.Loop() {
		if _, err := s.QueryFloat(ctx, "SOUR:VOLT?"); err != nil {
			b.Fatal(err)
		}
	}
}
