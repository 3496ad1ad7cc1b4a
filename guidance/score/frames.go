package score

import (
	"fmt"
	"strings"

	"github.com/hewline/hewline/capture/truth"
	"github.com/hewline/hewline/guidance/tracklog"
)

// Verdict is how the scoring rules judge one frame (see the package
// comment).
type Verdict int

const (
	// Right: tracking on a visible line, with MatchFraction of the near
	// rows within the tolerance (a correct frame).
	Right Verdict = iota
	// Quiet: no line visible, and no tracking claimed.
	Quiet
	// Missed: the line visible, tracking not claimed (seeking, regaining,
	// lost).
	Missed
	// Off: tracking on a visible line, but fewer than MatchFraction of
	// the near rows within the tolerance, and not so far off as a false
	// track.
	Off
	// False: a false track (tracking where no line is visible, or off by
	// more than the false-track limit).
	False
)

func (v Verdict) String() string {
	switch v {
	case Right:
		return "right"
	case Quiet:
		return "quiet"
	case Missed:
		return "missed"
	case Off:
		return "off"
	case False:
		return "false track"
	}
	return fmt.Sprintf("verdict(%d)", int(v))
}

// Counted reports whether v is a frame the scores count against the
// tracker: Missed, Off and False.
func (v Verdict) Counted() bool { return v == Missed || v == Off || v == False }

// FrameScore is one frame as the scoring rules judge it.
type FrameScore struct {
	Frame   int
	T       float64
	Verdict Verdict
	// ErrPx is the mean column error of the line guidance ran on over the
	// near half, and Within the share of those truth rows within the
	// tolerance; HasErr is false when the line covers none of them (or
	// the frame has no visible line).
	ErrPx, Within float64
	HasErr        bool
	// State and Reason are the tracker's, MeasReason and MeasConfidence
	// the detector's (see tracklog.Record).
	State, Reason  string
	MeasReason     string
	MeasConfidence float64
}

// judge applies the frame rules to one frame: its verdict and, for a
// visible line, the guided line's mean error, the share of rows within
// tol, and whether the line covers any near row (see frameError). A frame
// tracked on a visible line that matches and is still beyond falseTol
// (possible when the 15 % of rows allowed to miss are far off) counts as
// correct and as a false track in Clip; its verdict is False.
func judge(tf truth.Frame, rec tracklog.Record, height int, tol, falseTol float64) (v Verdict, err, frac float64, ok bool) {
	if !tf.Visible {
		if rec.Tracking {
			return False, 0, 0, false
		}
		return Quiet, 0, 0, false
	}
	err, frac, ok = frameError(tf, guided(rec), height, tol)
	switch {
	case !rec.Tracking:
		v = Missed
	case !ok || err > falseTol:
		v = False
	case frac >= MatchFraction:
		v = Right
	default:
		v = Off
	}
	return v, err, frac, ok
}

// Frames judges every frame of a clip as Clip does, for finding where a
// replay loses: frames and records as for Clip.
func Frames(h truth.Header, frames []truth.Frame, records []tracklog.Record) ([]FrameScore, error) {
	if err := matchable(h, frames, records); err != nil {
		return nil, err
	}
	tol, falseTol := tolerances(h)
	out := make([]FrameScore, len(frames))
	for i, tf := range frames {
		rec := records[i]
		v, e, frac, ok := judge(tf, rec, h.Height, tol, falseTol)
		out[i] = FrameScore{Frame: tf.Frame, T: tf.T, Verdict: v, ErrPx: e, Within: frac, HasErr: ok,
			State: rec.State, Reason: rec.Reason, MeasReason: rec.MeasReason, MeasConfidence: rec.MeasConfidence}
	}
	return out, nil
}

// Run is a stretch of consecutive frames with the same counted verdict
// (Missed, Off or False).
type Run struct {
	First, Last int // frame numbers
	Verdict     Verdict
	States      []string // the tracker states seen, in order of first appearance
	// MinErr and MaxErr bound the frames' mean errors (px) where HasErr.
	MinErr, MaxErr float64
	HasErr         bool
	// Reason is the tracker's reason on the run's first frame, where
	// the run's cause shows ("" when it gave none).
	Reason string
	// MeasReason is the detector's reason on most of the run's frames
	// (the earliest of those tied), on MeasReasonFrames of them; "" when
	// it gave none.
	MeasReason       string
	MeasReasonFrames int
}

// Frames is the run's length.
func (r Run) Frames() int { return r.Last - r.First + 1 }

func (r Run) String() string {
	var b strings.Builder
	fmt.Fprintf(&b, "frames %d–%d (%d): %s", r.First, r.Last, r.Frames(), r.Verdict)
	if r.HasErr {
		fmt.Fprintf(&b, ", line %.1f–%.1f px off", r.MinErr, r.MaxErr)
	}
	if len(r.States) > 0 {
		fmt.Fprintf(&b, "; %s", strings.Join(r.States, ", "))
	}
	if r.Reason != "" {
		fmt.Fprintf(&b, "; tracker: %q", r.Reason)
	}
	if r.MeasReason != "" {
		fmt.Fprintf(&b, "; detector: %q on %d of %d", r.MeasReason, r.MeasReasonFrames, r.Frames())
	}
	return b.String()
}

// Runs groups consecutive frames with the same counted verdict (see
// Verdict.Counted) into runs, in frame order. fs is as from Frames.
func Runs(fs []FrameScore) []Run {
	var runs []Run
	for i := 0; i < len(fs); {
		v := fs[i].Verdict
		if !v.Counted() {
			i++
			continue
		}
		j := i
		for j < len(fs) && fs[j].Verdict == v && (j == i || fs[j].Frame == fs[j-1].Frame+1) {
			j++
		}
		runs = append(runs, newRun(fs[i:j]))
		i = j
	}
	return runs
}

func newRun(fs []FrameScore) Run {
	r := Run{First: fs[0].Frame, Last: fs[len(fs)-1].Frame, Verdict: fs[0].Verdict, Reason: fs[0].Reason}
	count := map[string]int{}
	var order []string
	for _, f := range fs {
		if f.State != "" && !contains(r.States, f.State) {
			r.States = append(r.States, f.State)
		}
		if f.HasErr {
			if !r.HasErr || f.ErrPx < r.MinErr {
				r.MinErr = f.ErrPx
			}
			if !r.HasErr || f.ErrPx > r.MaxErr {
				r.MaxErr = f.ErrPx
			}
			r.HasErr = true
		}
		if f.MeasReason != "" {
			if count[f.MeasReason] == 0 {
				order = append(order, f.MeasReason)
			}
			count[f.MeasReason]++
		}
	}
	for _, s := range order {
		if count[s] > r.MeasReasonFrames {
			r.MeasReason, r.MeasReasonFrames = s, count[s]
		}
	}
	return r
}

func contains(ss []string, s string) bool {
	for _, x := range ss {
		if x == s {
			return true
		}
	}
	return false
}
