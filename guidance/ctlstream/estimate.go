package ctlstream

import (
	"fmt"
	"math"

	"github.com/hewline/hewline/guidance"
)

// FromEstimate builds the guidance message for a tracker estimate of frame
// frame. Tracking and Alarm come from the estimate (only Holding and
// Coasting track); the capture time is e.T. Set CapturedAt to the frame's
// wall-clock read time in live use (so that a late frame is withheld and
// the receiver sees the latency), and add floor values with SetFloor when
// calibrated.
func FromEstimate(e guidance.Estimate, frame int) Message {
	m := Message{
		Type:       TypeGuidance,
		Frame:      frame,
		CaptureT:   e.T,
		Tracking:   e.Tracking && !e.Alarm,
		Alarm:      e.Alarm,
		State:      e.State.String(),
		Confidence: e.Confidence,
		Reason:     e.Reason,
	}
	if m.Tracking {
		m.OffsetPx, m.HeadingDeg = e.OffsetPx, e.HeadingDeg
	}
	return m
}

// Floor is one frame's calibrated floor measurement, in the vehicle frame.
type Floor struct {
	// OffsetMM and HeadingDeg: the line's lateral offset (positive right)
	// and heading (positive = turns right) on the floor.
	OffsetMM, HeadingDeg float64
	// AheadMM: how far ahead of the steering reference point (the rear
	// axle for pure pursuit) the offset is measured.
	AheadMM float64
	// LookAheadMM: the pure-pursuit look-ahead distance; 0 means no
	// curvature hint.
	LookAheadMM float64
}

// SetFloor adds floor values, and the pure-pursuit curvature when
// f.LookAheadMM > 0, to a tracking message. It does nothing when m is not
// tracking. A non-finite value is an error (m is left unchanged); a line
// that the look-ahead circle does not reach leaves the curvature unset.
func (m *Message) SetFloor(f Floor) error {
	if !m.Tracking {
		return nil
	}
	if !finite(f.OffsetMM) || !finite(f.HeadingDeg) || !finite(f.AheadMM) || !finite(f.LookAheadMM) {
		return fmt.Errorf("%w: non-finite floor values %+v", ErrInvalid, f)
	}
	off, head := f.OffsetMM, f.HeadingDeg
	m.OffsetMM, m.HeadingFloorDeg, m.CurvaturePerM = &off, &head, nil
	if f.LookAheadMM > 0 {
		k, err := LineCurvature(f.AheadMM/1000, f.OffsetMM/1000, f.HeadingDeg*math.Pi/180, f.LookAheadMM/1000)
		if err == nil {
			m.CurvaturePerM = &k
		}
	}
	return nil
}
