package vision

import (
	"math"
	"testing"
)

// lowCam is the low camera of the pinhole tests, lowW×lowH:
// focal length 260 px, 5 cm above the floor, pitched 3° up (as the
// low-camera scene), looking at a 50 mm stripe from 8 cm to 30 m ahead.
const lowW, lowH = 320, 240

var lowCam = floorPath{f: 260, cx: 160, cy: 120, camH: 0.05, pitch: -3 * math.Pi / 180, stripeW: 0.05, dMin: 0.08, dMax: 30}

// horizon is the image row of the floor's horizon.
func (p floorPath) horizon() float64 { return p.cy - p.f*math.Tan(p.pitch) }

// TestNearHorizonPinhole: a straight 50 mm stripe on the floor seen by a
// pinhole camera 5 cm above it, pitched 3° up (as low-camera; Hartley &
// Zisserman, "Multiple View Geometry", ch. 6: depth along the optical
// axis Zc = D·cos p + h·sin p, width f·W/Zc, row cy + f·(h·cos p −
// D·sin p)/Zc, horizon at cy − f·tan p), with a rack upright of constant
// width standing on the line's far end above the horizon. Refining a
// hypothesis that runs up both, the line's own horizon from its near half
// must lie within 1.5 rows of the pinhole's, the fitted line must keep
// no candidate above it, and it must cover at least 90 % of the floor
// below the horizon (guidedSpan) while spanning under half the region.
func TestNearHorizonPinhole(t *testing.T) {
	path := lowCam
	path.x0, path.theta = -0.02, 0.1
	yHorizon := path.horizon()
	geom := path.at
	c, l := pinholeSetup(t, lowW, lowH)
	xFar, _, _ := geom(yHorizon + 3)
	byBand := make([][2]int, l.n)
	for k := 0; k < l.n; k++ {
		lo := len(c.cands)
		y := l.centre(k)
		if x, wd, ok := geom(y); ok && wd >= 1 {
			c.cands = append(c.cands, candidate{band: k, y: y, x: x, w: wd, contrast: 0.3, snr: 20})
		} else if y < yHorizon && y > 20 {
			// The upright: 6 px wide, straight up from the line's far end.
			c.cands = append(c.cands, candidate{band: k, y: y, x: xFar, w: 6, contrast: 0.5, snr: 30})
		}
		byBand[k] = [2]int{lo, len(c.cands)}
	}
	// A hypothesis running up the stripe and on up the upright: every
	// candidate an inlier, as a curve through both would collect them.
	r := &fitResult{centre: curve{y0: float64(l.y1), scale: float64(l.y1 - l.y0)}, bands: make([]int, l.n)}
	for k := range r.bands {
		r.bands[k] = -1
		if byBand[k][1] > byBand[k][0] {
			r.bands[k] = byBand[k][0]
		}
	}
	c.primeScores(lowW)
	c.refine(r, l, lowW, byBand, selector{})
	if !r.ok {
		t.Fatal("no fit")
	}
	t.Logf("pinhole horizon row %.2f, the line's own %.2f; inliers over rows %.1f–%.1f", yHorizon, r.yh, r.yLo, r.yHi)
	if math.Abs(r.yh-yHorizon) > 1.5 {
		t.Errorf("horizon row %.2f, pinhole %.2f", r.yh, yHorizon)
	}
	if r.yLo < yHorizon {
		t.Errorf("inliers reach row %.1f, above the horizon at %.1f", r.yLo, yHorizon)
	}
	// The line covers the floor from the bottom nearly to the horizon
	// (down to widths of 1 px): judged against the floor, not the whole
	// region, it is not a short line.
	roiSpan := (r.yHi - r.yLo + float64(l.step)) / float64(l.y1-l.y0)
	gs := guidedSpan(r, l, 0.8*lowH)
	t.Logf("span %.2f of the region, %.2f of the floor", roiSpan, gs)
	if gs < 0.9 || roiSpan > 0.5 {
		t.Errorf("span %.2f of the floor (want at least 0.9), %.2f of the region", gs, roiSpan)
	}
}

// TestNearHorizonShortNearHalf: the widths of a near half measured over
// a short stretch only are not run out to a horizon. The candidates are
// those measured on the stripe in glare@320x240 frame 8 (chroma channel):
// the nearest 45 rows, their widths bloomed by a lamp's glare (21.7 px
// falling to 10.3), then nothing up to row 47, then the far stretch,
// 3–6 px without a trend. Their widths alone would put a horizon at row
// 156 and drop the far stretch, 80 % of the line's rows, though it is the
// line's own; no horizon may be judged, and the far stretch stays in the
// fit.
func TestNearHorizonShortNearHalf(t *testing.T) {
	const w = 320
	meas := [][3]float64{ // band, x, width (working px)
		{0, 221.8, 21.7}, {1, 221.9, 20.1}, {2, 223.3, 15.5}, {3, 223.1, 15.1}, {4, 222.6, 14.6},
		{6, 222.2, 13.2}, {7, 221.7, 12.6}, {9, 220.8, 12.2}, {10, 220.4, 11.5}, {12, 219.7, 10.3},
		{15, 217.4, 11.1}, {64, 184.6, 3.2}, {65, 184.4, 3.2}, {66, 184.1, 3.9}, {67, 184.0, 4.0},
		{68, 183.7, 4.3}, {69, 183.7, 5.3}, {70, 183.7, 5.8}, {71, 183.4, 6.3}, {72, 183.0, 6.0},
		{73, 182.6, 6.1}, {74, 182.0, 5.9}, {75, 181.6, 5.4}, {76, 181.0, 5.6}, {77, 180.5, 5.1},
		{78, 180.1, 4.9}, {79, 180.0, 4.5},
	}
	c, err := NewClassical(DefaultConfig())
	if err != nil {
		t.Fatal(err)
	}
	defer c.Close()
	c.hairline = 0.006 * w
	l := bandLayout{x0: 0, x1: w, y0: 0, y1: 240, step: 3, n: 80}
	byBand := make([][2]int, l.n)
	r := &fitResult{centre: curve{y0: float64(l.y1), scale: float64(l.y1 - l.y0)}, bands: make([]int, l.n)}
	j := 0
	for k := 0; k < l.n; k++ {
		lo := len(c.cands)
		r.bands[k] = -1
		if j < len(meas) && int(meas[j][0]) == k {
			r.bands[k] = len(c.cands)
			c.cands = append(c.cands, candidate{band: k, y: l.centre(k), x: meas[j][1], w: meas[j][2], contrast: 0.25, snr: 20, chroma: true})
			j++
		}
		byBand[k] = [2]int{lo, len(c.cands)}
	}
	c.primeScores(w)
	c.refine(r, l, w, byBand, selector{chroma: true})
	if !r.ok {
		t.Fatal("no fit")
	}
	t.Logf("the line's own horizon %.2f; inliers over rows %.1f–%.1f", r.yh, r.yLo, r.yHi)
	if !math.IsInf(r.yh, -1) {
		t.Errorf("horizon judged at row %.2f from 45 rows of the near half", r.yh)
	}
	if r.yLo > 47 {
		t.Errorf("inliers from row %.1f: the far stretch was dropped", r.yLo)
	}
}

// TestPerspFitPinhole: a path on the floor seen by a low camera (5 cm,
// pitched 3° up, as low-camera) bends in the image towards the horizon
// far more than a quadratic in the image can follow. The candidates are
// pinhole projections (Hartley & Zisserman ch. 6, as in
// TestNearHorizonPinhole) where a row scan could measure the stripe (1 px
// wide or more, within 70° of the image vertical), with ±0.25 px and ±3 %
// of measurement noise. Beyond the far
// candidate, up to where perspFit stops the curve (perspTop), the
// reported centreline must lie within 3 px of the projection on a bend
// (the scorer's tolerance at this width is 5 px; the quadratic's tangent
// is off by more than 10 px there), and on a straight path within 0.5 px
// from the far inlier on.
func TestPerspFitPinhole(t *testing.T) {
	tests := map[string]struct {
		x0, theta, kappa float64
		tol              float64 // px from the projection, perspTop to the near end
		quadOff          float64 // the quadratic must be off by more somewhere
	}{
		"right bend, 3 m radius": {-0.05, 0, 1 / 3.0, 3, 10},
		"left bend, 2 m radius":  {0.05, 0.1, -1 / 2.0, 3, 10},
		"straight, slanted":      {-0.02, 0.1, 0, 0.5, 0},
	}
	for name, tc := range tests {
		t.Run(name, func(t *testing.T) {
			path := lowCam
			path.x0, path.theta, path.kappa = tc.x0, tc.theta, tc.kappa
			project := path.at
			c, l := pinholeSetup(t, lowW, lowH)
			byBand := make([][2]int, l.n)
			r := &fitResult{centre: curve{y0: float64(l.y1), scale: float64(l.y1 - l.y0)}, bands: make([]int, l.n)}
			for k := 0; k < l.n; k++ {
				lo := len(c.cands)
				r.bands[k] = -1
				y := l.centre(k)
				x, wd, ok := project(y)
				xa, _, _ := project(y - 0.5)
				xb, _, _ := project(y + 0.5)
				if ok && wd >= 1 && math.Abs(xb-xa) <= math.Tan(70*math.Pi/180) && x > 0 && x < lowW {
					r.bands[k] = len(c.cands)
					// Measurement noise: ±0.25 px in position, ±3 % in width.
					jx, jw := 0.25*math.Sin(1.7*float64(k)), 1+0.03*math.Cos(2.3*float64(k))
					c.cands = append(c.cands, candidate{band: k, y: y, x: x + jx, w: wd * jw, contrast: 0.3, snr: 20})
				}
				byBand[k] = [2]int{lo, len(c.cands)}
			}
			c.primeScores(lowW)
			c.refine(r, l, lowW, byBand, selector{})
			if !r.ok {
				t.Fatal("no fit")
			}
			quad := *r
			c.perspFit(r, l, lowW)
			if r.perspOK {
				t.Logf("perspective curve down to row %.1f, horizon %.2f (pinhole %.2f), inliers %.1f–%.1f",
					r.perspTop, r.persp.yh, path.horizon(), r.yLo, r.yHi)
			} else {
				t.Logf("no perspective curve (the quadratic fits as well), inliers %.1f–%.1f", r.yLo, r.yHi)
			}
			worst, worstQ, worstY := 0.0, 0.0, 0.0
			from := r.yLo
			if r.perspOK {
				from = r.perspTop
			}
			for y := math.Ceil(from); y <= r.yHi; y++ {
				xt, _, _ := project(y)
				if e := math.Abs(r.xAt(y) - xt); e > worst {
					worst, worstY = e, y
				}
				worstQ = math.Max(worstQ, math.Abs(quad.xAt(y)-xt))
			}
			t.Logf("rows %.0f–%.0f: worst %.2f px (row %.0f); the quadratic's worst %.2f px", math.Ceil(from), r.yHi, worst, worstY, worstQ)
			if worst > tc.tol {
				t.Errorf("centreline %.2f px off the projection at row %.0f (want within %.1f)", worst, worstY, tc.tol)
			}
			if tc.kappa != 0 {
				if !r.perspOK {
					t.Fatal("no perspective curve on a bend")
				}
				if r.perspTop >= r.yLo-3 {
					t.Errorf("perspective curve stops at row %.1f, not beyond the far inlier at %.1f", r.perspTop, r.yLo)
				}
				if worstQ <= tc.quadOff {
					t.Errorf("the quadratic is within %.2f px too: the case does not tell the models apart", worstQ)
				}
			}
		})
	}
}
