// Package capturetest provides fakes for testing code above the camera: a
// scripted FakeCamera that implements v4l2.RawCamera (frames in MJPEG or
// YUYV, stalls, holds, driver-side drops, corrupt frames, format changes, a
// camera that vanishes and comes back) and a manual Clock.
//
// Typical use, for a run-loop test:
//
//	clk := capturetest.NewClock(time.Unix(0, 0))
//	fake := capturetest.NewFakeCamera(
//		capturetest.Frames(30, capturetest.MJPEG640),
//		capturetest.Stall(time.Second),
//		capturetest.Frames(30, capturetest.MJPEG640),
//	)
//	fake.Clock = clk // the fake moves time forward as it "films"
//	sup := v4l2.NewSupervisor(fake, v4l2.Options{Clock: clk, EveryFrame: true})
//
// With Clock set, each served frame advances it by Interval and each stall
// poll by Poll, so the Supervisor's stall and reopen timers fire exactly as
// they would on the cart, without real waiting. Backoff waits after a
// Vanish step are waits on the clock too: advance it from the test (see
// Pump).
//
// For a whole live loop (Supervisor, pipeline watchdog, detector, timeouts)
// prefer a testing/synctest bubble with Clock set to Sleeper and the
// Supervisor on its default SystemClock: every wait in the bubble is on one
// simulated clock that moves only when all goroutines are blocked, so a
// stall lasts exactly its length, backoff waits need no Pump, and nothing
// depends on how busy the machine is:
//
//	synctest.Test(t, func(t *testing.T) {
//		fake := capturetest.NewFakeCamera(steps...)
//		fake.Clock = capturetest.Sleeper{}
//		sup := v4l2.NewSupervisor(fake, v4l2.Options{})
//		... pipeline.Run(ctx, sup, pipeline.Config{Live: true, Watchdog: 20 * time.Millisecond, ...})
//	})
//
// (cmd/internal/pipeline/camera_test.go does this.)
package capturetest
