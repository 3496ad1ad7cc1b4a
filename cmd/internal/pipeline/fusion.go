package pipeline

import (
	"fmt"
	"math"

	"gocv.io/x/gocv"

	"github.com/hewline/hewline/vision"
)

// Fused runs the classical detector on every frame and a fallback (the
// CNN) when the classical one is unsure, plus, optionally, every
// CrossCheck-th frame as a cross-check.
//
// The rule:
//   - classical confidence ≥ Threshold: the classical measurement is used;
//   - below it, the fallback runs; if it found the stripe with a higher
//     confidence, its measurement is used (Method "cnn");
//   - whenever both found the stripe and their offsets at the reference
//     row differ by more than AgreePx (scaled with the frame width from
//     640 px), the measurement used keeps its position but its confidence
//     is halved and Reason says so: two detectors that disagree are not to
//     be trusted.
type Fused struct {
	Primary, Fallback Detector
	// Threshold is the classical confidence below which the fallback
	// runs (default 0.5).
	Threshold float64
	// CrossCheck > 0 also runs the fallback every CrossCheck-th frame.
	CrossCheck int
	// AgreePx is the largest offset difference at 640 px width that still
	// counts as agreement (default 10, the scoring tolerance).
	AgreePx float64

	n int
	// Counters for the summary.
	FallbackRuns, FallbackUsed, Disagreements int
}

// Detect implements Detector.
func (f *Fused) Detect(img gocv.Mat, hint vision.Hint) vision.Detection {
	f.n++
	d := f.Primary.Detect(img, hint)
	if f.Fallback == nil {
		return d
	}
	thr := f.Threshold
	if thr <= 0 {
		thr = 0.5
	}
	unsure := !d.Found || d.Confidence < thr
	cross := f.CrossCheck > 0 && f.n%f.CrossCheck == 0
	if !unsure && !cross {
		return d
	}
	f.FallbackRuns++
	c := f.Fallback.Detect(img, hint)
	use := d
	if unsure && c.Found && (!d.Found || c.Confidence > d.Confidence) {
		use = c
		f.FallbackUsed++
	}
	if d.Found && c.Found {
		tol := f.AgreePx
		if tol <= 0 {
			tol = 10
		}
		tol *= float64(img.Cols()) / 640
		// Compare where the classical one measured: the fallback's line
		// at the same row (its own RefRow may differ).
		cx, ok := xAt(c.Points, d.RefRow)
		if !ok {
			cx = c.OffsetPx + float64(img.Cols())/2
		}
		if diff := math.Abs(d.OffsetPx + float64(img.Cols())/2 - cx); diff > tol {
			f.Disagreements++
			use.Confidence /= 2
			use.Reason = fmt.Sprintf("classical and cnn disagree by %.0f px", diff)
		}
	}
	return use
}

// xAt interpolates a centreline's x at row y; false outside its rows.
func xAt(pts []vision.Point, y float64) (float64, bool) {
	for i := 1; i < len(pts); i++ {
		a, b := pts[i-1], pts[i]
		if (y-a.Y)*(y-b.Y) > 0 {
			continue
		}
		if a.Y == b.Y {
			return (a.X + b.X) / 2, true
		}
		return a.X + (y-a.Y)/(b.Y-a.Y)*(b.X-a.X), true
	}
	return 0, false
}
