package pipeline

import (
	"math"

	"github.com/hewline/hewline/guidance"
	"github.com/hewline/hewline/vision"
)

// predictor remembers the last centreline the tracker accepted, so that a
// frame on which guidance runs on the filter's prediction alone (Tracking
// without Measured: coasting through a missing, unsure or gated frame) can
// show the line guidance is using rather than the detector's raw
// measurement. The prediction is that last line moved by the change in the
// filtered offset and heading since it was accepted:
//
//	x'(y) = x(y) + (off − off₀) + (tan h − tan h₀)·(ref − y)
//
// which keeps the line's shape (a curve stays a curve) and agrees with the
// filter exactly at the reference row, where guidance measures.
type predictor struct {
	last     []vision.Point
	off0, h0 float64
	ref      float64
	have     bool
}

// next returns the predicted centreline for this frame, or nil when the
// frame's own measurement was used (or there is no track). The returned
// slice is new: the result it goes into may be kept by a sink.
func (p *predictor) next(d vision.Detection, e guidance.Estimate) []vision.Point {
	if !e.Tracking {
		p.have = false
		return nil
	}
	if e.Measured && d.Found {
		p.last = append(p.last[:0], d.Points...)
		// Anchor on the filtered values: the prediction must agree with
		// what guidance reports, not with the raw measurement.
		p.off0, p.h0, p.ref, p.have = e.OffsetPx, e.HeadingDeg, d.RefRow, true
		return nil
	}
	if !p.have || len(p.last) == 0 {
		return nil
	}
	dOff := e.OffsetPx - p.off0
	dTan := math.Tan(e.HeadingDeg*math.Pi/180) - math.Tan(p.h0*math.Pi/180)
	out := make([]vision.Point, len(p.last))
	for i, q := range p.last {
		out[i] = vision.Point{X: q.X + dOff + dTan*(p.ref-q.Y), Y: q.Y}
	}
	return out
}
