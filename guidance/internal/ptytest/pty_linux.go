package ptytest

import (
	"fmt"
	"os"
	"testing"

	"golang.org/x/sys/unix"
)

// Open opens a pseudo-terminal pair: the master end for the test to read,
// and the slave device's path for the code under test to open as a serial
// port. The master is closed when the test ends. Without pseudo-terminals
// the test is skipped, saying so loudly.
func Open(t *testing.T) (*os.File, string) {
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
