package record_test

import (
	"context"
	"errors"
	"testing"
	"time"

	"github.com/hewline/hewline/capture/capturetest"
	"github.com/hewline/hewline/capture/record"
	"github.com/hewline/hewline/capture/v4l2"
)

// Copy records a supervised (fake) camera through a loss and reopen: the
// transient errors are skipped, every delivered frame is recorded with its
// camera time, and For ends the copy on source time.
func TestCopyFromSupervisedCamera(t *testing.T) {
	clk := capturetest.NewClock(time.Unix(0, 0))
	fake := capturetest.NewFakeCamera(
		capturetest.Frames(10, capturetest.MJPEG320),
		capturetest.Vanish(0),
		capturetest.Frames(20, capturetest.MJPEG320),
	)
	fake.Clock = clk
	sup := v4l2.NewSupervisor(fake, v4l2.Options{Clock: clk, EveryFrame: true})
	if err := sup.Start(); err != nil {
		t.Fatal(err)
	}
	defer sup.Close()
	r, err := record.New(record.Options{Dir: t.TempDir(), FreeSpace: plenty})
	if err != nil {
		t.Fatal(err)
	}
	transient := 0
	n, err := record.Copy(context.Background(), sup, r, record.CopyOptions{
		For: 830 * time.Millisecond, // frames 0..24 (frame 25 is at 833 ms)
		Transient: func(err error) bool {
			transient++
			return errors.Is(err, v4l2.ErrGone) || errors.Is(err, v4l2.ErrStalled)
		},
	})
	if err != nil {
		t.Fatal(err)
	}
	r.Close()
	if n != 25 || r.Frames() != 25 || transient == 0 {
		t.Errorf("copied %d, recorded %d, transient errors %d; want 25, 25, ≥1", n, r.Frames(), transient)
	}
	ts, err := record.ReadSidecar(record.SidecarPath(r.Files()[0]))
	if err != nil || len(ts) != 25 || ts[24] != 24*(time.Second/30) {
		t.Errorf("sidecar %d times, last %v, %v", len(ts), ts[len(ts)-1], err)
	}
	if got, _ := countFrames(t, r.Files()[0]); got != 25 {
		t.Errorf("clip holds %d frames", got)
	}
}
