//go:build linux

package transport

import (
	"context"
	"errors"
	"fmt"
	"net/url"
	"os"
	"syscall"
	"unsafe"
)

// usbtmcSetTimeout is USBTMC_IOCTL_SET_TIMEOUT from <linux/usb/tmc.h>:
// _IOW('[', 10, __u32), the driver's own I/O timeout in milliseconds.
const usbtmcSetTimeout = 0x40045b0a

// dialUSBTMC opens the class driver's character device. The driver's timeout is set
// to the exchange timeout so that a read the driver cannot interrupt still ends; a
// file that is not a USBTMC device (a test fake) ignores that request.
func dialUSBTMC(_ context.Context, u *url.URL, opt Options) (Conn, error) {
	path, _ := parseUSBTMC(u)
	f, err := os.OpenFile(path, os.O_RDWR|syscall.O_NOCTTY, 0)
	if err != nil {
		return nil, &Error{Op: "dial", Addr: u.String(), Err: fmt.Errorf("usbtmc device %s: %w", path, errors.Unwrap(err))}
	}
	if rc, err := f.SyscallConn(); err == nil {
		ms := uint32(opt.Timeout.Milliseconds())
		rc.Control(func(fd uintptr) {
			syscall.Syscall(syscall.SYS_IOCTL, fd, usbtmcSetTimeout, uintptr(unsafe.Pointer(&ms)))
		})
	}
	return newMsgConn(u.String(), f, opt), nil
}

func isDriverTimeout(err error) bool { return errors.Is(err, syscall.ETIMEDOUT) }
