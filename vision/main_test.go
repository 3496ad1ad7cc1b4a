package vision

import (
	"fmt"
	"os"
	"testing"
)

// TestMain fails the run when a test leaves a Mat open. The count is kept
// only when the tests are built with -tags matprofile (as CI does).
func TestMain(m *testing.M) {
	code := m.Run()
	if n, profile := openMats(); n != 0 {
		fmt.Fprintf(os.Stderr, "vision: %d Mat(s) not closed:\n%s", n, profile)
		if code == 0 {
			code = 1
		}
	}
	os.Exit(code)
}
