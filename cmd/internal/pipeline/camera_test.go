package pipeline_test

import (
	"context"
	"errors"
	"io"
	"testing"
	"time"

	"gocv.io/x/gocv"

	"github.com/hewline/hewline/capture"
	"github.com/hewline/hewline/capture/capturetest"
	"github.com/hewline/hewline/capture/v4l2"
	"github.com/hewline/hewline/cmd/internal/pipeline"
	"github.com/hewline/hewline/vision"
)

// seesLine finds the stripe in every frame it is given (the fake camera's
// test pattern), so the test is about timing, not detection.
type seesLine struct{}

func (seesLine) Detect(img gocv.Mat, _ vision.Hint) vision.Detection {
	if img.Empty() {
		return vision.Detection{Reason: "empty"}
	}
	return vision.Detection{Found: true, Confidence: 0.9, Method: "fake", RefRow: 380,
		Points: []vision.Point{{X: 320, Y: 479}, {X: 320, Y: 240}}}
}

// TestCameraStallAndReconnect runs the live pipeline over the supervised
// fake camera: frames, a 1 s stall, the camera vanishing and coming back,
// frames again. The alarm must be on during the outage and tracking must
// resume after it.
func TestCameraStallAndReconnect(t *testing.T) {
	clk := capturetest.NewClock(time.Unix(1000, 0))
	fake := capturetest.NewFakeCamera(
		capturetest.Frames(45, capturetest.MJPEG640),
		capturetest.Stall(time.Second),
		capturetest.Vanish(2),
		capturetest.Frames(60, capturetest.MJPEG640),
	)
	fake.Clock = clk
	sup := v4l2.NewSupervisor(fake, v4l2.Options{Clock: clk, EveryFrame: true, Name: "fake0", FPS: 30})
	if err := sup.Start(); err != nil {
		t.Fatal(err)
	}
	defer sup.Close()
	// Backoff waits are on the fake clock: keep it moving.
	defer clk.Pump(10*time.Millisecond, 2*time.Millisecond)()
	sink := &timedSink{}
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	defer cancel()
	done := make(chan struct{})
	var st pipeline.Stats
	var err error
	go func() {
		defer close(done)
		st, err = pipeline.Run(ctx, untilFrames{sup, 105, new(int)}, pipeline.Config{
			Detector: seesLine{}, Tracker: newTracker(t), Sinks: []pipeline.Sink{sink},
			Live: true, Now: clk.Now,
			Transient: func(err error) bool { return errors.Is(err, v4l2.ErrStalled) || errors.Is(err, v4l2.ErrGone) },
		})
	}()
	<-done
	if err != nil {
		t.Fatal(err)
	}
	if st.Faults == 0 {
		t.Error("the stall and the loss were not reported as faults")
	}
	sawTracking, sawAlarm, back := false, false, false
	for _, r := range sink.got {
		switch {
		case r.Est.Tracking && !sawAlarm:
			sawTracking = true
		case r.Est.Alarm && sawTracking:
			sawAlarm = true
		case r.Est.Tracking && sawAlarm:
			back = true
		}
	}
	if !sawTracking || !sawAlarm || !back {
		t.Errorf("tracking %v, then alarm %v, then tracking again %v: want all three", sawTracking, sawAlarm, back)
	}
	t.Logf("%d results, %d faults, camera stats %+v", len(sink.got), st.Faults, sup.Stats())
}

// untilFrames ends a source after n frames.
type untilFrames struct {
	s    *v4l2.Supervisor
	n    int
	seen *int
}

func (u untilFrames) Read(m *gocv.Mat) (capture.FrameInfo, error) {
	if *u.seen >= u.n {
		return capture.FrameInfo{}, io.EOF
	}
	fi, err := u.s.Read(m)
	if err == nil {
		*u.seen++
	}
	return fi, err
}
