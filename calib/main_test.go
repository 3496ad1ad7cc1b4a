package calib

import (
	"fmt"
	"os"
	"testing"
)

// TestMain fails the run when a test leaves a Mat open. The count is only
// kept with -tags matprofile (how the project runs its tests); without
// the tag the check is skipped with a note.
func TestMain(m *testing.M) {
	code := m.Run()
	if n, dump, ok := openMats(); !ok {
		fmt.Fprintln(os.Stderr, "calib: Mat leak check skipped: run the tests with -tags matprofile")
	} else if n != 0 {
		fmt.Fprintf(os.Stderr, "calib: %d Mat(s) left open:\n", n)
		dump()
		code = 1
	}
	os.Exit(code)
}
