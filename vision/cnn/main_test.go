package cnn

import (
	"os"
	"testing"
)

// TestMain fails the run when a test leaves a Mat open (the check works
// when the tests are run with -tags matprofile, as the project does).
func TestMain(m *testing.M) {
	code := m.Run()
	if leakedMats() {
		code = 1
	}
	os.Exit(code)
}
