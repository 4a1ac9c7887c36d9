//go:build linux

package transport_test

import (
	"context"
	"os"
	"testing"

	"github.com/creack/pty"
	"golang.org/x/sys/unix"

	"trimline/instruments/transport"
)

// fakeUSBTMC is a file-backed fake of the USBTMC class driver's character device:
// the terminal side of a pseudo-terminal in canonical mode, without echo, signals,
// output processing or editing characters. Like the real device it is one path,
// opened read-write with plain open(2), and each read(2) returns one message: a
// line, or the bytes before an end-of-file character (^D) for a message without a
// terminator. The test writes the instrument's responses to the controller side.
func fakeUSBTMC(t *testing.T) (path string, instrument *os.File) {
	t.Helper()
	m, tty, err := pty.Open()
	if err != nil {
		t.Skipf("no pseudo-terminals: %v", err)
	}
	t.Cleanup(func() { m.Close(); tty.Close() })
	tio, err := unix.IoctlGetTermios(int(tty.Fd()), unix.TCGETS)
	if err != nil {
		t.Fatal(err)
	}
	tio.Iflag &^= unix.ICRNL | unix.INLCR | unix.IGNCR | unix.IXON | unix.ISTRIP
	tio.Oflag &^= unix.OPOST
	tio.Lflag &^= unix.ECHO | unix.ECHONL | unix.ECHOE | unix.ECHOK | unix.ISIG | unix.IEXTEN
	tio.Lflag |= unix.ICANON
	for _, c := range []int{unix.VERASE, unix.VKILL, unix.VEOL, unix.VEOL2} {
		tio.Cc[c] = 0
	}
	if err := unix.IoctlSetTermios(int(tty.Fd()), unix.TCSETS, tio); err != nil {
		t.Fatal(err)
	}
	return tty.Name(), m
}

func TestUSBTMCMessages(t *testing.T) {
	path, inst := fakeUSBTMC(t)
	c := dial(t, "usbtmc://"+path, transport.Options{})
	ctx := context.Background()

	// A command is one message with the terminator.
	if err := c.WriteLine(ctx, "*IDN?"); err != nil {
		t.Fatal(err)
	}
	buf := make([]byte, 64)
	n, err := inst.Read(buf)
	if err != nil || string(buf[:n]) != "*IDN?\n" {
		t.Fatalf("the device got %q, %v", buf[:n], err)
	}

	// Each read is one response; the terminator (and a "\r" before "\n") is removed.
	inst.WriteString("Trimline Sim,DV-65,DV000001,1.0\r\nsecond\n")
	for _, want := range []string{"Trimline Sim,DV-65,DV000001,1.0", "second"} {
		if r, err := c.ReadLine(ctx); err != nil || r != want {
			t.Fatalf("ReadLine = %q, %v; want %q", r, err, want)
		}
	}
	// A response without a terminator (end of message, here ^D) is still a line.
	inst.WriteString("+1.000000000E+00\x04")
	if r, err := c.ReadLine(ctx); err != nil || r != "+1.000000000E+00" {
		t.Fatalf("ReadLine = %q, %v; want the unterminated response", r, err)
	}
	// Nothing sent: the read times out, and the Conn stays usable on a device that
	// can be polled.
	if _, err := c.ReadLine(ctx); !transportTimeout(err) {
		t.Fatalf("ReadLine with nothing sent = %v, want ErrTimeout", err)
	}
	inst.WriteString("after\n")
	if r, err := c.ReadLine(ctx); err != nil || r != "after" {
		t.Fatalf("ReadLine after a timeout = %q, %v", r, err)
	}
}
