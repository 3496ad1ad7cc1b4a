package capturetest_test

import (
	"errors"
	"image"
	"testing"
	"time"

	"github.com/hewline/hewline/capture"
	"github.com/hewline/hewline/capture/capturetest"
	"github.com/hewline/hewline/capture/matcheck"
	"github.com/hewline/hewline/capture/v4l2"
	"gocv.io/x/gocv"
)

func TestMain(m *testing.M) { matcheck.Main(m) }

// The frame number survives JPEG (OpenCV's decoder) and the Mat form.
func TestFrameNumberSurvivesEncoding(t *testing.T) {
	dst := gocv.NewMat()
	defer dst.Close()
	for _, k := range []int{0, 1, 2, 255, 4660, 65535} {
		if err := v4l2.Decode(capturetest.PatternBytes(capturetest.MJPEG640, k), capturetest.MJPEG640, &dst); err != nil {
			t.Fatal(err)
		}
		if got, ok := capturetest.FrameNumber(dst); !ok || got != k {
			t.Errorf("MJPEG frame %d read as %d", k, got)
		}
		m := capturetest.PatternMat(image.Pt(320, 240), k)
		if got, _ := capturetest.FrameNumber(m); got != k {
			t.Errorf("Mat frame %d read as %d", k, got)
		}
		if x := capturetest.StripeCentre(image.Pt(320, 240), k); m.GetVecbAt(100, x)[2] != 230 || m.GetVecbAt(100, x+20)[2] != 60 {
			t.Errorf("frame %d: stripe not at x=%d", k, x)
		}
		m.Close()
	}
}

func TestClockFiresInOrder(t *testing.T) {
	c := capturetest.NewClock(time.Unix(0, 0))
	late, early := c.After(2*time.Second), c.After(time.Second)
	c.Advance(999 * time.Millisecond)
	select {
	case <-early:
		t.Fatal("fired early")
	default:
	}
	c.Advance(time.Millisecond)
	if got := <-early; !got.Equal(time.Unix(1, 0)) {
		t.Errorf("fired at %v", got)
	}
	if c.Pending() != 1 {
		t.Errorf("pending %d", c.Pending())
	}
	c.Advance(time.Second)
	<-late
}

// The script plays in order: frames with timestamps, a stall in polls, a
// loss with failing reopens, and a short buffer.
func TestFakeScript(t *testing.T) {
	clk := capturetest.NewClock(time.Unix(0, 0))
	f := capturetest.NewFakeCamera(
		capturetest.Frames(2, capturetest.YUYV320),
		capturetest.Stall(250*time.Millisecond),
		capturetest.Vanish(1),
		capturetest.Frames(1, capturetest.YUYV320),
	)
	f.Clock = clk
	buf := make([]byte, 320*240*2)
	if err := f.Open(); err != nil {
		t.Fatal(err)
	}
	for i := 0; i < 2; i++ {
		n, ts, fm, err := f.ReadRaw(buf)
		if err != nil || n != len(buf) || ts != time.Duration(i)*(time.Second/30) || fm != capturetest.YUYV320 {
			t.Fatalf("frame %d: %d %v %v %v", i, n, ts, fm, err)
		}
	}
	for i := 0; i < 3; i++ { // 100 + 100 + 50 ms
		if _, _, _, err := f.ReadRaw(buf); !errors.Is(err, v4l2.ErrTimeout) {
			t.Fatalf("stall poll %d: %v", i, err)
		}
	}
	if got := clk.Now().Sub(time.Unix(0, 0)); got != 2*(time.Second/30)+250*time.Millisecond {
		t.Errorf("clock moved %v", got)
	}
	if _, _, _, err := f.ReadRaw(buf); !errors.Is(err, v4l2.ErrGone) {
		t.Fatalf("vanish: %v", err)
	}
	f.Close()
	if err := f.Open(); !errors.Is(err, capture.ErrNotFound) {
		t.Fatalf("first reopen: %v", err)
	}
	if err := f.Open(); err != nil {
		t.Fatal(err)
	}
	if n, _, _, err := f.ReadRaw(buf[:10]); n != len(buf) || err == nil {
		t.Errorf("short buffer: %d %v", n, err)
	}
	if opens, closes, served := f.Counts(); opens != 2 || closes != 1 || served != 3 {
		t.Errorf("counts %d %d %d", opens, closes, served)
	}
}
