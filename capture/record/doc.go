// Package record writes what a camera saw so that "hewline replay" can
// reproduce the live run frame for frame.
//
// A Recorder writes numbered MJPEG AVI clips (rec-0001.avi, rec-0002.avi,
// ...) that ordinary players open, each with a sidecar
// rec-0001.frames.ndjson holding the source timestamp of every frame. The
// first sidecar line is a header:
//
//	{"format":"hewline-frames/1","video":"rec-0001.avi","width":640,"height":480,"fps":30,"start":"2026-12-02T04:40:00.123Z"}
//
// and each further line one frame, in the order of the AVI's frames:
//
//	{"i":0,"src":1234,"t":41.133333,"wall":"2026-12-02T04:40:00.125Z"}
//
// i is the frame's position in the clip, src its Index in the source, t its
// source time in seconds (FrameInfo.T) and wall the wall-clock time it was
// written. t is written with Go's shortest exact float form, so ReadSidecar
// gives back the very nanosecond durations the live run saw; replay uses
// them instead of the container's times.
//
// Clips rotate by size and by duration. Recording never fills the disk: free
// space is checked before each clip and every few frames, and below the
// limit recording stops — the current clip is finalised, the reason is
// logged and kept in Err — while Write keeps returning nil so that guidance
// goes on. Each sidecar line is written straight to the file, so a crash
// loses at most the clip being written; the earlier clips are complete.
package record
