package main

import (
	"gocv.io/x/gocv"

	"github.com/hewline/hewline/vision"
	"github.com/hewline/hewline/vision/reffollow"
)

// plainDetector runs the plain reference follower (package reffollow) as a
// pipeline detector, for the demo's comparison rows. It claims the line
// with confidence 1 whenever it finds a blob: it has no measure of doubt.
type plainDetector struct{ f *reffollow.Follower }

func newPlainDetector(dark bool) *plainDetector { return &plainDetector{f: reffollow.New(dark)} }

// Detect implements pipeline.Detector; img is not kept.
func (p *plainDetector) Detect(img gocv.Mat, _ vision.Hint) vision.Detection {
	l := p.f.Find(img, 0.8*float64(img.Rows()))
	if !l.Found {
		return vision.Detection{Reason: l.Reason, Method: "plain"}
	}
	pts := make([]vision.Point, len(l.Points))
	for i, q := range l.Points {
		pts[i] = vision.Point{X: q[0], Y: q[1]}
	}
	return vision.Detection{Found: true, Points: pts, RefRow: l.RefRow, OffsetPx: l.OffsetPx,
		HeadingDeg: l.HeadingDeg, Confidence: 1, Method: "plain"}
}

// Close releases the follower's Mats.
func (p *plainDetector) Close() error { return p.f.Close() }
