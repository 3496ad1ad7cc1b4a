// Package capture provides hewline's frame sources: video files (MJPEG AVI,
// MP4), folders of still images, the V4L2 camera and the built-in synthetic
// floor scene (package capture/synth).
//
// Every source decodes into a caller-owned gocv.Mat in 8-bit BGR (CV_8UC3),
// converting grey or BGRA input, and reports a FrameInfo with the frame's
// index, its timestamp and its size. The pipeline asks only for the Read
// method; each concrete source also has Close and Info.
package capture
