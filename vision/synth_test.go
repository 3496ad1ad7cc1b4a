package vision

import (
	"errors"
	"fmt"
	"io"
	"math"
	"sort"
	"testing"

	"github.com/hewline/hewline/capture/synth"
	"github.com/hewline/hewline/capture/truth"
	"gocv.io/x/gocv"
)

// clipScore is how a detector did on a rendered clip, judged with the
// TuSimple rule (a line matches when ≥ 85 % of its points lie within the
// tolerance; 20 px at 1280 wide, here scaled to the frame width) on the
// near half of the image.
type clipScore struct {
	visible, correct   int     // visible frames, and those matched
	hidden, falseTrack int     // frames without a visible stripe; confident Found among them or wrong ones
	wrongConfident     int     // visible frames matched wrongly with confidence ≥ 0.5
	medianErr          float64 // median |offset error| at the ref row over matched frames, px
	conf               []float64
	ok                 []bool
}

func (s clipScore) recall() float64 { return float64(s.correct) / math.Max(1, float64(s.visible)) }

// xAt interpolates the detected centreline at row y; ok is false outside
// the detected stretch.
func xAt(pts []Point, y float64) (float64, bool) {
	for i := 1; i < len(pts); i++ {
		a, b := pts[i-1], pts[i] // a is lower in the image (larger y)
		if y <= a.Y && y >= b.Y {
			if a.Y == b.Y {
				return a.X, true
			}
			u := (a.Y - y) / (a.Y - b.Y)
			return a.X + u*(b.X-a.X), true
		}
	}
	return 0, false
}

// matches applies the TuSimple rule to the truth points in the near half.
func matches(d Detection, tf truth.Frame, w, h int) bool {
	if !d.Found {
		return false
	}
	tol := tuSimpleTol(w)
	n, ok := 0, 0
	for _, p := range tf.Points {
		if p[1] < float64(h)/2 {
			continue
		}
		n++
		if x, in := xAt(d.Points, p[1]); in && math.Abs(x-p[0]) <= tol {
			ok++
		}
	}
	return n > 0 && float64(ok) >= 0.85*float64(n)
}

// detectEvery renders scenario sc, runs a classical detector with cfg on
// every every-th frame, with the hint hint gives for the frame's truth (nil:
// none), and hands each frame's index, truth and detection to fn.
func detectEvery(t *testing.T, sc synth.Scenario, cfg Config, every int, hint func(truth.Frame) Hint, fn func(i int, tf truth.Frame, d Detection)) {
	t.Helper()
	r, err := synth.New(sc)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	det, err := NewClassical(cfg)
	if err != nil {
		t.Fatal(err)
	}
	defer det.Close()
	img := gocv.NewMat()
	defer img.Close()
	for i := 0; ; i++ {
		if _, err := r.Read(&img); errors.Is(err, io.EOF) {
			break
		} else if err != nil {
			t.Fatal(err)
		}
		if i%every != 0 {
			continue
		}
		tf := r.Truth()
		h := Hint{}
		if hint != nil {
			h = hint(tf)
		}
		fn(i, tf, det.Detect(img, h))
	}
}

func scoreClip(t *testing.T, sc synth.Scenario, every int, cfg Config) clipScore {
	t.Helper()
	var s clipScore
	var errs []float64
	detectEvery(t, sc, cfg, every, nil, func(_ int, tf truth.Frame, d Detection) {
		good := tf.Visible && matches(d, tf, sc.Width, sc.Height)
		if tf.Visible {
			s.visible++
			if good {
				s.correct++
				errs = append(errs, math.Abs(d.OffsetPx-tf.OffsetPx))
			} else if d.Found && d.Confidence >= 0.5 {
				s.wrongConfident++
			}
		} else {
			s.hidden++
			if d.Found && d.Confidence >= 0.5 {
				s.falseTrack++
			}
		}
		if d.Found {
			s.conf = append(s.conf, d.Confidence)
			s.ok = append(s.ok, good)
		}
	})
	if len(errs) > 0 {
		sort.Float64s(errs)
		s.medianErr = errs[len(errs)/2]
	}
	return s
}

var clipCache = map[string]clipScore{}

// cachedScore scores a built-in clip with the default configuration once
// per test run (rendering is the slow part).
func cachedScore(t *testing.T, name string, every int) clipScore {
	t.Helper()
	key := fmt.Sprintf("%s/%d", name, every)
	if s, ok := clipCache[key]; ok {
		return s
	}
	s := scoreClip(t, lookup(t, name), every, DefaultConfig())
	clipCache[key] = s
	return s
}

func lookup(t *testing.T, name string) synth.Scenario {
	t.Helper()
	sc, err := synth.Lookup(name)
	if err != nil {
		t.Fatal(err)
	}
	return sc
}

func TestSynthWeave(t *testing.T) {
	s := cachedScore(t, "weave", 3)
	t.Logf("weave: %d/%d visible frames matched (%.3f), median offset error %.2f px, %d confident wrong, %d/%d hidden frames tracked",
		s.correct, s.visible, s.recall(), s.medianErr, s.wrongConfident, s.falseTrack, s.hidden)
	if s.recall() < 0.98 {
		t.Errorf("recall %.3f < 0.98", s.recall())
	}
	if s.medianErr > 1.5 {
		t.Errorf("median offset error %.2f px > 1.5", s.medianErr)
	}
	if s.wrongConfident > 0 {
		t.Errorf("%d frames wrong with confidence ≥ 0.5", s.wrongConfident)
	}
}

func TestSynthGap(t *testing.T) {
	s := cachedScore(t, "gap", 2)
	t.Logf("gap: %d/%d visible frames matched (%.3f), median offset error %.2f px, %d confident wrong, %d/%d hidden frames tracked",
		s.correct, s.visible, s.recall(), s.medianErr, s.wrongConfident, s.falseTrack, s.hidden)
	if s.hidden == 0 {
		t.Fatal("scenario has no frames without the stripe")
	}
	if s.falseTrack > 0 {
		t.Errorf("%d of %d frames without a visible stripe reported with confidence ≥ 0.5", s.falseTrack, s.hidden)
	}
	if s.wrongConfident > 0 {
		t.Errorf("%d frames wrong with confidence ≥ 0.5", s.wrongConfident)
	}
}
