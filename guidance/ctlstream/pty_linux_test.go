package ctlstream_test

import (
	"bufio"
	"fmt"
	"os"
	"testing"

	"golang.org/x/sys/unix"

	"github.com/hewline/hewline/guidance/ctlstream"
)

// openPTY opens a pseudo-terminal pair: the master end for the test to
// read, and the slave device's path for the code under test to open as a
// serial port.
func openPTY(t *testing.T) (*os.File, string) {
	t.Helper()
	m, err := os.OpenFile("/dev/ptmx", os.O_RDWR|unix.O_NOCTTY, 0)
	if err != nil {
		t.Skipf("SKIPPED LOUDLY: no pseudo-terminals here (%v); the serial path was not exercised", err)
	}
	t.Cleanup(func() { m.Close() })
	fd := int(m.Fd())
	if err := unix.IoctlSetPointerInt(fd, unix.TIOCSPTLCK, 0); err != nil {
		t.Fatalf("unlock pty: %v", err)
	}
	n, err := unix.IoctlGetInt(fd, unix.TIOCGPTN)
	if err != nil {
		t.Fatalf("pty number: %v", err)
	}
	return m, fmt.Sprintf("/dev/pts/%d", n)
}

// TestSerialOverPTY sends over a real tty (a pseudo-terminal standing in
// for a USB serial adapter) and reads the NDJSON lines at the other end.
func TestSerialOverPTY(t *testing.T) {
	master, path := openPTY(t)
	c := newClock()
	s, err := ctlstream.NewSerial(path, 115200, ctlstream.Options{Now: c.Now, Session: 5})
	if err != nil {
		t.Fatal(err)
	}
	if err := s.Send(tracked(0, -3.5, 0.9)); err != nil {
		t.Fatal(err)
	}
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
	sc := bufio.NewScanner(master)
	var got []ctlstream.Message
	var r ctlstream.Receiver
	for len(got) < 2 && sc.Scan() {
		m, err := r.Accept(sc.Bytes(), c.Now())
		if err != nil {
			t.Fatalf("line %q: %v", sc.Text(), err)
		}
		got = append(got, m)
	}
	if len(got) != 2 || got[0].OffsetPx != -3.5 || !got[0].Tracking || got[1].Type != ctlstream.TypeHalt {
		t.Fatalf("read %+v, want the frame and the halt", got)
	}
}
