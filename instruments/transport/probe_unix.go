//go:build linux || darwin || freebsd || netbsd || openbsd

package transport

import (
	"net"
	"syscall"
)

// peerClosed peeks at the socket without blocking: a zero-byte read means the peer
// has closed its side (FIN received), so a command written now would be lost.
func peerClosed(c net.Conn) bool {
	sc, ok := c.(syscall.Conn)
	if !ok {
		return false
	}
	rc, err := sc.SyscallConn()
	if err != nil {
		return false
	}
	closed := false
	var b [1]byte
	rc.Read(func(fd uintptr) bool {
		n, _, err := syscall.Recvfrom(int(fd), b[:], syscall.MSG_PEEK|syscall.MSG_DONTWAIT)
		closed = n == 0 && err == nil || err == syscall.ECONNRESET
		return true
	})
	return closed
}
