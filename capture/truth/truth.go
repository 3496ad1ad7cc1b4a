// Package truth defines hewline's ground-truth file: what a clip really
// shows, frame by frame, so that a replay can be scored against it.
//
// The file is NDJSON (one JSON object per line). The first line is a Header
// (it has a "format" field and no "frame" field); every further line is one
// Frame. The format is hewline's own; its name and version are in
// Header.Format so that readers can refuse what they do not understand.
//
// Image coordinates are in the clip's pixels (x right, y down); floor values
// are in metres and degrees relative to the vehicle's axis, with the sign of
// each field given in Frame.
package truth

import (
	"bufio"
	"encoding/json"
	"errors"
	"fmt"
	"io"
)

// Format is the value of Header.Format this package reads and writes.
const Format = "hewline-truth/1"

// Header is the first line of a truth file.
type Header struct {
	Format   string  `json:"format"`
	Scenario string  `json:"scenario"`
	Follow   string  `json:"follow"` // "stripe" or "lane"
	Width    int     `json:"width"`
	Height   int     `json:"height"`
	FPS      float64 `json:"fps"`
	Frames   int     `json:"frames"`
	// RefRow is the image row at which OffsetPx and HeadingDeg are given.
	RefRow float64 `json:"ref_row"`
	// LookaheadM is the distance ahead of the camera, on the floor, at
	// which OffsetM is given.
	LookaheadM float64 `json:"lookahead_m"`
	// Notes says in words what the scenario contains.
	Notes string `json:"notes,omitempty"`
}

// Frame is the truth for one frame.
type Frame struct {
	Frame int     `json:"frame"`
	T     float64 `json:"t"`
	// Visible is true when the stripe (or, in lane mode, the lane centre)
	// can be seen well enough in the near half of the image that a
	// tracker should follow it. When false a tracker should not claim
	// tracking and the fail-safe is expected to fire.
	Visible bool `json:"visible"`
	// Points is the true centreline, [x, y] pairs in image pixels, one per
	// sampled row from the bottom of the image upwards, only where the
	// line is in view (it may be empty).
	Points [][2]float64 `json:"points"`
	// OffsetPx, HeadingDeg: image-plane values at Header.RefRow, with the
	// conventions of package vision. Meaningful only when Visible.
	OffsetPx   float64 `json:"offset_px"`
	HeadingDeg float64 `json:"heading_deg"`
	// WidthPx is the apparent stripe width at RefRow.
	WidthPx float64 `json:"width_px"`
	// OffsetM is the lateral distance on the floor from the camera's
	// optical axis to the centreline at Header.LookaheadM ahead, positive
	// when the line is to the right of the vehicle.
	OffsetM float64 `json:"offset_m"`
	// HeadingFloorDeg is the angle on the floor between the vehicle's
	// axis and the line's tangent at the look-ahead point, positive when
	// the line turns to the right.
	HeadingFloorDeg float64 `json:"heading_floor_deg"`
	// Left and Right are the two boundary lines in lane mode, [x, y]
	// pairs like Points, each only where that line is laid and in view.
	// In lane mode Points, OffsetPx and HeadingDeg are the lane's centre
	// (midway between the boundaries), present where at least one
	// boundary is, and WidthPx is 0.
	Left  [][2]float64 `json:"left,omitempty"`
	Right [][2]float64 `json:"right,omitempty"`
	// LaneWidthPx is the lane's width at RefRow in lane mode: the
	// horizontal distance between the boundaries' centrelines. LaneWidthM
	// is the same on the floor. Both are absent (0) in stripe mode and in
	// files written before lane mode.
	LaneWidthPx float64 `json:"lane_width_px,omitempty"`
	LaneWidthM  float64 `json:"lane_width_m,omitempty"`
	// Tags name the conditions in this frame ("shadow", "gap", ...).
	Tags []string `json:"tags,omitempty"`
}

// Writer writes a truth file.
type Writer struct {
	enc *json.Encoder
	err error
}

// NewWriter writes h at once and returns a Writer for the frames.
func NewWriter(w io.Writer, h Header) (*Writer, error) {
	if h.Format == "" {
		h.Format = Format
	}
	tw := &Writer{enc: json.NewEncoder(w)}
	if err := tw.enc.Encode(h); err != nil {
		return nil, fmt.Errorf("truth: write header: %w", err)
	}
	return tw, nil
}

// Write appends one frame.
func (w *Writer) Write(f Frame) error {
	if w.err != nil {
		return w.err
	}
	if err := w.enc.Encode(f); err != nil {
		w.err = fmt.Errorf("truth: write frame %d: %w", f.Frame, err)
	}
	return w.err
}

// ErrFormat marks a file that is not a truth file this package can read.
var ErrFormat = errors.New("not a hewline truth file")

// Read reads a whole truth file. Frames come back indexed by position; a
// file whose frame numbers are not 0, 1, 2, ... is refused.
func Read(r io.Reader) (Header, []Frame, error) {
	sc := bufio.NewScanner(r)
	sc.Buffer(make([]byte, 0, 1<<16), 1<<24)
	var h Header
	if !sc.Scan() {
		if err := sc.Err(); err != nil {
			return h, nil, fmt.Errorf("truth: %w", err)
		}
		return h, nil, fmt.Errorf("truth: empty file: %w", ErrFormat)
	}
	if err := json.Unmarshal(sc.Bytes(), &h); err != nil {
		return h, nil, fmt.Errorf("truth: line 1: %v: %w", err, ErrFormat)
	}
	if h.Format != Format {
		return h, nil, fmt.Errorf("truth: line 1: format %q, want %q: %w", h.Format, Format, ErrFormat)
	}
	var frames []Frame
	line := 1
	for sc.Scan() {
		line++
		var f Frame
		if err := json.Unmarshal(sc.Bytes(), &f); err != nil {
			return h, nil, fmt.Errorf("truth: line %d: %v: %w", line, err, ErrFormat)
		}
		if f.Frame != len(frames) {
			return h, nil, fmt.Errorf("truth: line %d: frame %d, want %d: %w", line, f.Frame, len(frames), ErrFormat)
		}
		frames = append(frames, f)
	}
	if err := sc.Err(); err != nil {
		return h, nil, fmt.Errorf("truth: line %d: %w", line+1, err)
	}
	return h, frames, nil
}
