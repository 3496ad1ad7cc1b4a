//go:build linux

package v4l2

import (
	"errors"
	"fmt"
	"os"
	"strings"
	"syscall"
	"testing"

	"github.com/blackjack/webcam"
	"github.com/hewline/hewline/capture"
)

// Each open failure names its likely cause and wraps the sentinel callers
// act on. Errno meanings from errno(3) and the V4L2 open() documentation.
func TestOpenErrorNamesCauses(t *testing.T) {
	tests := []struct {
		name string
		err  error
		want string
		is   error
	}{
		{"missing", syscall.ENOENT, "unplugged", capture.ErrNotFound},
		{"permission", syscall.EACCES, `"video" group`, syscall.EACCES},
		{"busy", syscall.EBUSY, "another program", syscall.EBUSY},
		{"vanished", syscall.ENODEV, "not responding", ErrGone},
		{"not v4l2", syscall.ENOTTY, "not a V4L2 capture device", syscall.ENOTTY},
		{"metadata node", fmt.Errorf("Not a video capture device"), "metadata node", capture.ErrUnreadable},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			err := openError("/dev/video9", tc.err)
			if !strings.Contains(err.Error(), tc.want) || !strings.Contains(err.Error(), "/dev/video9") {
				t.Errorf("%q lacks %q or the path", err, tc.want)
			}
			if !errors.Is(err, tc.is) {
				t.Errorf("%v does not wrap %v", err, tc.is)
			}
		})
	}
}

// webcam v0.6.1 returns the raw errno for a missing node (measured here,
// see /work/shared/DEPENDENCIES.md); NewDevice turns it into ErrNotFound.
func TestNewDeviceMissing(t *testing.T) {
	const path = "/dev/video-hewline-test-missing"
	if _, err := os.Stat(path); err == nil {
		t.Skip("test device name exists")
	}
	_, err := NewDevice(path, Preference{})
	if !errors.Is(err, capture.ErrNotFound) {
		t.Fatalf("NewDevice: %v, want ErrNotFound", err)
	}
}

// The frame rate is the inverse of the V4L2 frame interval (struct
// v4l2_frmivalenum: numerator/denominator seconds per frame).
func TestRatesAndSizes(t *testing.T) {
	if got := rates(webcam.FrameRate{MinNumerator: 1, MaxNumerator: 1, MinDenominator: 30, MaxDenominator: 30}); len(got) != 1 || got[0] != 30 {
		t.Errorf("discrete 1/30 s: %v", got)
	}
	if got := rates(webcam.FrameRate{MinNumerator: 1001, MaxNumerator: 1001, MinDenominator: 30000, MaxDenominator: 30000}); len(got) != 1 || got[0] < 29.97 || got[0] > 29.98 {
		t.Errorf("NTSC 1001/30000 s: %v", got)
	}
	step := rates(webcam.FrameRate{MinNumerator: 1, MaxNumerator: 1, StepNumerator: 1, MinDenominator: 60, MaxDenominator: 5, StepDenominator: 1})
	if len(step) != 2 || step[0] != 60 || step[1] != 5 {
		t.Errorf("stepwise 1/60..1/5 s: %v", step)
	}
	if got := sampleSizes(webcam.FrameSize{MinWidth: 640, MaxWidth: 640, MinHeight: 480, MaxHeight: 480}); len(got) != 1 || got[0].X != 640 {
		t.Errorf("discrete: %v", got)
	}
	got := sampleSizes(webcam.FrameSize{MinWidth: 160, MaxWidth: 1920, StepWidth: 16, MinHeight: 120, MaxHeight: 1080, StepHeight: 8})
	if fmt.Sprint(got) != "[(1920,1080) (320,240) (640,480) (1280,720)]" {
		t.Errorf("stepwise: %v", got)
	}
	if got := sampleSizes(webcam.FrameSize{}); got != nil {
		t.Errorf("continuous (unreported): %v", got)
	}
}

// On this machine there is no camera: List says so with no error. With a
// camera it must list it (checked by hand on hardware, not here).
func TestListRuns(t *testing.T) {
	devs, err := List()
	if err != nil {
		t.Fatal(err)
	}
	for _, d := range devs {
		if !strings.HasPrefix(d.Path, "/dev/video") {
			t.Errorf("odd node %q", d.Path)
		}
	}
	t.Logf("%d V4L2 nodes", len(devs))
}
