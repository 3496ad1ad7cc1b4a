package guidance

import (
	"fmt"
	"math"
	"time"
)

// Seeing the line end.
//
// Coasting exists for frames that cannot be read (a glare spot, a blurred
// frame, a passing shadow): the line is still there, the filter's
// prediction stands in for it for up to FailSafeAfter. When the line
// itself ends, or a gap in it comes under the camera, coasting only
// steers on a line that is no longer there, and the alarm comes
// FailSafeAfter late.
//
// A solid line that ends shows it before it goes: frame after frame the
// detector finds it shorter, its far end running down the image toward
// the camera at the vehicle's speed. (A dashed line does not: the fitted
// line runs on through the gaps to the next dashes, so its far end stays
// far.) The guidance offset is taken at the reference row; once the line
// ends below that row the offset is an extrapolation. The tracker
// therefore keeps the reach (Measurement.ReachPx: rows from the reference
// row to the line's far end) of its latest accepted measurements, and
// goes Lost at once, with the reason named, when the reach had been
// shrinking and
//   - a measurement says the line reaches less than reachAheadPx past the
//     reference row, or
//   - no usable measurement comes, and the shrinking reach, extrapolated
//     to now, is below reachAheadPx (a measurement too faint to steer by
//     may confirm the end, never deny it).
//
// reachAheadPx is a look-ahead: a line that is running out and reaches
// only a few rows past the reference row gives its offset from its last
// rows and no heading worth the name, and at the speed it was running out
// it passes the reference row within a frame or two. 24 rows at 640×480
// is 5 % of the frame's height: the line then covers less than half of
// the image's lower half, where the scene truth (capture/synth) stops
// calling it visible. (Without it, the end of a line was coasted over for
// 2-3 frames at every size, and those frames scored as false tracks: with
// it and the fit below, the stripe suite's false-track frames at 320×240
// fell 18 → 6, the lane suite's 3 → 0.)
//
// Ahead of a missing stretch too long to bridge, the stripe detector's
// fitted line runs on across it to the tape beyond, so it reports the
// near mark's end as the reach instead (vision.Detection.ReachPx). The
// reach then drops at once from the fitted far end to the mark's end: a
// drop of more than reachJumpPx (at RefWidthPx) between two samples is
// the measurement changing what it measures, not a speed, and the trend
// starts after it.
//
// "Shrinking" needs reachMinSamples accepted measurements within
// reachWindow, each no farther than the one before (within reachSlackPx
// rows, for the detector's jitter) and the last clearly shorter than the
// first. A longer run whose ends jitter by more than that (a line leaving
// the side of a fisheye frame came down 54, 48, 48, 48, 40, 34, 37, 30, 22
// rows at 320×240) counts when a least-squares line through at least
// reachFitSamples of them falls reachFitT standard errors below zero and
// as clearly as above. A single short detection is only refused (see
// usable), never an alarm on its own. reachSlackPx, reachJumpPx and
// reachAheadPx are image rows at RefHeightPx, scaled with the frame's
// height (SetFrameHeight): a line's end runs down the image, and the
// detector's rows jitter, in proportion to the frame. (Scaled with the
// width, as first written, a 1280×720 frame asked for 48 rows ahead, 6.7 %
// of its height: the gap scene there alarmed a frame before the truth
// stopped calling the line visible.)
//
// After a jump the reach is the near mark's end with tape beyond a
// stretch: a dash gap, or a missing stretch of tape. The look-ahead then
// does not apply, only the line's ending short of the reference row: a
// dashed line's near dash running out is no alarm (with the look-ahead
// dashed-long at 1280×720 alarmed at 3 more dash gaps, recall 0.740 →
// 0.577).
//
// The detector may alternate between the two from frame to frame, the
// fitted line running on across the stretch on one frame and stopping at
// the near mark's end on the next (reflections at 160×120, frames
// 93-106: 48, 88, 86, 42, 86, 86, 34, 32, 86, 24, 80, 86, 14, 10 rows).
// After a jump, the trend is therefore that of the samples in the window
// that lie a jump or more below the far end seen just before it, when
// the latest one does: the near mark's end, every other frame. (With the
// trend started at the latest jump alone, 2 samples there, the stretch
// was coasted over to the fail-safe, 6 frames later: 8 false-track
// frames, against 2 with the near mark's samples.)
//
// (Unscaled, 2 rows of slack per sample asked a line's end to fall
// faster than 60 rows/s at 30 frames/s at every size: the worn gap of
// lane-reflections at 160×120 came down at 2 rows a frame, 60 rows/s,
// and was coasted over for the whole FailSafeAfter.)
const (
	reachWindow     = 300 * time.Millisecond
	reachMinSamples = 3
	reachSlackPx    = 2.0
	reachJumpPx     = 40.0
	reachAheadPx    = 24.0
	reachFitSamples = 5
	reachFitT       = 3.0
)

type reachSample struct {
	t     time.Duration
	reach float64
}

// reachTrack holds the reach of the latest accepted measurements, oldest
// first (at most reachKeep).
type reachTrack struct {
	s   []reachSample
	low []reachSample // scratch for shrinking
}

const reachKeep = 8

func (r *reachTrack) reset() { r.s = r.s[:0] }

func (r *reachTrack) add(now time.Duration, m Measurement) {
	if !m.HasReach || !finite(m.ReachPx) {
		r.reset() // a detector that does not report reach: no trend
		return
	}
	if len(r.s) == reachKeep {
		copy(r.s, r.s[1:])
		r.s = r.s[:reachKeep-1]
	}
	r.s = append(r.s, reachSample{now, m.ReachPx})
}

// shrinking returns the rate (rows per second, negative) at which the
// reach has been falling over the recent samples, whether the trend
// starts after a jump (jump rows or more at once: the near mark's end
// taking over), and whether it has been falling steadily (see the
// constants' comment), with slack the jitter allowed per sample in rows
// (reachSlackPx at the frame's size).
func (r *reachTrack) shrinking(now time.Duration, slack, jump float64) (rate float64, last reachSample, jumped, ok bool) {
	i0 := 0
	for i0 < len(r.s) && now-r.s[i0].t > reachWindow {
		i0++
	}
	// The trend starts after the latest jump (see the constants' comment).
	for i := len(r.s) - 1; i > i0; i-- {
		if r.s[i].reach < r.s[i-1].reach-jump {
			i0, jumped = i, true
			break
		}
	}
	recent := r.s[i0:]
	if jumped {
		// The reach alternating between the near mark's end and the
		// fitted far end (see the constants' comment): the trend is that
		// of the window's samples a jump or more below the far end seen
		// just before the latest jump, when the latest sample is one.
		lim := r.s[i0-1].reach - jump
		w0 := 0
		for w0 < len(r.s) && now-r.s[w0].t > reachWindow {
			w0++
		}
		if r.s[len(r.s)-1].reach < lim {
			low := r.low[:0]
			for _, p := range r.s[w0:] {
				if p.reach < lim {
					low = append(low, p)
				}
			}
			r.low = low
			recent = low
		}
	}
	if len(recent) < reachMinSamples {
		return 0, reachSample{}, jumped, false
	}
	first, last := recent[0], recent[len(recent)-1]
	dt := (last.t - first.t).Seconds()
	if dt <= 0 {
		return 0, reachSample{}, jumped, false
	}
	steady := true
	for i := 1; i < len(recent); i++ {
		if recent[i].reach > recent[i-1].reach+slack {
			steady = false
			break
		}
	}
	if steady && first.reach-last.reach > slack*float64(len(recent)-1) {
		return (last.reach - first.reach) / dt, last, jumped, true
	}
	if len(recent) < reachFitSamples {
		return 0, reachSample{}, jumped, false
	}
	slope, se := fitSlope(recent)
	if slope >= 0 || -slope < reachFitT*se || -slope*dt <= slack*float64(len(recent)-1) {
		return 0, reachSample{}, jumped, false
	}
	return slope, last, jumped, true
}

// fitSlope returns the least-squares slope (rows per second) of reach
// over time and its standard error; s holds at least three samples at
// distinct times.
func fitSlope(s []reachSample) (slope, se float64) {
	n := float64(len(s))
	var mt, mr float64
	for _, p := range s {
		mt += p.t.Seconds()
		mr += p.reach
	}
	mt, mr = mt/n, mr/n
	var stt, str float64
	for _, p := range s {
		dt := p.t.Seconds() - mt
		stt += dt * dt
		str += dt * (p.reach - mr)
	}
	if stt == 0 {
		return 0, math.Inf(1)
	}
	slope = str / stt
	var ss float64
	for _, p := range s {
		r := p.reach - (mr + slope*(p.t.Seconds()-mt))
		ss += r * r
	}
	return slope, math.Sqrt(ss / (n - 2) / stt)
}

// aheadRows is reachAheadPx at the frame's height.
func (t *Tracker) aheadRows() float64 { return reachAheadPx * t.rowScale }

// lineEnded says whether the line is seen to have ended at now, and why:
// m is unusable (usable false, from Tracker.usable), or reaches less than
// aheadRows past the reference row.
func (t *Tracker) lineEnded(now time.Duration, m Measurement, usable bool) (string, bool) {
	rate, last, jumped, ok := t.reach.shrinking(now, reachSlackPx*t.rowScale, reachJumpPx*t.rowScale)
	if !ok {
		return "", false
	}
	ahead := t.aheadRows()
	if jumped {
		// The reach fell to the near mark's end: the line goes on beyond
		// a stretch (a dash gap, or a missing stretch); only its ending
		// short of the reference row tells.
		ahead = 0
	}
	if m.Valid && m.HasReach && finite(m.ReachPx) {
		switch {
		case m.ReachPx < 0:
			return fmt.Sprintf("line ends %.0f rows short of the reference row (end of the line or a gap)", -m.ReachPx), true
		case m.ReachPx < ahead:
			return fmt.Sprintf("line running out: it ends %.0f rows past the reference row, under the %.0f needed ahead (end of the line or a gap)", m.ReachPx, ahead), true
		}
		// Seen reaching far enough, by a measurement trusted to steer by.
		// One too faint for that may confirm the end, never deny it.
		if usable {
			return "", false
		}
	}
	if pred := last.reach + rate*(now-last.t).Seconds(); pred < ahead {
		return fmt.Sprintf("line lost with its far end running out at %.0f rows/s: end of the line or a gap", -rate), true
	}
	return "", false
}
