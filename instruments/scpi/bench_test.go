package scpi_test

import (
	"bufio"
	"context"
	"net"
	"net/url"
	"testing"

	"trimline/instruments/scpi"
	"trimline/instruments/transport"
	"trimline/instruments/transport/transporttest"
)

// echoServer answers every line with a fixed numeric reply over loopback TCP.
func echoServer(b *testing.B) string {
	reply := []byte("+2.503100000E+00\n")
	return transporttest.LineServer(b, '\n', func([]byte) []byte { return reply })
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
