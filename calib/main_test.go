package calib

import (
	"fmt"
	"os"
	"testing"

	"gocv.io/x/gocv"
)

// TestMain fails the run when a test leaves a Mat open (run the tests with
// -tags matprofile for the count to be kept).
func TestMain(m *testing.M) {
	code := m.Run()
	if n := gocv.MatProfile.Count(); n != 0 {
		fmt.Fprintf(os.Stderr, "calib: %d Mat(s) left open:\n", n)
		gocv.MatProfile.WriteTo(os.Stderr, 1)
		code = 1
	}
	os.Exit(code)
}
