package matcheck_test

import (
	"testing"

	"gocv.io/x/gocv"

	"github.com/hewline/hewline/capture/matcheck"
)

// TestCountsOpenMats proves the check can fail: an open Mat is counted.
func TestCountsOpenMats(t *testing.T) {
	before := matcheck.Open()
	if before < 0 {
		t.Skip("built without -tags matprofile: nothing to count")
	}
	m := gocv.NewMat()
	if got := matcheck.Open(); got != before+1 {
		t.Errorf("with one more Mat open: %d, want %d", got, before+1)
	}
	m.Close()
	if got := matcheck.Open(); got != before {
		t.Errorf("after Close: %d, want %d", got, before)
	}
}
