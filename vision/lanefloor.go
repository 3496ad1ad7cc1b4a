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
	once   bool    // ok at some time since the last reset
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

// floorCircle is a circle on the floor fitted to a line's points, or a
// straight line when they are (nearly) collinear, with the way the points
// run along it.
type floorCircle struct {
	ox, oz, r float64 // centre and radius (circle)
	ccw       bool    // the points run counter-clockwise (X right, Z forward)
	straight  bool
	px, pz    float64 // a point of the line (straight)
	tx, tz    float64 // its forward unit direction (straight)
}

// fitFloorCircle fits a circle by Kåsa's algebraic least squares (I.
// Kåsa, "A circle fitting procedure and its error analysis", IEEE Trans.
// Instrum. Meas. 25(1), 1976) to the floor points q, ordered near end
// first. Points on a line (a radius beyond a thousand times their extent)
// give the line through them. ok false with fewer than four points or
// none spread.
func fitFloorCircle(q [][2]float64) (floorCircle, bool) {
	n := len(q)
	if n < 4 {
		return floorCircle{}, false
	}
	var mx, mz float64
	for _, p := range q {
		mx += p[0]
		mz += p[1]
	}
	mx, mz = mx/float64(n), mz/float64(n)
	var A [3][3]float64
	var B [3]float64
	var suu, suv, svv float64
	for _, p := range q {
		u, v := p[0]-mx, p[1]-mz
		suu, suv, svv = suu+u*u, suv+u*v, svv+v*v
		r := u*u + v*v
		row := [3]float64{u, v, 1}
		for i := 0; i < 3; i++ {
			for j := 0; j < 3; j++ {
				A[i][j] += row[i] * row[j]
			}
			B[i] -= row[i] * r
		}
	}
	first, last := q[0], q[n-1]
	extent := math.Hypot(last[0]-first[0], last[1]-first[1])
	if extent == 0 {
		return floorCircle{}, false
	}
	// the line: the principal direction of the points, pointing on
	th := 0.5 * math.Atan2(2*suv, suu-svv)
	tx, tz := math.Cos(th), math.Sin(th)
	if tx*(last[0]-first[0])+tz*(last[1]-first[1]) < 0 {
		tx, tz = -tx, -tz
	}
	line := floorCircle{straight: true, px: mx, pz: mz, tx: tx, tz: tz}
	sol, ok := solve3(A, B)
	if !ok {
		return line, true
	}
	r2 := (sol[0]*sol[0]+sol[1]*sol[1])/4 - sol[2]
	if !(r2 > 0) || r2 > 1e6*extent*extent {
		return line, true
	}
	c := floorCircle{ox: mx - sol[0]/2, oz: mz - sol[1]/2, r: math.Sqrt(r2)}
	c.ccw = (first[0]-c.ox)*(last[1]-c.oz)-(first[1]-c.oz)*(last[0]-c.ox) > 0
	return c, true
}

// nearest is the point of c nearest p, the forward unit tangent there and
// the distance from p.
func (c floorCircle) nearest(p [2]float64) (X, Z, tx, tz, dist float64) {
	if c.straight {
		t := (p[0]-c.px)*c.tx + (p[1]-c.pz)*c.tz
		X, Z = c.px+t*c.tx, c.pz+t*c.tz
		return X, Z, c.tx, c.tz, math.Hypot(p[0]-X, p[1]-Z)
	}
	ex, ez := p[0]-c.ox, p[1]-c.oz
	e := math.Hypot(ex, ez)
	if e == 0 {
		ex, ez, e = 1, 0, 1
	}
	ex, ez = ex/e, ez/e
	tx, tz = -ez, ex
	if !c.ccw {
		tx, tz = -tx, -tz
	}
	return c.ox + c.r*ex, c.oz + c.r*ez, tx, tz, math.Abs(e - c.r)
}

// on is the point of c at arc length s on from its point nearest p, and
// the forward unit tangent there.
func (c floorCircle) on(p [2]float64, s float64) (X, Z, tx, tz float64) {
	X, Z, tx, tz, _ = c.nearest(p)
	if c.straight {
		return X + s*tx, Z + s*tz, tx, tz
	}
	a := s / c.r
	if !c.ccw {
		a = -a
	}
	ex, ez := (X-c.ox)/c.r, (Z-c.oz)/c.r
	ca, sa := math.Cos(a), math.Sin(a)
	ex, ez = ex*ca-ez*sa, ex*sa+ez*ca
	tx, tz = -ez, ex
	if !c.ccw {
		tx, tz = -tx, -tz
	}
	return c.ox + c.r*ex, c.oz + c.r*ez, tx, tz
}

// onFloor appends to the centre's points pts (working x, y and weight,
// in order along the lane) the centre inferred from boundary p alone on
// the floor f, at distance d along its right-hand normal (as beside). A
// boundary seen in perspective through a bend is no quadratic in the
// image (it flattens towards the horizon ever faster): its image fit
// bends too little at its far end and stops short there, and so does a
// centre built on it. On the floor it is a circle over a few metres, so
// everything is done there, from p's measured candidates (not its image
// fit):
//
//  1. each candidate's place and direction come from a circle fitted to
//     its neighbours on the floor (at least arcMin either side, and a
//     quarter of a lane's width along the line where the bands lie
//     close);
//  2. a circle fitted to the farther half is grown band by band with the
//     candidates beyond p's far end that lie on it (where the image fit
//     could no longer follow);
//  3. the centre is put beside each, then beside that circle run on for
//     up to a lane's width (2|d|) past the last candidate, up to its row
//     (the lane is seen to run on up to there).
//
// The centre stops where it runs flatter in the image than
// maxCentreAngle (a quadratic x(y) cannot follow it there) or jumps
// (maxCentreGap).
func (ln *Lane) onFloor(f laneFloor, l bandLayout, p *fitResult, d float64, pts [][3]float64) [][3]float64 {
	cands := ln.c.cands
	q := ln.qa[:0]
	kLast, yLast := -1, p.yLo
	yMid := (p.yLo + p.yHi) / 2
	var nearX, nearY []float64
	for k, i := range p.bands {
		if i < 0 {
			continue
		}
		cd := &cands[i]
		x := cd.x
		if cd.y > yMid {
			x = p.centre.x(cd.y) // the near half: the image fit, smoother
		}
		X, Z, ok := f.toFloor(x, cd.y)
		if !ok {
			continue
		}
		if n := len(q); n > 2*arcMin {
			// off the circle through the last points: the fit's
			// inliers have moved to another line (one crossing its
			// quadratic where this one bends away); the line beyond is
			// grown on the circle below
			if c, ok := fitFloorCircle(q[n-2*arcMin:]); ok {
				if _, _, _, _, dist := c.nearest([2]float64{X, Z}); dist > leaveLine*math.Abs(d) {
					break
				}
			}
		}
		if cd.y > yMid {
			nearX, nearY = append(nearX, x), append(nearY, cd.y)
		}
		q = append(q, [2]float64{X, Z})
		kLast, yLast = k, cd.y
	}
	ln.qa = q
	h := len(q) / 2
	if h < 4 || d == 0 {
		return pts
	}
	far, ok := fitFloorCircle(q[h:])
	if !ok {
		return pts
	}
	miss := 0
	for k := kLast + 1; k < l.n && miss <= 2; k++ {
		best, bestD := -1, math.Inf(1)
		var bp [2]float64
		for i := range cands {
			cd := &cands[i]
			if cd.band != k {
				continue
			}
			X, Z, ok := f.toFloor(cd.x, cd.y)
			if !ok {
				continue
			}
			// within the candidate's half width and two pixels, across
			// the line on the floor there
			sx, _, ok := f.toFloor(cd.x+2+cd.w/2, cd.y)
			if !ok {
				continue
			}
			if _, _, _, _, dist := far.nearest([2]float64{X, Z}); dist <= math.Abs(sx-X) && dist < bestD {
				best, bestD, bp = i, dist, [2]float64{X, Z}
			}
		}
		if best < 0 {
			miss++
			continue
		}
		miss = 0
		q = append(q, bp)
		yLast = cands[best].y
		if c, ok := fitFloorCircle(q[h:]); ok {
			far = c
		}
	}
	ln.qa = q
	var last [3]float64
	y0, y1 := float64(l.y0), float64(l.y1)
	nNear := len(nearX)
	var putImage func(x, y float64) bool
	put := func(X, Z, tx, tz float64) bool {
		x, y, ok := f.toImage(X+d*tz, Z-d*tx)
		if !ok {
			return len(pts) == 0
		}
		return putImage(x, y)
	}
	putImage = func(x, y float64) bool {
		if y > y1 {
			return len(pts) == 0 // below the ROI: only at the near end
		}
		if y < y0 {
			return false
		}
		if len(pts) > 0 && y >= last[1] {
			return true // not farther up than the last: skipped
		}
		// no jump (within maxCentreGap bands of the last point), and the
		// direction over the last few rows (neighbours jitter) no
		// flatter than maxCentreAngle
		if len(pts) > 0 && last[1]-y > maxCentreGap*float64(l.step) {
			return false
		}
		for j := len(pts) - 1; j >= 0; j-- {
			if q := pts[j]; q[1]-y >= slopeRows {
				if math.Abs(x-q[0]) > math.Tan(maxCentreAngle)*(q[1]-y) {
					return false
				}
				break
			}
		}
		last = [3]float64{x, y, 0.5}
		pts = append(pts, last)
		return true
	}
	// arc length along q, for the neighbourhoods
	cs := ln.fcost[:0]
	for i := range q {
		s := 0.0
		if i > 0 {
			s = cs[i-1] + math.Hypot(q[i][0]-q[i-1][0], q[i][1]-q[i-1][1])
		}
		cs = append(cs, s)
	}
	ln.fcost = cs
	lo, hi := 0, 0
	for i, pt := range q {
		// the circle through the point's neighbours, arcMin and a
		// quarter of a lane's width (|d|/2) along the line either side
		// (near the camera the bands lie close on the floor: a few would
		// give no direction)
		for cs[i]-cs[lo] > 0.5*math.Abs(d) && i-lo > arcMin {
			lo++
		}
		for hi < len(q) && (cs[hi]-cs[i] <= 0.5*math.Abs(d) || hi-i <= arcMin) {
			hi++
		}
		if i < nNear {
			// the near half: beside the image fit, as bandCentre
			if xc, yc, ok := beside(f, nearX[i], nearY[i], p.centre.slope(nearY[i]), d); ok && !putImage(xc, yc) {
				return pts
			}
			continue
		}
		c, ok := fitFloorCircle(q[lo:hi])
		if !ok {
			continue
		}
		X, Z, tx, tz, _ := c.nearest(pt)
		if !put(X, Z, tx, tz) {
			return pts
		}
	}
	top := math.Max(yLast, y0)
	step := math.Abs(d) / 8
	for i := 1; i <= 16 && last[1] > top; i++ {
		X, Z, tx, tz := far.on(q[len(q)-1], float64(i)*step)
		if !put(X, Z, tx, tz) {
			break
		}
	}
	return pts
}

// maxCentreAngle and maxCentreGap bound the centre inferred from one
// boundary (see onFloor): its image direction at most 68° from the
// image's vertical (|dx/dy| 2.5), and no more than 6 bands between one
// point and the next (a candidate grown onto the circle by chance).
const (
	maxCentreAngle = 68 * math.Pi / 180
	maxCentreGap   = 6
)

// leaveLine is how far from the circle through a boundary's last
// points, as a share of half the lane's width, its next supporting
// candidate may lie on the floor and still be on the same line (see
// onFloor): a boundary bends far less between two bands, and the next
// line is a lane's width away.
const leaveLine = 0.25

// slopeRows is how many working rows back the centre's direction is
// taken from, when it is checked against maxCentreAngle.
const slopeRows = 6

// arcMin is the fewest neighbours on either side of a boundary point
// that the circle giving its place and direction on the floor is fitted
// to.
const arcMin = 6
