package synth

import "math"

// Pose is a position and heading on the floor, in world coordinates:
// X and Y in metres, HeadingDeg measured counter-clockwise from +X (seen
// from above, Z up).
type Pose struct {
	X, Y       float64
	HeadingDeg float64
}

// Segment is one piece of a path: a straight (Curvature 0) or a circular
// arc. Length is the arc length in metres; Curvature is 1/radius in 1/m,
// positive when the path turns right (clockwise seen from above), negative
// when it turns left.
type Segment struct {
	Length    float64
	Curvature float64
}

// Straight returns a straight segment of length l metres.
func Straight(l float64) Segment { return Segment{Length: l} }

// Arc returns a circular arc of the given radius (metres) turning by
// turnDeg degrees: positive turns right, negative left.
func Arc(radius, turnDeg float64) Segment {
	k := 1 / radius
	if turnDeg < 0 {
		k = -k
	}
	return Segment{Length: radius * math.Abs(turnDeg) * math.Pi / 180, Curvature: k}
}

// Path is a smooth (tangent-continuous) curve on the floor parametrised by
// arc length s from Start. Curvature is piecewise constant and known
// everywhere, so positions, tangents and distances are exact.
type Path struct {
	Start    Pose
	Segments []Segment
}

// Length is the total arc length of p in metres.
func (p Path) Length() float64 {
	var l float64
	for _, sg := range p.Segments {
		l += sg.Length
	}
	return l
}

// seg is a Segment placed in the world, with what the per-pixel queries need.
type seg struct {
	s0, length float64
	kappa      float64 // signed curvature, positive counter-clockwise (left)
	x0, y0     float64 // start point
	c0, s0n    float64 // cos, sin of the start heading
	psi0       float64 // start heading, radians CCW from +X
	cx, cy, r  float64 // arc centre and radius (arcs only)
	phi0       float64 // angle of the start point seen from the centre
	sweep      float64 // |kappa|·length
	minX, minY float64 // bounding box of the centreline
	maxX, maxY float64
}

// geom is a Path placed in the world.
type geom struct {
	segs  []seg
	total float64
}

func newGeom(p Path) geom {
	g := geom{}
	x, y := p.Start.X, p.Start.Y
	psi := p.Start.HeadingDeg * math.Pi / 180
	var s float64
	for _, sgIn := range p.Segments {
		if sgIn.Length <= 0 {
			continue
		}
		sg := seg{s0: s, length: sgIn.Length, kappa: -sgIn.Curvature, x0: x, y0: y, psi0: psi}
		sg.c0, sg.s0n = math.Cos(psi), math.Sin(psi)
		if sg.kappa != 0 {
			sg.r = 1 / math.Abs(sg.kappa)
			// centre lies along the left normal for a left turn
			sg.cx = x - sg.s0n/sg.kappa
			sg.cy = y + sg.c0/sg.kappa
			sg.phi0 = math.Atan2(y-sg.cy, x-sg.cx)
			sg.sweep = math.Abs(sg.kappa) * sg.length
		}
		// bounding box from dense samples (cheap, done once)
		sg.minX, sg.minY = math.Inf(1), math.Inf(1)
		sg.maxX, sg.maxY = math.Inf(-1), math.Inf(-1)
		n := int(sg.length/0.05) + 2
		for i := 0; i <= n; i++ {
			px, py, _ := sg.at(sg.length * float64(i) / float64(n))
			sg.minX, sg.maxX = math.Min(sg.minX, px), math.Max(sg.maxX, px)
			sg.minY, sg.maxY = math.Min(sg.minY, py), math.Max(sg.maxY, py)
		}
		g.segs = append(g.segs, sg)
		x, y, psi = sg.at(sg.length)
		s += sg.length
	}
	g.total = s
	return g
}

// at returns the point and heading (radians CCW) at ds along the segment.
func (sg *seg) at(ds float64) (x, y, psi float64) {
	if sg.kappa == 0 {
		return sg.x0 + ds*sg.c0, sg.y0 + ds*sg.s0n, sg.psi0
	}
	psi = sg.psi0 + sg.kappa*ds
	x = sg.x0 + (math.Sin(psi)-sg.s0n)/sg.kappa
	y = sg.y0 - (math.Cos(psi)-sg.c0)/sg.kappa
	return x, y, psi
}

// at returns the point and heading at arc length s. Before the start and
// after the end the path continues straight along its end tangents.
func (g *geom) at(s float64) (x, y, psi float64) {
	if len(g.segs) == 0 {
		return 0, 0, 0
	}
	if s < 0 {
		sg := &g.segs[0]
		return sg.x0 + s*sg.c0, sg.y0 + s*sg.s0n, sg.psi0
	}
	for i := range g.segs {
		sg := &g.segs[i]
		if s <= sg.s0+sg.length || i == len(g.segs)-1 {
			ds := s - sg.s0
			if ds <= sg.length {
				return sg.at(ds)
			}
			ex, ey, epsi := sg.at(sg.length)
			d := ds - sg.length
			return ex + d*math.Cos(epsi), ey + d*math.Sin(epsi), epsi
		}
	}
	return 0, 0, 0
}

// curvatureCCW returns the signed curvature (positive left) at s.
func (g *geom) curvatureCCW(s float64) float64 {
	for i := range g.segs {
		sg := &g.segs[i]
		if s >= sg.s0 && s <= sg.s0+sg.length {
			return sg.kappa
		}
	}
	return 0
}

// nearest finds, for a floor point, the distance to the centreline of this
// segment when the point lies in the segment's own strip (between the
// normals at its two ends). lat is positive left of the path; (nx, ny) is
// the unit normal and (tx, ty) the unit tangent at the foot point.
// Only points with |lat| < maxLat are resolved (ok false otherwise), which
// keeps the trigonometry off most pixels.
func (sg *seg) nearest(px, py, maxLat float64) (s, lat, tx, ty float64, ok bool) {
	if sg.kappa == 0 {
		dx, dy := px-sg.x0, py-sg.y0
		lat = -dx*sg.s0n + dy*sg.c0
		if lat > maxLat || lat < -maxLat {
			return 0, 0, 0, 0, false
		}
		along := dx*sg.c0 + dy*sg.s0n
		if along < 0 || along > sg.length {
			return 0, 0, 0, 0, false
		}
		return sg.s0 + along, lat, sg.c0, sg.s0n, true
	}
	vx, vy := px-sg.cx, py-sg.cy
	d := math.Sqrt(vx*vx + vy*vy)
	if sg.kappa > 0 {
		lat = sg.r - d
	} else {
		lat = d - sg.r
	}
	if lat > maxLat || lat < -maxLat || d == 0 {
		return 0, 0, 0, 0, false
	}
	phi := math.Atan2(vy, vx)
	var dphi float64
	if sg.kappa > 0 {
		dphi = phi - sg.phi0
	} else {
		dphi = sg.phi0 - phi
	}
	dphi = math.Mod(dphi, 2*math.Pi)
	if dphi < 0 {
		dphi += 2 * math.Pi
	}
	if dphi > sg.sweep {
		return 0, 0, 0, 0, false
	}
	// tangent: radial rotated by +90° for a left turn, −90° for a right
	ux, uy := vx/d, vy/d
	if sg.kappa > 0 {
		tx, ty = -uy, ux
	} else {
		tx, ty = uy, -ux
	}
	return sg.s0 + dphi*sg.r, lat, tx, ty, true
}

// Span is an interval [From, To) of arc length along a path, in metres.
type Span struct{ From, To float64 }
