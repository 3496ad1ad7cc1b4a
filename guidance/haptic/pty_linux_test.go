package haptic_test

import (
	"bufio"
	"fmt"
	"os"
	"testing"

	"golang.org/x/sys/unix"

	"github.com/hewline/hewline/guidance/haptic"
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

// TestSerialOverPTY drives a real tty (a pseudo-terminal standing in for a
// USB serial motor driver) and reads the protocol lines at the other end.
func TestSerialOverPTY(t *testing.T) {
	master, path := openPTY(t)
	s, err := haptic.OpenSerial(path, 115200)
	if err != nil {
		t.Fatal(err)
	}
	if err := s.Set(12, 200); err != nil {
		t.Fatal(err)
	}
	if err := s.Close(); err != nil {
		t.Fatal(err)
	}
	sc := bufio.NewScanner(master)
	var got []string
	for len(got) < 2 && sc.Scan() {
		got = append(got, sc.Text())
	}
	if len(got) != 2 || got[0] != "L 12 R 200" || got[1] != "H" {
		t.Fatalf("read %q, want the levels and the halt", got)
	}
}
