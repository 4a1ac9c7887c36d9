//go:build linux || darwin

package serve

import (
	"errors"
	"fmt"
	"os"
	"runtime"
	"sync"

	"github.com/creack/pty"
	"golang.org/x/sys/unix"
)

// listenPTY serves ep on a new pseudo-terminal and returns the address of its
// terminal side. The server keeps a descriptor of that side open, so the terminal
// outlives the client's opens and closes. Raw mode stands in for a serial line;
// canonical mode without echo or editing characters stands in for the USBTMC
// character device: each read of the terminal side returns one reply line.
func (s *Server) listenPTY(ep *endpoint, canonical bool) (string, error) {
	if canonical && runtime.GOOS != "linux" {
		return "", errors.New("the usbtmc transport is Linux-only")
	}
	m, t, err := pty.Open()
	if err != nil {
		return "", fmt.Errorf("open a pseudo-terminal: %w", err)
	}
	if err := setMode(t, canonical); err != nil {
		m.Close()
		t.Close()
		return "", err
	}
	var once sync.Once
	closeBoth := func() error {
		once.Do(func() { m.Close(); t.Close() })
		return nil
	}
	ep.addCloser(closeBoth)
	link := &ptyLink{File: m, close: closeBoth}
	if !ep.track(link) {
		closeBoth()
		return "", errors.New("server closed")
	}
	s.wg.Add(1)
	go func() {
		defer s.wg.Done()
		defer ep.untrack(link)
		ep.serve(link)
	}()
	if canonical {
		return "usbtmc://" + t.Name(), nil
	}
	return fmt.Sprintf("serial://%s?baud=%d", t.Name(), s.opt.Baud), nil
}

// ptyLink is the controller side; closing it hangs the terminal up for good.
type ptyLink struct {
	*os.File
	close func() error
}

func (l *ptyLink) Close() error { return l.close() }

// setMode puts the terminal side in raw mode, or in canonical mode without echo,
// signals, output processing or editing characters.
func setMode(t *os.File, canonical bool) error {
	fd := int(t.Fd())
	tio, err := unix.IoctlGetTermios(fd, getTermios)
	if err != nil {
		return fmt.Errorf("terminal settings of %s: %w", t.Name(), err)
	}
	tio.Iflag &^= unix.IGNBRK | unix.BRKINT | unix.PARMRK | unix.ISTRIP | unix.INLCR | unix.IGNCR | unix.ICRNL | unix.IXON | unix.IXOFF
	tio.Oflag &^= unix.OPOST
	tio.Lflag &^= unix.ECHO | unix.ECHONL | unix.ECHOE | unix.ECHOK | unix.ICANON | unix.ISIG | unix.IEXTEN
	tio.Cflag &^= unix.CSIZE | unix.PARENB
	tio.Cflag |= unix.CS8
	tio.Cc[unix.VMIN], tio.Cc[unix.VTIME] = 1, 0
	if canonical {
		tio.Lflag |= unix.ICANON
		for _, c := range []int{unix.VERASE, unix.VKILL, unix.VEOL, unix.VEOL2, unix.VWERASE, unix.VREPRINT, unix.VLNEXT} {
			tio.Cc[c] = 0
		}
	}
	if err := unix.IoctlSetTermios(fd, setTermios, tio); err != nil {
		return fmt.Errorf("set terminal settings of %s: %w", t.Name(), err)
	}
	return nil
}
