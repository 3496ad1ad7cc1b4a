package v4l2_test

import (
	"testing"

	"github.com/hewline/hewline/capture/matcheck"
)

// TestMain fails the binary when a test leaves a gocv Mat open.
func TestMain(m *testing.M) { matcheck.Main(m) }
