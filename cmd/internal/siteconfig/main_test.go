package siteconfig

import (
	"testing"

	"github.com/hewline/hewline/capture/matcheck"
)

// TestMain checks that no gocv Mat is left open (the package does not
// make any itself, but the packages it maps into do).
func TestMain(m *testing.M) { matcheck.Main(m) }
