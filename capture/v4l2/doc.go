// Package v4l2 is hewline's live camera: Video4Linux2 devices read through
// github.com/blackjack/webcam, decoded to 8-bit BGR, and watched by a
// Supervisor that turns a camera that stalls, vanishes or changes format into
// events the pipeline can act on at once (raise the fail-safe).
//
// The package has three layers:
//
//   - The hardware layer (device_linux.go; stubs on other platforms return
//     capture.ErrNoHardware) lists devices, queries their modes and copies
//     each driver buffer out of the mmap region into a caller-owned []byte.
//     It is kept thin on purpose: nothing above it needs a real camera to be
//     tested.
//   - Decode (decode.go) turns MJPEG and YUYV bytes into BGR in a
//     caller-owned gocv.Mat, validating the bytes first so that OpenCV never
//     sees input that could abort the process.
//   - The Supervisor (supervisor.go) reads a RawCamera on its own goroutine,
//     keeps only the freshest frame in live mode (counting every dropped
//     stale frame), detects stalls and disappearance, reopens with
//     exponential backoff and reports Events. Tests drive it with
//     capturetest.FakeCamera and a fake clock.
//
// ChooseMode picks a capture mode: by default the largest size up to
// 640×480 that runs at 30 fps or more.
//
// Timestamps: webcam v0.6.1 does not expose the driver's buffer timestamp
// (its dequeue call discards struct v4l2_buffer's timestamp), so the device
// layer stamps each frame with the monotonic time at which it was dequeued.
// That is later than the exposure by the driver and USB latency (typically a
// frame interval or less; not measured here, no camera on this machine).
package v4l2
