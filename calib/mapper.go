package calib

import (
	"fmt"
	"math"
	"sort"
)

// Mapper maps between raw image pixels and floor millimetres. It is
// read-only after NewMapper and safe for concurrent use.
type Mapper struct {
	lens      *Lens // nil: no distortion correction
	toFloor   Homography
	toImage   Homography
	lookahead Millimetres
	tape      Millimetres
}

// NewMapper builds a Mapper from a loaded calibration file, which must
// have a Floor section. Call f.CheckFrameSize with the frames' size first.
func NewMapper(f *File) (*Mapper, error) {
	if f.Floor == nil {
		return nil, fmt.Errorf("calib: the calibration file has no floor section; run hewline calib floor")
	}
	return newMapper(f.Lens, f.Floor, f.Floor.LookaheadMM, f.Floor.TapeWidthMM)
}

func newMapper(lens *Lens, fl *Floor, lookahead, tape Millimetres) (*Mapper, error) {
	inv, err := fl.H.Inverse()
	if err != nil {
		return nil, err
	}
	if lookahead <= 0 {
		lookahead = DefaultLookahead
	}
	return &Mapper{lens: lens, toFloor: fl.H, toImage: inv, lookahead: lookahead, tape: tape}, nil
}

// Lookahead is the look-ahead distance from the calibration file (or
// DefaultLookahead).
func (m *Mapper) Lookahead() Millimetres { return m.lookahead }

// ToFloor maps a raw pixel to the floor. ok is false when the pixel is
// above the horizon (its ray never meets the floor) or cannot be
// undistorted.
func (m *Mapper) ToFloor(p Pt) (Pt, bool) {
	x, y := p.X, p.Y
	if m.lens != nil {
		var err error
		if x, y, err = m.lens.Undistort(x, y); err != nil {
			return Pt{}, false
		}
	}
	X, Y, ok := m.toFloor.Apply(x, y)
	return Pt{X, Y}, ok
}

// ToImage maps a floor point to its raw pixel. ok is false when the point
// is behind the camera.
func (m *Mapper) ToImage(q Pt) (Pt, bool) {
	h := m.toImage
	X := h[0]*q.X + h[1]*q.Y + h[2]
	Y := h[3]*q.X + h[4]*q.Y + h[5]
	W := h[6]*q.X + h[7]*q.Y + h[8]
	if math.Abs(W) < 1e-12 || !finite(q.X, q.Y) {
		return Pt{}, false
	}
	x, y := X/W, Y/W
	// A floor point behind the camera projects above the horizon, where
	// the image-to-floor map has w < 0.
	if _, _, front := m.toFloor.Apply(x, y); !front {
		return Pt{}, false
	}
	if m.lens != nil {
		x, y = m.lens.Distort(x, y)
	}
	return Pt{x, y}, true
}

// FloorMeasure is one frame's stripe measured on the floor.
type FloorMeasure struct {
	// OffsetMM is the stripe centreline's lateral position at the
	// look-ahead distance: positive right of the vehicle's axis.
	OffsetMM Millimetres
	// HeadingDeg is the stripe's angle from the vehicle's axis at the
	// look-ahead, positive when its far end leans right.
	HeadingDeg Degrees
	// WidthMM is the stripe's width on the floor at the reference row;
	// 0 when no width was given.
	WidthMM Millimetres
	// LookaheadMM is where OffsetMM was taken.
	LookaheadMM Millimetres
	// OK is false when the measurement must not be used; Reason says why.
	OK     bool
	Reason string
}

// MaxExtrapolation is how far beyond the seen part of the stripe Measure
// still reports OK, as a fraction of the seen length.
const MaxExtrapolation = 0.25

// Measure maps an image centreline (raw pixels, any order) to the floor
// and measures it. widthPx is the stripe's width in the image measured
// perpendicular to the centreline at image row refRow (0 = none).
// lookahead 0 uses the Mapper's. Measure does not retain points.
//
// The centreline is fitted on the floor as Y = a + b·X + c·X² (a straight
// line for fewer than 6 points) by least squares weighted towards the
// look-ahead (Gaussian weights of width FitWindow, so bends far away do
// not bend the fit there); the offset and heading are taken at
// X = lookahead. OK is false when fewer than 2 points reach the floor, the
// stripe does not run forward, the look-ahead lies more than
// MaxExtrapolation beyond the seen part, or the width differs from the
// calibration's tape width by more than a factor of 2.
func (m *Mapper) Measure(points []Pt, refRow, widthPx float64, lookahead Millimetres) (FloorMeasure, error) {
	if lookahead <= 0 {
		lookahead = m.lookahead
	}
	out := FloorMeasure{LookaheadMM: lookahead}
	if !finite(refRow, widthPx, float64(lookahead)) || widthPx < 0 {
		return out, fmt.Errorf("calib: measure: refRow %g, widthPx %g or lookahead %g is not a usable number", refRow, widthPx, lookahead)
	}
	fl := make([]Pt, 0, len(points))
	for _, p := range points {
		if !finite(p.X, p.Y) {
			continue
		}
		if q, ok := m.ToFloor(p); ok {
			fl = append(fl, q)
		}
	}
	if len(fl) < 2 {
		out.Reason = "fewer than 2 centreline points reach the floor"
		return out, nil
	}
	xmin, xmax := fl[0].X, fl[0].X
	for _, q := range fl {
		xmin, xmax = math.Min(xmin, q.X), math.Max(xmax, q.X)
	}
	span := xmax - xmin
	if span < 1 {
		out.Reason = "the stripe does not run forward on the floor"
		return out, nil
	}
	L := float64(lookahead)
	a, b, c := fitPoly(fl, L, FitWindow)
	out.OffsetMM = Millimetres(a + b*L + c*L*L)
	out.HeadingDeg = Degrees(math.Atan(b+2*c*L) * 180 / math.Pi)
	out.OK = true
	if L < xmin-MaxExtrapolation*span || L > xmax+MaxExtrapolation*span {
		out.OK = false
		out.Reason = fmt.Sprintf("look-ahead %.0f mm is outside the seen stripe (%.0f to %.0f mm)", L, xmin, xmax)
	}
	if widthPx > 0 {
		w, ok := m.width(points, refRow, widthPx, b, c)
		if !ok {
			out.OK = false
			out.Reason = "stripe width could not be mapped to the floor"
			return out, nil
		}
		out.WidthMM = Millimetres(w)
		if m.tape > 0 && (out.WidthMM > 2*m.tape || out.WidthMM < m.tape/2) && out.OK {
			out.OK = false
			out.Reason = fmt.Sprintf("stripe measures %.0f mm wide but the tape is %.0f mm: wrong calibration or not the stripe", w, float64(m.tape))
		}
	}
	return out, nil
}

// width maps the stripe's edges at refRow to the floor and returns their
// distance across the fitted centreline (Y = a + bX + cX²).
func (m *Mapper) width(points []Pt, refRow, widthPx, b, c float64) (float64, bool) {
	ps := make([]Pt, 0, len(points))
	for _, p := range points {
		if finite(p.X, p.Y) {
			ps = append(ps, p)
		}
	}
	sort.Slice(ps, func(i, j int) bool { return ps[i].Y < ps[j].Y })
	// The segment nearest refRow gives the centre and the image direction.
	k := 1
	for k < len(ps)-1 && ps[k].Y < refRow {
		k++
	}
	p0, p1 := ps[k-1], ps[k]
	dx, dy := p1.X-p0.X, p1.Y-p0.Y
	n := math.Hypot(dx, dy)
	if n == 0 {
		return 0, false
	}
	t := 0.5
	if dy != 0 {
		t = (refRow - p0.Y) / dy
	}
	cx, cy := p0.X+t*dx, p0.Y+t*dy
	nx, ny := -dy/n*widthPx/2, dx/n*widthPx/2
	e1, ok1 := m.ToFloor(Pt{cx - nx, cy - ny})
	e2, ok2 := m.ToFloor(Pt{cx + nx, cy + ny})
	mid, ok3 := m.ToFloor(Pt{cx, cy})
	if !ok1 || !ok2 || !ok3 {
		return 0, false
	}
	// Unit normal to the floor centreline at the centre's X.
	slope := b + 2*c*mid.X
	l := math.Hypot(1, slope)
	fx, fy := -slope/l, 1/l
	return math.Abs((e2.X-e1.X)*fx + (e2.Y-e1.Y)*fy), true
}

// FitWindow is the width (1 sigma) of Measure's weighting around the
// look-ahead.
const FitWindow Millimetres = 300

// fitPoly fits Y = a + bX + cX² by least squares weighted by a Gaussian of
// width sigma around X = at (c = 0 below 6 points), on X centred and
// scaled for conditioning. When the weights near at are too thin (under 3
// points' worth) it fits all points alike.
func fitPoly(p []Pt, at float64, sigma Millimetres) (a, b, c float64) {
	wt := make([]float64, len(p))
	var sw float64
	for i, q := range p {
		d := (q.X - at) / float64(sigma)
		wt[i] = math.Exp(-d * d / 2)
		sw += wt[i]
	}
	if sw < 3 {
		for i := range wt {
			wt[i] = 1
		}
		sw = float64(len(p))
	}
	var mx float64
	for i, q := range p {
		mx += wt[i] * q.X
	}
	mx /= sw
	var sc float64
	for _, q := range p {
		sc = math.Max(sc, math.Abs(q.X-mx))
	}
	if sc == 0 {
		sc = 1
	}
	// Normal equations in u = (X − mx)/sc.
	var S [5]float64
	var T [3]float64
	for k, q := range p {
		u := (q.X - mx) / sc
		pw := wt[k]
		for i := 0; i < 5; i++ {
			S[i] += pw
			if i < 3 {
				T[i] += pw * q.Y
			}
			pw *= u
		}
	}
	var A, B, C float64
	if len(p) >= 6 {
		M := [3][3]float64{{S[0], S[1], S[2]}, {S[1], S[2], S[3]}, {S[2], S[3], S[4]}}
		d := det3(M)
		if math.Abs(d) > 1e-12 {
			sol := [3]float64{}
			for k := 0; k < 3; k++ {
				Mk := M
				for r := 0; r < 3; r++ {
					Mk[r][k] = T[r]
				}
				sol[k] = det3(Mk) / d
			}
			A, B, C = sol[0], sol[1], sol[2]
		} else {
			A, B = line2(S, T)
		}
	} else {
		A, B = line2(S, T)
	}
	// Back to X: Y = A + B u + C u², u = (X − mx)/sc.
	b1, c1 := B/sc, C/(sc*sc)
	return A - b1*mx + c1*mx*mx, b1 - 2*c1*mx, c1
}

func line2(S [5]float64, T [3]float64) (float64, float64) {
	d := S[0]*S[2] - S[1]*S[1]
	if d == 0 {
		return T[0] / S[0], 0
	}
	return (T[0]*S[2] - S[1]*T[1]) / d, (S[0]*T[1] - S[1]*T[0]) / d
}

func det3(m [3][3]float64) float64 {
	return m[0][0]*(m[1][1]*m[2][2]-m[1][2]*m[2][1]) - m[0][1]*(m[1][0]*m[2][2]-m[1][2]*m[2][0]) + m[0][2]*(m[1][0]*m[2][1]-m[1][1]*m[2][0])
}
