package report

import (
	"errors"
	"fmt"
	"math"
	"path/filepath"
	"sort"
	"strings"

	"github.com/hewline/hewline/guidance/tracklog"
)

// ErrNotComparable is returned by Compare for two logs that are not runs
// over the same clip.
var ErrNotComparable = errors.New("logs are not runs over the same clip")

// DiffRun is a run of consecutive frames on which two logs disagree.
type DiffRun struct {
	StartFrame, EndFrame int     // frame numbers, both inclusive
	Start, End           float64 // seconds (record times in log A)
	// Kinds lists how they disagree anywhere in the run, sorted: "alarm",
	// "offset", "state", "tracking".
	Kinds []string
	// MaxOffsetPx is the largest offset difference on frames both tracked.
	MaxOffsetPx float64
}

// Diff is the result of Compare.
type Diff struct {
	Frames      int     // frames compared
	Disagree    int     // frames with any disagreement
	TolPx       float64 // the offset tolerance applied, in pixels
	Runs        []DiffRun
	KindFrames  map[string]int // frames per kind of disagreement
	MaxOffsetPx float64        // largest offset difference where both tracked
}

// ToleranceFor scales a tolerance given for a 640-pixel-wide frame to a
// frame width w (w ≤ 0 leaves it unscaled).
func ToleranceFor(tol640 float64, w int) float64 {
	if w <= 0 {
		return tol640
	}
	return tol640 * float64(w) / 640
}

// Compare lines up two logs of the same clip frame by frame. Frames
// disagree when tracking, alarm or state differ, or when both track and
// their offsets differ by more than tolPx. The logs must name the same
// source (by base name), frame size and frame numbers, else the error
// wraps ErrNotComparable. It does not retain a or b.
func Compare(a, b *tracklog.Log, tolPx float64) (*Diff, error) {
	ha, hb := a.Header, b.Header
	switch {
	case filepath.Base(ha.Source) != filepath.Base(hb.Source):
		return nil, fmt.Errorf("report: sources %q and %q differ: %w", ha.Source, hb.Source, ErrNotComparable)
	case ha.Width != hb.Width || ha.Height != hb.Height:
		return nil, fmt.Errorf("report: frame sizes %d×%d and %d×%d differ: %w", ha.Width, ha.Height, hb.Width, hb.Height, ErrNotComparable)
	case len(a.Records) != len(b.Records):
		return nil, fmt.Errorf("report: %d and %d frames: %w", len(a.Records), len(b.Records), ErrNotComparable)
	}
	d := &Diff{Frames: len(a.Records), TolPx: tolPx, KindFrames: map[string]int{}}
	var cur *DiffRun
	kinds := map[string]bool{}
	flush := func() {
		if cur == nil {
			return
		}
		for k := range kinds {
			cur.Kinds = append(cur.Kinds, k)
		}
		sort.Strings(cur.Kinds)
		d.Runs = append(d.Runs, *cur)
		cur = nil
		clear(kinds)
	}
	for i := range a.Records {
		ra, rb := &a.Records[i], &b.Records[i]
		if ra.Frame != rb.Frame {
			return nil, fmt.Errorf("report: record %d is frame %d in one log and %d in the other: %w", i, ra.Frame, rb.Frame, ErrNotComparable)
		}
		var ks []string
		if ra.Tracking != rb.Tracking {
			ks = append(ks, "tracking")
		}
		if ra.Alarm != rb.Alarm {
			ks = append(ks, "alarm")
		}
		if ra.State != rb.State {
			ks = append(ks, "state")
		}
		off := 0.0
		if ra.Tracking && rb.Tracking {
			off = math.Abs(ra.OffsetPx - rb.OffsetPx)
			d.MaxOffsetPx = math.Max(d.MaxOffsetPx, off)
			if off > tolPx {
				ks = append(ks, "offset")
			}
		}
		if len(ks) == 0 {
			flush()
			continue
		}
		d.Disagree++
		if cur == nil {
			cur = &DiffRun{StartFrame: ra.Frame, Start: ra.T}
		}
		cur.EndFrame, cur.End = ra.Frame, ra.T
		cur.MaxOffsetPx = math.Max(cur.MaxOffsetPx, off)
		for _, k := range ks {
			kinds[k] = true
			d.KindFrames[k]++
		}
	}
	flush()
	return d, nil
}

// String is a one-line description of the run.
func (r DiffRun) String() string {
	s := fmt.Sprintf("frames %d–%d (%.2f–%.2f s): %s", r.StartFrame, r.EndFrame, r.Start, r.End, strings.Join(r.Kinds, ", "))
	if r.MaxOffsetPx > 0 {
		s += fmt.Sprintf("; offset differs by up to %.1f px", r.MaxOffsetPx)
	}
	return s
}
