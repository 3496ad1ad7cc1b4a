package capture

import (
	"errors"
	"image"
	"time"
)

// FrameInfo describes one decoded frame.
type FrameInfo struct {
	// Index is the 0-based position of the frame in its source.
	Index int
	// T is the frame's timestamp from the start of the source: the
	// container's presentation time where it has one, otherwise Index/FPS.
	T time.Duration
	// Size is the frame's width and height in pixels.
	Size image.Point
	// Before is set only when replaying a recording: what the live run's
	// tracker was told between the previous frame and this one, in order
	// (watchdog ticks and faults), so that a replay repeats them.
	Before []TrackerEvent
}

// TrackerEvent is something a live run's tracker was told apart from a
// frame: a watchdog tick (Fault empty) or a fault with its reason (a
// camera stall or loss). T is the tracker's time.
type TrackerEvent struct {
	T     time.Duration
	Fault string
}

// SourceInfo describes a whole source.
type SourceInfo struct {
	// Name is what the user gave (a path, a device, "synthetic:NAME").
	Name string
	// Kind is "video", "images", "camera" or "synthetic".
	Kind string
	// Size is the nominal frame size; individual frames may differ.
	Size image.Point
	// FPS is the nominal frame rate; 0 when unknown.
	FPS float64
	// Frames is the number of frames when known in advance, else -1.
	Frames int
}

// Sentinel errors that callers act on. Errors from sources wrap them, so
// test with errors.Is.
var (
	// ErrNotFound: the named file, folder or device does not exist.
	ErrNotFound = errors.New("not found")
	// ErrUnreadable: the input exists but cannot be decoded as frames
	// (empty, truncated, not a video or image, unsupported format).
	ErrUnreadable = errors.New("unreadable")
	// ErrNoHardware: the platform has no support for the device (stubs).
	ErrNoHardware = errors.New("no hardware support on this platform")
)
