//go:build !(linux || darwin)

package serve

import "errors"

// listenPTY fails: this system has no pseudo-terminals to stand in for serial ports.
func (s *Server) listenPTY(*endpoint, bool) (string, error) {
	return "", errors.New("the serial and usbtmc transports of the served simulator need pseudo-terminals (Linux or macOS); use tcp")
}
