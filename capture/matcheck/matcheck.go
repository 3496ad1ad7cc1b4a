// Package matcheck lets a test binary fail when gocv Mats are left open.
//
// gocv counts open Mats only when built with the matprofile tag, which the
// project's test command (scripts/test.sh) always sets. Use it from a
// package's TestMain:
//
//	func TestMain(m *testing.M) { matcheck.Main(m) }
//
// Without the tag the count is unavailable; Main then runs the tests and
// says that the leak check was off.
package matcheck

import (
	"fmt"
	"os"
	"testing"
)

// Main runs the tests, then fails the binary if any Mat is still open.
func Main(m *testing.M) {
	code := m.Run()
	n, profile := open()
	switch {
	case n < 0:
		fmt.Fprintln(os.Stderr, "matcheck: Mat leak check off (run the tests with -tags matprofile)")
	case n > 0 && code == 0:
		fmt.Fprintf(os.Stderr, "matcheck: %d gocv Mats left open:\n%s\n", n, profile)
		code = 1
	}
	os.Exit(code)
}

// Open returns the number of gocv Mats open now, or −1 when the binary was
// built without the matprofile tag.
func Open() int {
	n, _ := open()
	return n
}
