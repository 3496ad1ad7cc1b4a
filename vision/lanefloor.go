package vision

import (
	"math"
)

// floorModel maps working pixels to a flat floor and back without a
// calibration, up to the floor's unknown scale, for a pinhole camera with
// no roll looking down at the floor. A camera of focal length f pitched
// down by φ sees its horizon at row yh = cy − f·tan φ, and the floor
// point imaged at (x, y), s = y − yh, lies at
//
//	lateral X = (x − cx)/s,  forward Z = k/s,  k = f/cos φ,
//
// in units of h/cos φ (h the camera height). The lateral scale is linear
// in s (a straight lane's width in the image is w(y) = W·(y − yh)), so
// the horizon and the lane width W come from the widths measured while
// both boundaries are seen; k = √(f² + (cy − yh)²) needs the focal length,
// which is a guess without a calibration (assumedFocal).
//
// On this floor the lane's centre is half the lane's width from a
// boundary along the boundary's normal (beside), which in the image is
// neither horizontal nor the image normal once the lane bends.
type floorModel struct {
	ok     bool
	yh     float64 // horizon row, working pixels
	k      float64 // forward scale, working pixels
	w      float64 // lane width W (floor units)
	cx, cy float64 // image centre, working pixels
	f      float64 // focal length, working pixels
}

// assumedFocal is the focal length, as a share of the image width, taken
// without a calibration: 0.8 is a lens of about 64° across, usual for the
// small board cameras such vehicles carry (common practice, from memory;
// a wrong guess bends the inferred centre less than a horizontal shift
// does, and both boundaries in view need no guess).
const assumedFocal = 0.8

// minHorizonGap is how far below the horizon, in working pixels, a row
// must be for the model to use it: the map's scale goes as 1/s.
const minHorizonGap = 4

// setHorizon sets the horizon row and the forward scale that goes with it.
func (m *floorModel) setHorizon(yh float64) {
	m.yh = yh
	m.k = math.Hypot(m.f, m.cy-yh)
}

// toFloor maps image point (x, y) to the floor; ok false at or above the
// horizon.
func (m *floorModel) toFloor(x, y float64) (X, Z float64, ok bool) {
	s := y - m.yh
	if s < minHorizonGap {
		return 0, 0, false
	}
	return (x - m.cx) / s, m.k / s, true
}

// toImage is the inverse of toFloor; ok false behind the camera.
func (m *floorModel) toImage(X, Z float64) (x, y float64, ok bool) {
	if Z <= 0 {
		return 0, 0, false
	}
	s := m.k / Z
	if s < minHorizonGap {
		return 0, 0, false
	}
	return m.cx + X*s, m.yh + s, true
}

// laneFloor maps working pixels to floor coordinates (lateral X to the
// right, forward Z, in one unit) and back: the learned floorModel, or a
// calibration (calibFloor).
type laneFloor interface {
	toFloor(x, y float64) (X, Z float64, ok bool)
	toImage(X, Z float64) (x, y float64, ok bool)
}

// calibFloor is a floor calibration in working pixels, millimetres on the
// floor.
type calibFloor struct {
	fr frameGeom
	m  FloorPlane
}

func (c *calibFloor) toFloor(x, y float64) (X, Z float64, ok bool) {
	fwd, right, ok := c.m.ToFloorMM(c.fr.toInX(x), c.fr.toInY(y))
	if !ok || math.IsNaN(fwd) || math.IsNaN(right) || fwd <= 0 {
		return 0, 0, false
	}
	return right, fwd, true
}

func (c *calibFloor) toImage(X, Z float64) (x, y float64, ok bool) {
	xi, yi, ok := c.m.ToImageMM(Z, X)
	if !ok || math.IsNaN(xi) || math.IsNaN(yi) {
		return 0, 0, false
	}
	return c.fr.toWorkX(xi), c.fr.toWorkY(yi), true
}

// beside is the image point at distance d (floor units) from the image
// line through (x, y) with slope dx/dy, along the line's normal on the
// floor, to the right for d > 0. The line's floor direction is taken
// between its points at y and one working pixel farther up.
func beside(f laneFloor, x, y, slope, d float64) (xc, yc float64, ok bool) {
	X, Z, ok := f.toFloor(x, y)
	if !ok {
		return 0, 0, false
	}
	X2, Z2, ok := f.toFloor(x-slope, y-1)
	if !ok {
		return 0, 0, false
	}
	tx, tz := X2-X, Z2-Z
	n := math.Hypot(tx, tz)
	if n == 0 || tz <= 0 {
		return 0, 0, false // not a line running away from the camera
	}
	tx, tz = tx/n, tz/n
	// the right-hand normal of the forward unit tangent (tx, tz)
	return f.toImage(X+d*tz, Z-d*tx)
}

// floor is the floor the centre is inferred on and the lane's width
// there: the calibration with the configured or learned width on it, or
// the learned floor model with the configured width (input pixels at the
// reference row, yRefW in working rows) or the learned one. ok false when
// neither is known yet.
func (ln *Lane) floor(yRefW float64) (f laneFloor, w float64, ok bool) {
	if ln.lc.Floor != nil {
		w = ln.lc.WidthMM
		if w == 0 {
			w = ln.calW
		}
		return &ln.cal, w, w > 0
	}
	if !ln.fm.ok {
		return nil, 0, false
	}
	w = ln.fm.w
	if ln.lc.WidthPx > 0 {
		if s := yRefW - ln.fm.yh; s >= minHorizonGap {
			w = ln.lc.WidthPx * ln.cal.fr.sx / s
		}
	}
	return &ln.fm, w, w > 0
}

// sample is points of a and b every second band over their stretches
// (working pixels, x then y), and the highest row among them.
func (ln *Lane) sample(l bandLayout, a, b *fitResult) (pa, pb [][2]float64, yTop float64) {
	pa, pb = ln.fa[:0], ln.fb[:0]
	yTop = math.Inf(1)
	for k := 0; k < l.n; k += 2 {
		y := l.centre(k)
		if covers(a, l, y) {
			pa = append(pa, [2]float64{a.centre.x(y), y})
			yTop = math.Min(yTop, y)
		}
		if covers(b, l, y) {
			pb = append(pb, [2]float64{b.centre.x(y), y})
			yTop = math.Min(yTop, y)
		}
	}
	ln.fa, ln.fb = pa, pb
	return pa, pb, yTop
}

// learnCalibrated learns the lane's width on the calibrated floor: the
// mean distance from the left line's points to the right line, mapped to
// the floor; a frame where it spreads by more than 5 % of the mean (a
// line fitted off the tape somewhere) is left out.
func (ln *Lane) learnCalibrated(l bandLayout, a, b *fitResult) {
	pa, pb, _ := ln.sample(l, a, b)
	qa, qb := floorPoints(&ln.cal, pa, ln.qa[:0]), floorPoints(&ln.cal, pb, ln.qb[:0])
	ln.qa, ln.qb = qa, qb
	mu, r2, ok := floorSpread(qa, qb)
	if !ok || r2 > 0.05*0.05 {
		return
	}
	if ln.calW == 0 {
		ln.calW = mu
	} else {
		ln.calW += ln.lc.LearnRate * (mu - ln.calW)
	}
}

// floorSpread is the mean distance from the points qa to the polyline qb
// (counting only points beside it, not beyond its ends) and the variance
// of the distances relative to the squared mean.
func floorSpread(qa, qb [][2]float64) (mu, r2 float64, ok bool) {
	var n, sd, sdd float64
	j := 0
	for _, p := range qa {
		// the nearest segment of qb, searched on from the last one
		d, jn, inside := nearestSegment(p, qb, j)
		j = jn
		if !inside {
			continue
		}
		n++
		sd += d
		sdd += d * d
	}
	if n < 4 || sd <= 0 {
		return 0, 0, false
	}
	mu = sd / n
	return mu, math.Max(sdd/n-mu*mu, 0) / (mu * mu), true
}
