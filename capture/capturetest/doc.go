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
package capturetest
