package serve

import "net"

// listenTCP serves ep on a loopback port of its own.
func (s *Server) listenTCP(ep *endpoint) (string, error) {
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		return "", err
	}
	ep.addCloser(ln.Close)
	s.wg.Add(1)
	go func() {
		defer s.wg.Done()
		for {
			c, err := ln.Accept()
			if err != nil {
				return
			}
			if !ep.track(c) {
				c.Close()
				return
			}
			s.wg.Add(1)
			go func() {
				defer s.wg.Done()
				defer ep.untrack(c)
				defer c.Close()
				ep.serve(c)
			}()
		}
	}()
	return "tcp://" + ln.Addr().String(), nil
}
