package v4l2_test

import (
	"errors"
	"fmt"
	"io"
	"testing"
	"testing/synctest"
	"time"

	"github.com/hewline/hewline/capture"
	"github.com/hewline/hewline/capture/capturetest"
	"github.com/hewline/hewline/capture/v4l2"
	"gocv.io/x/gocv"
)

const frameInterval = time.Second / 30

type rig struct {
	clk  *capturetest.Clock
	fake *capturetest.FakeCamera
	sup  *v4l2.Supervisor
	ev   *capturetest.EventLog
	dst  gocv.Mat
}

func newRig(t *testing.T, opt v4l2.Options, steps ...capturetest.Step) *rig {
	t.Helper()
	r := &rig{clk: capturetest.NewClock(time.Unix(1000, 0)), ev: &capturetest.EventLog{}, dst: gocv.NewMat()}
	r.fake = capturetest.NewFakeCamera(steps...)
	r.fake.Clock = r.clk
	opt.Clock = r.clk
	opt.OnEvent = r.ev.Add
	if opt.Name == "" {
		opt.Name = "fake0"
	}
	r.sup = v4l2.NewSupervisor(r.fake, opt)
	if err := r.sup.Start(); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() {
		r.sup.Close()
		r.dst.Close()
	})
	return r
}

// readFrame reads until a frame comes (at most 200 tries), returning the
// transient errors met on the way.
func (r *rig) readFrame(t *testing.T) (capture.FrameInfo, []error) {
	t.Helper()
	var errs []error
	for i := 0; i < 200; i++ {
		info, err := r.sup.Read(&r.dst)
		if err == nil {
			return info, errs
		}
		if errors.Is(err, io.EOF) {
			t.Fatalf("EOF after %v", errs)
		}
		errs = append(errs, err)
	}
	t.Fatalf("no frame after 200 reads: %v", errs[len(errs)-1])
	return capture.FrameInfo{}, nil
}

func frameNumber(t *testing.T, m gocv.Mat) int {
	t.Helper()
	k, ok := capturetest.FrameNumber(m)
	if !ok {
		t.Fatalf("no frame number in %dx%d frame", m.Cols(), m.Rows())
	}
	return k
}

// Every-frame mode delivers each frame in order, follows format changes and
// keeps the camera's timestamps, including a driver-side gap.
func TestEveryFrameInOrderAcrossFormatChanges(t *testing.T) {
	r := newRig(t, v4l2.Options{EveryFrame: true},
		capturetest.Frames(4, capturetest.MJPEG320),
		capturetest.Frames(3, capturetest.YUYV320),
		capturetest.Skip(2),
		capturetest.Frames(2, capturetest.MJPEG640),
	)
	wantSize := []int{320, 320, 320, 320, 320, 320, 320, 640, 640}
	for i := 0; i < 9; i++ {
		info, err := r.sup.Read(&r.dst)
		if err != nil {
			t.Fatalf("frame %d: %v", i, err)
		}
		wantT := time.Duration(i) * frameInterval
		if i >= 7 {
			wantT += 2 * frameInterval // the skipped frames
		}
		if info.Index != i || info.T != wantT || info.Size.X != wantSize[i] {
			t.Errorf("frame %d: %+v, want index %d T %v width %d", i, info, i, wantT, wantSize[i])
		}
		if k := frameNumber(t, r.dst); k != i {
			t.Errorf("frame %d carries number %d", i, k)
		}
	}
	if got := r.ev.Of(v4l2.EventFormatChanged); len(got) != 2 || got[0].Format != capturetest.YUYV320 || got[1].Format != capturetest.MJPEG640 {
		t.Errorf("format events %v", got)
	}
	st := r.sup.Stats()
	if st.Frames != 9 || st.Drops != 0 || st.Stalls != 0 || st.Losses != 0 {
		t.Errorf("stats %+v", st)
	}
	if info := r.sup.Info(); info.Kind != "camera" || info.Size.X != 640 || info.Frames != -1 {
		t.Errorf("info %+v", info)
	}
	r.sup.Close()
	if _, err := r.sup.Read(&r.dst); !errors.Is(err, io.EOF) {
		t.Errorf("after Close: %v, want EOF", err)
	}
}

// Live mode keeps only the freshest frame and counts the stale ones; a
// camera that stops is reported as stalled as soon as StallAfter passes,
// and the next frame resumes.
func TestLiveFreshestFrameAndStall(t *testing.T) {
	r := newRig(t, v4l2.Options{StallAfter: 250 * time.Millisecond},
		capturetest.Frames(5, capturetest.MJPEG320),
		capturetest.Hold(),
		capturetest.Frames(2, capturetest.MJPEG320),
	)
	r.fake.WaitHolding() // all five served; the reader holds the last
	info, err := r.sup.Read(&r.dst)
	if err != nil {
		t.Fatal(err)
	}
	if k := frameNumber(t, r.dst); k != 4 || info.Index != 0 || info.T != 4*frameInterval {
		t.Errorf("got frame %d %+v, want the freshest (4) at %v", k, info, 4*frameInterval)
	}
	if st := r.sup.Stats(); st.Drops != 4 || st.Frames != 1 {
		t.Errorf("stats %+v, want 4 drops, 1 frame", st)
	}

	// Not yet 250 ms since the last frame: Read waits; once the clock
	// passes it, Read reports the stall.
	got := make(chan error, 1)
	go func() { _, err := r.sup.Read(&r.dst); got <- err }()
	r.clk.Advance(200 * time.Millisecond)
	select {
	case err := <-got:
		t.Fatalf("Read returned %v at 200 ms", err)
	case <-time.After(20 * time.Millisecond):
	}
	r.clk.Advance(60 * time.Millisecond)
	if err := <-got; !errors.Is(err, v4l2.ErrStalled) {
		t.Fatalf("err = %v, want ErrStalled", err)
	}
	if ev := r.ev.Of(v4l2.EventStalled); len(ev) != 1 || !ev[0].Kind.Faulty() {
		t.Fatalf("stall events %v", ev)
	}
	// Still stalled: another ErrStalled after another StallAfter, counted
	// once.
	r.clk.Advance(300 * time.Millisecond)
	if _, err := r.sup.Read(&r.dst); !errors.Is(err, v4l2.ErrStalled) {
		t.Fatalf("err = %v, want ErrStalled", err)
	}
	r.fake.Release()
	info, errs := r.readFrame(t)
	if k := frameNumber(t, r.dst); k != 5 || info.Index != 1 {
		t.Errorf("after release got frame %d %+v (errors %v)", k, info, errs)
	}
	st := r.sup.Stats()
	if st.Stalls != 1 {
		t.Errorf("stalls = %d, want 1", st.Stalls)
	}
	k := r.ev.Kinds(v4l2.EventStalled, v4l2.EventResumed)
	if len(k) != 2 || k[0] != v4l2.EventStalled || k[1] != v4l2.EventResumed {
		t.Errorf("events %v, want stalled then resumed", k)
	}
}

// A pause shorter than ReopenAfter is one stall, and no reopen.
func TestShortStallCountsOnce(t *testing.T) {
	r := newRig(t, v4l2.Options{EveryFrame: true, StallAfter: 250 * time.Millisecond},
		capturetest.Frames(3, capturetest.MJPEG320),
		capturetest.Stall(time.Second),
		capturetest.Frames(3, capturetest.MJPEG320),
	)
	var errs []error
	for n := 0; n < 6; {
		_, e := r.readFrame(t)
		errs = append(errs, e...)
		n++
	}
	for _, err := range errs {
		if !errors.Is(err, v4l2.ErrStalled) {
			t.Errorf("unexpected error %v", err)
		}
	}
	st := r.sup.Stats()
	if st.Stalls != 1 || st.Reopens != 0 || st.Losses != 0 || st.Frames != 6 {
		t.Errorf("stats %+v, want 1 stall, no reopen", st)
	}
}

// A stall longer than ReopenAfter makes the Supervisor close and reopen
// the device.
func TestLongStallReopens(t *testing.T) {
	r := newRig(t, v4l2.Options{EveryFrame: true, ReopenAfter: time.Second},
		capturetest.Frames(2, capturetest.MJPEG320),
		capturetest.Stall(1500*time.Millisecond),
		capturetest.Frames(2, capturetest.MJPEG320),
	)
	for i := 0; i < 4; i++ {
		_, errs := r.readFrame(t)
		for _, err := range errs {
			if !errors.Is(err, v4l2.ErrStalled) && !errors.Is(err, v4l2.ErrGone) {
				t.Errorf("unexpected error %v", err)
			}
		}
		if k := frameNumber(t, r.dst); k != i {
			t.Errorf("frame %d carries %d", i, k)
		}
	}
	st := r.sup.Stats()
	if st.Losses != 1 || st.Reopens != 1 {
		t.Errorf("stats %+v, want 1 loss and 1 reopen", st)
	}
	gone := r.ev.Of(v4l2.EventGone)
	if len(gone) != 1 || !errors.Is(gone[0].Err, v4l2.ErrStalled) {
		t.Errorf("gone events %v, want one caused by the stall", gone)
	}
	if opens, closes, _ := r.fake.Counts(); opens != 2 || closes != 1 {
		t.Errorf("fake opened %d closed %d, want 2 and 1", opens, closes)
	}
}

// An unplugged camera is reported at once, reopened with exponential
// backoff (capped), and resumes. It runs in a testing/synctest bubble: the
// fake camera sleeps its frame interval (capturetest.Sleeper) and the
// Supervisor waits on the process clock, both simulated there, so the
// backoff waits are exact and need nobody to move a clock; with the
// default StallAfter, the outage gives no stall events (no storm), only
// the loss.
func TestVanishReopensWithBackoff(t *testing.T) {
	synctest.Test(t, func(t *testing.T) {
		ev := &capturetest.EventLog{}
		fake := capturetest.NewFakeCamera(
			capturetest.Frames(2, capturetest.YUYV320),
			capturetest.Vanish(3),
			capturetest.Frames(2, capturetest.YUYV320),
		)
		fake.Clock = capturetest.Sleeper{}
		sup := v4l2.NewSupervisor(fake, v4l2.Options{Name: "fake0", EveryFrame: true, OnEvent: ev.Add,
			BackoffMin: 100 * time.Millisecond, BackoffMax: 250 * time.Millisecond})
		if err := sup.Start(); err != nil {
			t.Fatal(err)
		}
		defer sup.Close()
		r := &rig{fake: fake, sup: sup, ev: ev, dst: gocv.NewMat()}
		defer r.dst.Close()
		// The loss may be reported before the second frame, which is
		// still delivered.
		sawGone := false
		for i := 0; i < 4; i++ {
			_, errs := r.readFrame(t)
			for _, err := range errs {
				switch {
				case errors.Is(err, v4l2.ErrGone):
					sawGone = true
				case errors.Is(err, v4l2.ErrStalled):
				default:
					t.Errorf("unexpected error %v", err)
				}
			}
			if k := frameNumber(t, r.dst); k != i {
				t.Errorf("frame %d carries %d", i, k)
			}
		}
		sup.Close()
		if !sawGone {
			t.Error("Read never returned ErrGone")
		}
		failed := ev.Of(v4l2.EventOpenFailed)
		wantBackoff := []time.Duration{100 * time.Millisecond, 200 * time.Millisecond, 250 * time.Millisecond}
		if len(failed) != 3 {
			t.Fatalf("open-failed events %v", failed)
		}
		for i, e := range failed {
			if e.Attempt != i+1 || e.Backoff != wantBackoff[i] || !errors.Is(e.Err, capture.ErrNotFound) {
				t.Errorf("attempt %d: %v, want backoff %v", i+1, e, wantBackoff[i])
			}
			if i > 0 {
				if d := e.At.Sub(failed[i-1].At); d != wantBackoff[i-1] {
					t.Errorf("attempt %d came %v after the one before, want its backoff %v", i+1, d, wantBackoff[i-1])
				}
			}
		}
		opened := ev.Of(v4l2.EventOpened)
		if len(opened) != 2 || opened[1].Attempt != 4 {
			t.Fatalf("opened events %v, want the start and attempt 4", opened)
		}
		if d := opened[1].At.Sub(failed[2].At); d != wantBackoff[2] {
			t.Errorf("reopened %v after the last failure, want its backoff %v", d, wantBackoff[2])
		}
		seq := ev.Kinds(v4l2.EventGone, v4l2.EventOpened, v4l2.EventResumed, v4l2.EventStalled)
		want := []v4l2.EventKind{v4l2.EventOpened, v4l2.EventGone, v4l2.EventOpened, v4l2.EventResumed}
		if fmt.Sprint(seq) != fmt.Sprint(want) {
			t.Errorf("events %v, want %v", seq, want)
		}
		if st := sup.Stats(); st.Losses != 1 || st.Reopens != 1 || st.Frames != 4 {
			t.Errorf("stats %+v", st)
		}
	})
}

// Undecodable frames (a JPEG header followed by noise, a short YUYV
// buffer) are skipped and counted; the process does not abort.
func TestCorruptFramesSkipped(t *testing.T) {
	r := newRig(t, v4l2.Options{EveryFrame: true},
		capturetest.Frames(2, capturetest.MJPEG320),
		capturetest.Corrupt(2, capturetest.MJPEG320),
		capturetest.Corrupt(1, capturetest.YUYV320),
		capturetest.Frames(2, capturetest.MJPEG320),
	)
	for i, want := range []int{0, 1, 5, 6} {
		if _, err := r.sup.Read(&r.dst); err != nil {
			t.Fatal(err)
		}
		if k := frameNumber(t, r.dst); k != want {
			t.Errorf("read %d: frame %d, want %d", i, k, want)
		}
	}
	if st := r.sup.Stats(); st.Corrupt != 3 || st.Frames != 4 {
		t.Errorf("stats %+v, want 3 corrupt", st)
	}
}

// A frame bigger than the buffer is dropped (counted) and the buffer grows.
func TestSmallBufferGrows(t *testing.T) {
	r := newRig(t, v4l2.Options{EveryFrame: true, BufferBytes: 64},
		capturetest.Frames(3, capturetest.YUYV320),
	)
	for _, want := range []int{1, 2} {
		if _, err := r.sup.Read(&r.dst); err != nil {
			t.Fatal(err)
		}
		if k := frameNumber(t, r.dst); k != want {
			t.Errorf("frame %d, want %d", k, want)
		}
	}
	if st := r.sup.Stats(); st.Drops != 1 {
		t.Errorf("drops = %d, want 1", st.Drops)
	}
}

// A camera missing at start is an error from Start, not a silent retry.
func TestStartFailsWhenMissing(t *testing.T) {
	fake := capturetest.NewFakeCamera(capturetest.Frames(1, capturetest.MJPEG320))
	fake.FailNextOpens(1)
	sup := v4l2.NewSupervisor(fake, v4l2.Options{Clock: capturetest.NewClock(time.Unix(0, 0))})
	defer sup.Close()
	if err := sup.Start(); !errors.Is(err, capture.ErrNotFound) {
		t.Errorf("Start: %v, want ErrNotFound", err)
	}
	dst := gocv.NewMat()
	defer dst.Close()
	if _, err := sup.Read(&dst); err == nil {
		t.Error("Read after failed Start succeeded")
	}
}

// ExampleSupervisor reads a scripted camera that vanishes once.
func ExampleSupervisor() {
	clk := capturetest.NewClock(time.Unix(0, 0))
	fake := capturetest.NewFakeCamera(
		capturetest.Frames(3, capturetest.MJPEG320),
		capturetest.Vanish(0), // unplugged, back at the first reopen
		capturetest.Frames(3, capturetest.MJPEG320),
	)
	fake.Clock = clk
	sup := v4l2.NewSupervisor(fake, v4l2.Options{Name: "fake0", Clock: clk, EveryFrame: true})
	if err := sup.Start(); err != nil {
		fmt.Println(err)
		return
	}
	defer sup.Close()
	frame := gocv.NewMat()
	defer frame.Close()
	for got := 0; got < 6; {
		info, err := sup.Read(&frame)
		if err != nil {
			fmt.Println("fail-safe:", errors.Is(err, v4l2.ErrGone))
			continue
		}
		fmt.Println(info.Index, info.T.Round(time.Millisecond), info.Size)
		got++
	}
	st := sup.Stats()
	fmt.Printf("frames %d, losses %d, reopens %d\n", st.Frames, st.Losses, st.Reopens)
	// Output:
	// 0 0s (320,240)
	// 1 33ms (320,240)
	// 2 67ms (320,240)
	// fail-safe: true
	// 3 100ms (320,240)
	// 4 133ms (320,240)
	// 5 167ms (320,240)
	// frames 6, losses 1, reopens 1
}
