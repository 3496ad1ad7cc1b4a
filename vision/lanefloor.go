package vision

import "math"

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
// boundary along the boundary's normal, which in the image is neither
// horizontal nor the image normal once the lane bends.
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

// tangent is the floor direction dX/dZ of an image line through (x, y)
// with image slope dx/dy.
func (m *floorModel) tangent(x, y, slope float64) float64 {
	return (x - m.cx - slope*(y-m.yh)) / m.k
}

// beside is the image point at distance d (floor units) from the line
// through (x, y) with image slope dx/dy, along the line's floor normal,
// to the right for d > 0.
func (m *floorModel) beside(x, y, slope, d float64) (xc, yc float64, ok bool) {
	X, Z, ok := m.toFloor(x, y)
	if !ok {
		return 0, 0, false
	}
	t := m.tangent(x, y, slope)
	n := math.Sqrt(1 + t*t)
	// Unit tangent (t, 1)/n points ahead; its right-hand normal is (1, −t)/n.
	return m.toImage(X+d/n, Z-d*t/n)
}

// perpWidth is the width across a lane whose boundaries cross row y at
// xl and xr, with the centre's image slope there: the horizontal width on
// the floor times the cosine of the centre's floor angle, in image
// pixels at row y (so that on a straight lane it is W·(y − yh)).
func (m *floorModel) perpWidth(xl, xr, y, slope float64) float64 {
	t := m.tangent((xl+xr)/2, y, slope)
	return (xr - xl) / math.Sqrt(1+t*t)
}
