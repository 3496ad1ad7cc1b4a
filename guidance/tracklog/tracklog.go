package tracklog

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"

	"github.com/rs/zerolog"
)

// Format names this version of the track log in Header.Format.
const Format = "hewline-track/1"

// Header is the first line. It has no "frame" field.
type Header struct {
	Format  string  `json:"format"`
	Tool    string  `json:"tool"`
	Source  string  `json:"source"`
	Kind    string  `json:"kind"`
	Width   int     `json:"width"`
	Height  int     `json:"height"`
	FPS     float64 `json:"fps"`
	Follow  string  `json:"follow"`
	Started string  `json:"started"` // RFC 3339 wall time of the run
	// Settings holds the detector, tracker and output settings in force,
	// including the fail-safe time.
	Settings map[string]any `json:"settings"`
	// Part, PrevFile and PrevChain are set on the second and later files
	// of a rotated log (see RotatingWriter): Part counts files from 1,
	// PrevFile is the base name of the file before and PrevChain its last
	// chain value, from which this file's chain continues.
	Part      int    `json:"part,omitempty"`
	PrevFile  string `json:"prev_file,omitempty"`
	PrevChain string `json:"prev_chain,omitempty"`
	Chain     string `json:"chain,omitempty"`
}

// Record is one frame.
type Record struct {
	Frame      int          `json:"frame"`
	T          float64      `json:"t"`
	Tracking   bool         `json:"tracking"`
	Alarm      bool         `json:"alarm"`
	Confidence float64      `json:"confidence"`
	State      string       `json:"state"`
	Points     [][2]float64 `json:"points"`
	OffsetPx   float64      `json:"offset_px"`
	HeadingDeg float64      `json:"heading_deg"`
	Method     string       `json:"method"`
	// Optional fields.
	WidthPx        float64  `json:"width_px,omitempty"`
	MeasOffsetPx   *float64 `json:"meas_offset_px,omitempty"`
	MeasConfidence float64  `json:"meas_confidence"`
	Gated          bool     `json:"gated,omitempty"`
	Reason         string   `json:"reason,omitempty"`
	// MeasReason is the detector's own word on a line it found but rates
	// below 0.5 (the weakest of its confidence factors: "short line",
	// "saturated (glare or reflection)", ...).
	MeasReason string `json:"meas_reason,omitempty"`
	// ReachPx is how far the measured line is seen beyond the reference
	// row toward the far end, in image rows (negative: it ends short of
	// the row), as the tracker's end-of-line rule took it: the fitted
	// line's far end, or the near mark's end ahead of a stretch too long
	// to bridge, or in lane mode the boundaries' support.
	ReachPx         *float64 `json:"reach_px,omitempty"`
	OffsetMM        *float64 `json:"offset_mm,omitempty"`
	HeadingFloorDeg *float64 `json:"heading_floor_deg,omitempty"`
	WidthMM         *float64 `json:"width_mm,omitempty"`
	// PredictedPoints is the centreline guidance ran on when it tracked
	// on the filter's prediction alone (coasting through a frame whose
	// measurement was missing, unsure or gated): the last accepted line
	// moved with the filtered offset and heading. Points stays the
	// detector's own view of the frame.
	PredictedPoints [][2]float64 `json:"predicted_points,omitempty"`
	// Lane mode (Header.Follow "lane"): Points, OffsetPx and HeadingDeg
	// are the lane's centre; LeftPoints and RightPoints are the boundary
	// lines the detector saw (a side not seen this frame is absent),
	// LanePx the lane's width at the reference row (measured, or learned
	// when one side is missing) and LaneMM the same on the floor with a
	// calibration, while tracking.
	LeftPoints  [][2]float64 `json:"left_points,omitempty"`
	RightPoints [][2]float64 `json:"right_points,omitempty"`
	LanePx      float64      `json:"lane_width_px,omitempty"`
	LaneMM      *float64     `json:"lane_width_mm,omitempty"`
	// Latencies in milliseconds (live runs): capture → decision → cue.
	CaptureMS  *float64 `json:"capture_ms,omitempty"`
	DecisionMS *float64 `json:"decision_ms,omitempty"`
	Chain      string   `json:"chain,omitempty"`
}

// Summary is the last line. It has no "frame" field.
type Summary struct {
	Summary        bool           `json:"summary"`
	Frames         int            `json:"frames"`
	TrackingFrames int            `json:"tracking_frames"`
	AlarmFrames    int            `json:"alarm_frames"`
	Alarms         int            `json:"alarms"` // times the alarm turned on
	StateFrames    map[string]int `json:"state_frames"`
	MethodFrames   map[string]int `json:"method_frames"`
	Duration       float64        `json:"duration_s"`
	End            string         `json:"end"` // "eof", "error: ...", "interrupted", "rotated"
	// Next names the file the log continues in when End is "rotated".
	Next  string             `json:"next,omitempty"`
	Extra map[string]float64 `json:"extra,omitempty"`
	Chain string             `json:"chain,omitempty"`
}

// Writer writes a track log. It is not safe for concurrent use.
type Writer struct {
	log       zerolog.Logger
	cw        *chainWriter
	pts       []byte
	cpts      []byte
	side      []byte
	pred      []byte
	sum       Summary
	prevAlarm bool
	closed    bool
}

// NewWriter writes the header to w at once. w should be unbuffered (an
// *os.File) so that each line reaches the file as it is written.
func NewWriter(w io.Writer, h Header) (*Writer, error) {
	h.Part, h.PrevFile, h.PrevChain = 0, "", ""
	return newWriter(w, h, [32]byte{})
}

// newWriter starts the chain from prev (zero for a first file).
func newWriter(w io.Writer, h Header, prev [32]byte) (*Writer, error) {
	h.Format = Format
	h.Chain = ""
	cw := &chainWriter{w: w, prev: prev}
	hb, err := json.Marshal(h)
	if err != nil {
		return nil, fmt.Errorf("tracklog: header: %w", err)
	}
	if _, err := cw.Write(append(hb, '\n')); err != nil {
		return nil, fmt.Errorf("tracklog: write header: %w", err)
	}
	return &Writer{
		log: zerolog.New(cw),
		cw:  cw,
		sum: Summary{Summary: true, StateFrames: map[string]int{}, MethodFrames: map[string]int{}},
	}, nil
}

// r3 rounds to 3 decimals and maps non-finite values to 0 so that every
// line stays valid JSON.
func r3(x float64) float64 {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return 0
	}
	return math.Round(x*1000) / 1000
}

// Write appends one frame record. The record is not retained.
func (w *Writer) Write(r *Record) error {
	if w.closed {
		return errors.New("tracklog: write after close")
	}
	w.cpts = appendPoints(w.cpts[:0], r.Points)
	e := w.log.Log().
		Int("frame", r.Frame).
		Float64("t", math.Round(r.T*1e6)/1e6).
		Bool("tracking", r.Tracking).
		Bool("alarm", r.Alarm).
		Float64("confidence", r3(r.Confidence)).
		Str("state", r.State).
		RawJSON("points", w.cpts).
		Float64("offset_px", r3(r.OffsetPx)).
		Float64("heading_deg", r3(r.HeadingDeg)).
		Str("method", r.Method).
		Float64("meas_confidence", r3(r.MeasConfidence))
	if r.WidthPx != 0 {
		e = e.Float64("width_px", r3(r.WidthPx))
	}
	if r.MeasOffsetPx != nil {
		e = e.Float64("meas_offset_px", r3(*r.MeasOffsetPx))
	}
	if r.Gated {
		e = e.Bool("gated", true)
	}
	if r.Reason != "" {
		e = e.Str("reason", r.Reason)
	}
	if r.MeasReason != "" {
		e = e.Str("meas_reason", r.MeasReason)
	}
	if r.ReachPx != nil {
		e = e.Float64("reach_px", r3(*r.ReachPx))
	}
	if len(r.PredictedPoints) > 0 {
		w.pred = appendPoints(w.pred[:0], r.PredictedPoints)
		e = e.RawJSON("predicted_points", w.pred)
	}
	if len(r.LeftPoints) > 0 {
		w.pts = appendPoints(w.pts[:0], r.LeftPoints)
		e = e.RawJSON("left_points", w.pts)
	}
	if len(r.RightPoints) > 0 {
		w.side = appendPoints(w.side[:0], r.RightPoints)
		e = e.RawJSON("right_points", w.side)
	}
	if r.LanePx != 0 {
		e = e.Float64("lane_width_px", r3(r.LanePx))
	}
	for _, f := range []struct {
		k string
		v *float64
	}{{"offset_mm", r.OffsetMM}, {"heading_floor_deg", r.HeadingFloorDeg}, {"width_mm", r.WidthMM}, {"lane_width_mm", r.LaneMM}, {"capture_ms", r.CaptureMS}, {"decision_ms", r.DecisionMS}} {
		if f.v != nil {
			e = e.Float64(f.k, r3(*f.v))
		}
	}
	e.Send()
	if w.cw.err != nil {
		return fmt.Errorf("tracklog: write frame %d: %w", r.Frame, w.cw.err)
	}
	s := &w.sum
	s.Frames++
	if r.Tracking {
		s.TrackingFrames++
	}
	if r.Alarm {
		s.AlarmFrames++
		if !w.prevAlarm {
			s.Alarms++
		}
	}
	w.prevAlarm = r.Alarm
	s.StateFrames[r.State]++
	if r.Method != "" {
		s.MethodFrames[r.Method]++
	}
	s.Duration = r.T
	return nil
}

// Summary returns the summary counted so far.
func (w *Writer) Summary() Summary { return w.sum }

// Close writes the summary line with the given end reason and extra
// figures. It does not close the underlying writer.
func (w *Writer) Close(end string, extra map[string]float64) error {
	if w.closed {
		return nil
	}
	w.closed = true
	w.sum.End = end
	w.sum.Extra = extra
	b, err := json.Marshal(w.sum)
	if err != nil {
		return fmt.Errorf("tracklog: summary: %w", err)
	}
	if _, err := w.cw.Write(append(b, '\n')); err != nil {
		return fmt.Errorf("tracklog: write summary: %w", err)
	}
	return nil
}

func appendPoints(b []byte, pts [][2]float64) []byte {
	b = append(b, '[')
	for i, p := range pts {
		if i > 0 {
			b = append(b, ',')
		}
		b = append(b, '[')
		b = strconv.AppendFloat(b, math.Round(r3(p[0])*10)/10, 'f', -1, 64)
		b = append(b, ',')
		b = strconv.AppendFloat(b, math.Round(r3(p[1])*10)/10, 'f', -1, 64)
		b = append(b, ']')
	}
	return append(b, ']')
}

// chainWriter appends the chain field to every JSON line passing through.
// Each Write must be exactly one line ending in "}\n" (zerolog writes so).
type chainWriter struct {
	w    io.Writer
	prev [32]byte
	buf  []byte
	err  error
	n    int64 // bytes written
}

func (c *chainWriter) Write(p []byte) (int, error) {
	if c.err != nil {
		return 0, c.err
	}
	body := bytes.TrimRight(p, "\n")
	if len(body) < 2 || body[len(body)-1] != '}' {
		c.err = fmt.Errorf("tracklog: internal: line is not a JSON object")
		return 0, c.err
	}
	body = body[:len(body)-1] // without the closing brace
	sum := chainHash(c.prev, body)
	c.prev = sum
	c.buf = append(c.buf[:0], body...)
	c.buf = append(c.buf, `,"chain":"`...)
	c.buf = hex.AppendEncode(c.buf, sum[:])
	c.buf = append(c.buf, "\"}\n"...)
	n, err := c.w.Write(c.buf)
	c.n += int64(n)
	if err != nil {
		c.err = err
		return 0, err
	}
	return len(p), nil
}

// chainHash is SHA-256(prev || body).
func chainHash(prev [32]byte, body []byte) [32]byte {
	h := sha256.New()
	h.Write(prev[:])
	h.Write(body)
	var out [32]byte
	h.Sum(out[:0])
	return out
}
