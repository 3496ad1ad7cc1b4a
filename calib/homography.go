package calib

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// Homography is a 3×3 projective map, row-major: (x', y', w') = H·(x, y, 1).
type Homography [9]float64

// Apply maps p. ok is false when p maps to infinity (w' near 0) or, for
// maps to the floor, behind the camera (w' < 0 after normalisation, see
// normalise).
func (h Homography) Apply(x, y float64) (float64, float64, bool) {
	X := h[0]*x + h[1]*y + h[2]
	Y := h[3]*x + h[4]*y + h[5]
	W := h[6]*x + h[7]*y + h[8]
	if math.Abs(W) < 1e-12 {
		return 0, 0, false
	}
	return X / W, Y / W, W > 0
}

func (h Homography) det() float64 {
	return h[0]*(h[4]*h[8]-h[5]*h[7]) - h[1]*(h[3]*h[8]-h[5]*h[6]) + h[2]*(h[3]*h[7]-h[4]*h[6])
}

// ErrSingular: a homography cannot be inverted (its points are collinear
// or it was edited by hand).
var ErrSingular = errors.New("calib: homography is not invertible")

// Inverse returns H⁻¹, scaled so its largest entry is 1.
func (h Homography) Inverse() (Homography, error) {
	if !finite(h[:]...) {
		return Homography{}, fmt.Errorf("%w: it holds a value that is not a finite number", ErrSingular)
	}
	var n float64
	for _, v := range h {
		n = math.Max(n, math.Abs(v))
	}
	if n == 0 {
		return Homography{}, ErrSingular
	}
	var s Homography
	for i, v := range h {
		s[i] = v / n
	}
	d := s.det()
	if math.Abs(d) < 1e-12 {
		return Homography{}, ErrSingular
	}
	inv := Homography{
		s[4]*s[8] - s[5]*s[7], s[2]*s[7] - s[1]*s[8], s[1]*s[5] - s[2]*s[4],
		s[5]*s[6] - s[3]*s[8], s[0]*s[8] - s[2]*s[6], s[2]*s[3] - s[0]*s[5],
		s[3]*s[7] - s[4]*s[6], s[1]*s[6] - s[0]*s[7], s[0]*s[4] - s[1]*s[3],
	}
	for i := range inv {
		inv[i] /= d
	}
	return inv.scaled(), nil
}

// scaled divides h by its largest entry's magnitude.
func (h Homography) scaled() Homography {
	var n float64
	for _, v := range h {
		n = math.Max(n, math.Abs(v))
	}
	if n == 0 {
		return h
	}
	for i := range h {
		h[i] /= n
	}
	return h
}

func mul3(a, b Homography) Homography {
	var c Homography
	for i := 0; i < 3; i++ {
		for j := 0; j < 3; j++ {
			for k := 0; k < 3; k++ {
				c[3*i+j] += a[3*i+k] * b[3*k+j]
			}
		}
	}
	return c
}

// hartley returns the similarity that moves the points' centroid to the
// origin and scales their mean distance from it to √2 (Hartley's
// normalisation, Hartley & Zisserman, "Multiple View Geometry", 2nd ed.,
// section 4.4.4).
func hartley(p []Pt) Homography {
	var cx, cy float64
	for _, q := range p {
		cx += q.X
		cy += q.Y
	}
	cx /= float64(len(p))
	cy /= float64(len(p))
	var d float64
	for _, q := range p {
		d += math.Hypot(q.X-cx, q.Y-cy)
	}
	d /= float64(len(p))
	s := 1.0
	if d > 0 {
		s = math.Sqrt2 / d
	}
	return Homography{s, 0, -s * cx, 0, s, -s * cy, 0, 0, 1}
}

// FitHomography finds H with dst ≈ H·src from four or more pairs by the
// normalised direct linear transform (Hartley & Zisserman, algorithm
// 4.2). The result is scaled so that H maps src's centroid with w' > 0.
func FitHomography(src, dst []Pt) (Homography, error) {
	if len(src) != len(dst) {
		return Homography{}, fmt.Errorf("calib: %d image points but %d floor points", len(src), len(dst))
	}
	if len(src) < 4 {
		return Homography{}, fmt.Errorf("calib: %d point pairs; a homography needs at least 4", len(src))
	}
	for i := range src {
		if !finite(src[i].X, src[i].Y, dst[i].X, dst[i].Y) {
			return Homography{}, fmt.Errorf("calib: point %d is not a finite number", i+1)
		}
	}
	if collinear(src) || collinear(dst) {
		return Homography{}, fmt.Errorf("%w: the points lie on one line or coincide; spread them out (at least 4, no 3 in a row)", ErrSingular)
	}
	ts, td := hartley(src), hartley(dst)
	A := mat.NewDense(2*len(src), 9, nil)
	for i := range src {
		x, y, _ := ts.Apply(src[i].X, src[i].Y)
		u, v, _ := td.Apply(dst[i].X, dst[i].Y)
		A.SetRow(2*i, []float64{-x, -y, -1, 0, 0, 0, u * x, u * y, u})
		A.SetRow(2*i+1, []float64{0, 0, 0, -x, -y, -1, v * x, v * y, v})
	}
	var svd mat.SVD
	if !svd.Factorize(A, mat.SVDFull) {
		return Homography{}, errors.New("calib: homography fit failed (SVD did not converge)")
	}
	var V mat.Dense
	svd.VTo(&V)
	var hn Homography
	for i := 0; i < 9; i++ {
		hn[i] = V.At(i, 8)
	}
	tdi, err := td.Inverse()
	if err != nil {
		return Homography{}, err
	}
	h := mul3(mul3(tdi, hn), ts).scaled()
	if math.Abs(h.det()) < 1e-15 {
		return Homography{}, ErrSingular
	}
	// Fix the sign so that the points themselves map with w' > 0.
	var cx, cy float64
	for _, q := range src {
		cx += q.X
		cy += q.Y
	}
	n := float64(len(src))
	if h[6]*cx/n+h[7]*cy/n+h[8] < 0 {
		for i := range h {
			h[i] = -h[i]
		}
	}
	return h, nil
}

// collinear reports whether all points lie (nearly) on one line.
func collinear(p []Pt) bool {
	var cx, cy float64
	for _, q := range p {
		cx += q.X
		cy += q.Y
	}
	cx /= float64(len(p))
	cy /= float64(len(p))
	var sxx, sxy, syy float64
	for _, q := range p {
		dx, dy := q.X-cx, q.Y-cy
		sxx += dx * dx
		sxy += dx * dy
		syy += dy * dy
	}
	// Eigenvalues of the scatter matrix: a line has a tiny second one.
	tr, det := sxx+syy, sxx*syy-sxy*sxy
	disc := math.Sqrt(math.Max(tr*tr/4-det, 0))
	l1, l2 := tr/2+disc, tr/2-disc
	return l1 == 0 || l2 < 1e-6*l1
}
