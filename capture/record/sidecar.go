package record

import (
	"bufio"
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"strings"
	"time"

	"github.com/hewline/hewline/capture"
)

// SidecarFormat names the sidecar format in its header line.
const SidecarFormat = "hewline-frames/1"

// SidecarHeader is the first line of a sidecar.
type SidecarHeader struct {
	Format string    `json:"format"`
	Video  string    `json:"video"`
	Width  int       `json:"width"`
	Height int       `json:"height"`
	FPS    float64   `json:"fps"`
	Start  time.Time `json:"start"`
}

// SidecarFrame is one frame line of a sidecar.
type SidecarFrame struct {
	I    int       `json:"i"`
	Src  int       `json:"src"`
	T    float64   `json:"t"`
	Wall time.Time `json:"wall"`
	// Before lists what the live tracker was told between the previous
	// recorded frame and this one (watchdog ticks, faults), in order.
	Before []SidecarEvent `json:"before,omitempty"`
}

// SidecarEvent is a watchdog tick (Fault empty) or a fault, at the
// tracker's time T in seconds.
type SidecarEvent struct {
	T     float64 `json:"t"`
	Fault string  `json:"fault,omitempty"`
}

// Events returns each frame's tracker events (for
// capture.VideoFile.UseEvents); nil when the sidecar has none.
func Events(frames []SidecarFrame) [][]capture.TrackerEvent {
	var out [][]capture.TrackerEvent
	for i, f := range frames {
		if len(f.Before) == 0 {
			continue
		}
		if out == nil {
			out = make([][]capture.TrackerEvent, len(frames))
		}
		evs := make([]capture.TrackerEvent, len(f.Before))
		for k, e := range f.Before {
			evs[k] = capture.TrackerEvent{T: seconds(e.T), Fault: e.Fault}
		}
		out[i] = evs
	}
	return out
}

func seconds(s float64) time.Duration { return time.Duration(math.Round(s * float64(time.Second))) }

// SidecarPath returns the sidecar of a clip: rec-0001.avi →
// rec-0001.frames.ndjson.
func SidecarPath(video string) string {
	return strings.TrimSuffix(video, ".avi") + ".frames.ndjson"
}

// ReadSidecar reads a sidecar and returns each frame's source time, in clip
// order. A last line cut short (the recorder was killed mid-write) is
// ignored; any other damage is an error wrapping capture.ErrUnreadable.
func ReadSidecar(path string) ([]time.Duration, error) {
	_, frames, err := ReadSidecarFull(path)
	if err != nil {
		return nil, err
	}
	return Times(frames), nil
}

// Times returns each frame's source time (for
// capture.VideoFile.UseTimestamps).
func Times(frames []SidecarFrame) []time.Duration {
	ts := make([]time.Duration, len(frames))
	for i, f := range frames {
		ts[i] = seconds(f.T)
	}
	return ts
}

// ReadSidecarFull reads a sidecar's header and frame lines.
func ReadSidecarFull(path string) (SidecarHeader, []SidecarFrame, error) {
	var h SidecarHeader
	data, err := os.ReadFile(path)
	if errors.Is(err, os.ErrNotExist) {
		return h, nil, fmt.Errorf("record: read sidecar %s: %w", path, capture.ErrNotFound)
	}
	if err != nil {
		return h, nil, fmt.Errorf("record: read sidecar %s: %v: %w", path, err, capture.ErrUnreadable)
	}
	complete := len(data) > 0 && data[len(data)-1] == '\n'
	sc := bufio.NewScanner(bytes.NewReader(data))
	sc.Buffer(make([]byte, 64*1024), 1<<20)
	var frames []SidecarFrame
	line := 0
	bad := func(msg string) error {
		return fmt.Errorf("record: sidecar %s line %d: %s: %w", path, line, msg, capture.ErrUnreadable)
	}
	var lines [][]byte
	for sc.Scan() {
		lines = append(lines, append([]byte(nil), sc.Bytes()...))
	}
	if err := sc.Err(); err != nil {
		return h, nil, fmt.Errorf("record: read sidecar %s: %v: %w", path, err, capture.ErrUnreadable)
	}
	for k, b := range lines {
		line = k + 1
		last := k == len(lines)-1
		if line == 1 {
			if err := json.Unmarshal(b, &h); err != nil || h.Format != SidecarFormat {
				return h, nil, bad(fmt.Sprintf("not a %s header", SidecarFormat))
			}
			continue
		}
		var f SidecarFrame
		if err := json.Unmarshal(b, &f); err != nil {
			if last && !complete {
				break // cut short by a crash
			}
			return h, nil, bad("not a frame line")
		}
		if f.I != len(frames) {
			return h, nil, bad(fmt.Sprintf("frame %d where %d was expected", f.I, len(frames)))
		}
		if math.IsNaN(f.T) || math.IsInf(f.T, 0) {
			return h, nil, bad("bad time")
		}
		for k, e := range f.Before {
			if math.IsNaN(e.T) || math.IsInf(e.T, 0) || e.T > f.T || (k > 0 && e.T < f.Before[k-1].T) {
				return h, nil, bad(fmt.Sprintf("tracker event %d: time %v out of order (frame at %v)", k, e.T, f.T))
			}
		}
		frames = append(frames, f)
	}
	if line == 0 {
		return h, nil, fmt.Errorf("record: sidecar %s: empty: %w", path, capture.ErrUnreadable)
	}
	return h, frames, nil
}
