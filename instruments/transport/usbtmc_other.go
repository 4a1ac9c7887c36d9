//go:build !linux

package transport

import (
	"context"
	"errors"
	"net/url"
)

// dialUSBTMC fails: the USBTMC character device is the Linux class driver's.
func dialUSBTMC(_ context.Context, u *url.URL, _ Options) (Conn, error) {
	return nil, &Error{Op: "dial", Addr: u.String(), Err: errors.New("usbtmc:// needs the Linux USBTMC class driver; on this system use the instrument's tcp:// or serial:// interface")}
}

func isDriverTimeout(error) bool { return false }
