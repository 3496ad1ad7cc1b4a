// Package score compares a replay's track log with the clip's ground truth
// and computes the figures hewline is judged by: recall, error percentiles,
// false tracks, alarm latency and false alarms.
//
// Definitions (also in the README):
//   - Tolerance: 10 px at 640 px frame width, scaled with the width: the
//     TuSimple lane benchmark's 20 px at 1280 px (its evaluate/lane.py).
//   - A frame's error is the mean |x_detected(y) − x_true(y)| over the truth
//     rows in the near (lower) half of the image; rows the detection does
//     not cover count as misses. The line judged is the one guidance ran
//     on: the record's predicted_points when it tracked on the filter's
//     prediction alone (coasting), its points otherwise. A frame is correct when it claims tracking
//     and at least 85 % of those rows lie within the tolerance (TuSimple's
//     85 % point-match rule).
//   - Recall: correct frames / frames where the truth says the line is
//     visible.
//   - False track: a frame that claims tracking where the truth says no
//     line is visible, or whose error exceeds 30 px at 640 (scaled). The
//     reliability table uses the detector's own points and confidence.
//   - Alarm latency: for each loss of the line (visible → not visible),
//     the time from the first invisible frame to the first frame with the
//     alarm on; a loss with no alarm before the line returns (or the clip
//     ends) counts as a missed alarm.
//   - False alarm: an alarm onset (off → on, not at the first frame) while
//     the truth has shown the line for the whole preceding second.
//
// Clip counts these over a clip; Frames gives the same judgement frame by
// frame and Runs groups the frames it counts against the tracker (the
// hewline misses command).
package score

import (
	"fmt"
	"math"
	"sort"

	"github.com/hewline/hewline/capture/truth"
	"github.com/hewline/hewline/guidance/tracklog"
)

// Frame-level constants of the scoring rules (see the package comment).
const (
	TolPxAt640      = 10.0
	FalseTrackAt640 = 30.0
	MatchFraction   = 0.85
	FalseAlarmQuiet = 1.0 // seconds of visible line before an onset
)

// Result holds one clip's scores (or, from Combine, several clips').
type Result struct {
	Name           string
	Frames         int
	VisibleFrames  int
	CorrectFrames  int
	TrackedVisible int       // visible frames with tracking claimed
	Errors         []float64 // px, per tracked visible frame with coverage
	FalseTracks    int
	Losses         int
	MissedAlarms   int
	AlarmLatencies []float64 // s, one per loss with an alarm
	FalseAlarms    int
	// Reliability bins: stated confidence (of the detector's measurement)
	// against the observed fraction of frames within tolerance.
	Bins [10]Bin
}

// Bin is one reliability-table row.
type Bin struct{ N, Within int }

// Recall is CorrectFrames / VisibleFrames (1 when nothing was visible).
func (r *Result) Recall() float64 {
	if r.VisibleFrames == 0 {
		return 1
	}
	return float64(r.CorrectFrames) / float64(r.VisibleFrames)
}

// MedianError and P95Error are percentiles of the per-frame error in px.
func (r *Result) MedianError() float64 { return percentile(r.Errors, 0.5) }
func (r *Result) P95Error() float64    { return percentile(r.Errors, 0.95) }

// MaxLatency is the longest alarm latency in s (+Inf when an alarm was
// missed, NaN when there was no loss).
func (r *Result) MaxLatency() float64 {
	if r.MissedAlarms > 0 {
		return math.Inf(1)
	}
	if len(r.AlarmLatencies) == 0 {
		return math.NaN()
	}
	m := 0.0
	for _, l := range r.AlarmLatencies {
		m = math.Max(m, l)
	}
	return m
}

// FalseTrackRate is FalseTracks / Frames.
func (r *Result) FalseTrackRate() float64 {
	if r.Frames == 0 {
		return 0
	}
	return float64(r.FalseTracks) / float64(r.Frames)
}

func percentile(xs []float64, p float64) float64 {
	if len(xs) == 0 {
		return math.NaN()
	}
	s := append([]float64(nil), xs...)
	sort.Float64s(s)
	// Nearest-rank on the sorted sample, linear between neighbours.
	pos := p * float64(len(s)-1)
	lo := int(math.Floor(pos))
	hi := int(math.Ceil(pos))
	return s[lo] + (s[hi]-s[lo])*(pos-float64(lo))
}

// Clip scores one clip. records and frames must describe the same frames
// (same count, same indices).
func Clip(name string, h truth.Header, frames []truth.Frame, records []tracklog.Record) (*Result, error) {
	if err := matchable(h, frames, records); err != nil {
		return nil, fmt.Errorf("score %s: %w", name, err)
	}
	tol, falseTol := tolerances(h)
	r := &Result{Name: name, Frames: len(frames)}
	lossAt := -1.0 // time of the current loss, or −1
	lastInvisibleT := math.Inf(-1)
	for i, tf := range frames {
		rec := records[i]
		// Alarm bookkeeping.
		onset := rec.Alarm && i > 0 && !records[i-1].Alarm
		if !tf.Visible {
			lastInvisibleT = tf.T
			if i == 0 || frames[i-1].Visible {
				lossAt = tf.T
				r.Losses++
			}
		}
		if lossAt >= 0 && rec.Alarm {
			r.AlarmLatencies = append(r.AlarmLatencies, tf.T-lossAt)
			lossAt = -1
		}
		if lossAt >= 0 && tf.Visible {
			// The line came back before any alarm.
			r.MissedAlarms++
			lossAt = -1
		}
		if onset && tf.Visible && tf.T-lastInvisibleT > FalseAlarmQuiet && tf.T-frames[0].T > FalseAlarmQuiet {
			r.FalseAlarms++
		}

		v, err, frac, ok := judge(tf, rec, h.Height, tol, falseTol)
		if v == False {
			r.FalseTracks++
		}
		if !tf.Visible {
			continue
		}
		r.VisibleFrames++
		if rec.Tracking {
			r.TrackedVisible++
			if ok {
				r.Errors = append(r.Errors, err)
			}
			if frac >= MatchFraction {
				r.CorrectFrames++
			}
		}
		if len(rec.Points) > 0 {
			if len(rec.PredictedPoints) > 0 {
				_, frac, _ = frameError(tf, rec.Points, h.Height, tol)
			}
			b := int(math.Min(9, math.Max(0, rec.MeasConfidence*10)))
			r.Bins[b].N++
			if frac >= MatchFraction {
				r.Bins[b].Within++
			}
		}
	}
	if lossAt >= 0 {
		r.MissedAlarms++
	}
	return r, nil
}

// matchable checks that records can be scored against frames and h: one
// record per truth frame, in the same order, and a frame size.
func matchable(h truth.Header, frames []truth.Frame, records []tracklog.Record) error {
	if len(frames) != len(records) {
		return fmt.Errorf("truth has %d frames, the track log %d", len(frames), len(records))
	}
	if h.Width <= 0 || h.Height <= 0 {
		return fmt.Errorf("truth header has no frame size")
	}
	for i, tf := range frames {
		if records[i].Frame != tf.Frame {
			return fmt.Errorf("record %d is frame %d, truth frame %d", i, records[i].Frame, tf.Frame)
		}
	}
	return nil
}

// tolerances are the match tolerance and the false-track limit at h's
// width (TolPxAt640 and FalseTrackAt640 scaled).
func tolerances(h truth.Header) (tol, falseTol float64) {
	scale := float64(h.Width) / 640
	return TolPxAt640 * scale, FalseTrackAt640 * scale
}

// guided is the centreline guidance ran on in rec: the predicted line while
// it coasted on the filter alone, the detected one otherwise.
func guided(rec tracklog.Record) [][2]float64 {
	if rec.Tracking && len(rec.PredictedPoints) > 0 {
		return rec.PredictedPoints
	}
	return rec.Points
}

// frameError compares a centreline with the frame's truth over the near
// half. ok is false when the line covers none of those rows.
func frameError(tf truth.Frame, line [][2]float64, height int, tol float64) (meanErr, fracWithin float64, ok bool) {
	near := float64(height) / 2
	n, within, covered := 0, 0, 0
	sum := 0.0
	for _, p := range tf.Points {
		if p[1] < near {
			continue
		}
		n++
		x, has := interpX(line, p[1])
		if !has {
			continue
		}
		covered++
		d := math.Abs(x - p[0])
		sum += d
		if d <= tol {
			within++
		}
	}
	if n == 0 || covered == 0 {
		return 0, 0, false
	}
	return sum / float64(covered), float64(within) / float64(n), true
}

// interpX gives the detected centreline's x at row y by linear
// interpolation between neighbouring points; false outside their y range.
func interpX(pts [][2]float64, y float64) (float64, bool) {
	for i := 1; i < len(pts); i++ {
		a, b := pts[i-1], pts[i]
		lo, hi := math.Min(a[1], b[1]), math.Max(a[1], b[1])
		if y < lo || y > hi {
			continue
		}
		if b[1] == a[1] {
			return (a[0] + b[0]) / 2, true
		}
		f := (y - a[1]) / (b[1] - a[1])
		return a[0] + f*(b[0]-a[0]), true
	}
	return 0, false
}

// Combine adds several clips' results into one.
func Combine(name string, rs []*Result) *Result {
	t := &Result{Name: name}
	for _, r := range rs {
		t.Frames += r.Frames
		t.VisibleFrames += r.VisibleFrames
		t.CorrectFrames += r.CorrectFrames
		t.TrackedVisible += r.TrackedVisible
		t.Errors = append(t.Errors, r.Errors...)
		t.FalseTracks += r.FalseTracks
		t.Losses += r.Losses
		t.MissedAlarms += r.MissedAlarms
		t.AlarmLatencies = append(t.AlarmLatencies, r.AlarmLatencies...)
		t.FalseAlarms += r.FalseAlarms
		for i := range t.Bins {
			t.Bins[i].N += r.Bins[i].N
			t.Bins[i].Within += r.Bins[i].Within
		}
	}
	return t
}
