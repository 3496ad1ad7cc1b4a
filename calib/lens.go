package calib

import (
	"errors"
	"fmt"
	"math"
)

// Lens is a pinhole camera with OpenCV's five-coefficient distortion
// model (radial k1, k2, k3 and tangential p1, p2). See OpenCV's calib3d
// documentation for the model; the same equations are in distortNorm.
type Lens struct {
	// Fx, Fy are the focal lengths in pixels; Cx, Cy the principal point.
	Fx float64 `json:"fx"`
	Fy float64 `json:"fy"`
	Cx float64 `json:"cx"`
	Cy float64 `json:"cy"`
	// Dist is (k1, k2, p1, p2, k3).
	Dist [5]float64 `json:"dist"`
	// RMSPx is the overall reprojection error of the calibration, pixels.
	RMSPx float64 `json:"rms_px"`
	// Views is how many board views the calibration used.
	Views int `json:"views"`
	// Board is the chessboard it was calibrated with.
	Board BoardSpec `json:"board"`
}

// BoardSpec describes a printed chessboard by its inner corners.
type BoardSpec struct {
	// Cols, Rows count inner corners (a board of 10×7 squares has 9×6).
	Cols int `json:"cols"`
	Rows int `json:"rows"`
	// Square is the side of one square.
	Square Millimetres `json:"square_mm"`
}

func (b BoardSpec) String() string { return fmt.Sprintf("%dx%d", b.Cols, b.Rows) }

func (b BoardSpec) check() error {
	if b.Cols < 3 || b.Rows < 3 || b.Cols > 100 || b.Rows > 100 {
		return fmt.Errorf("board %dx%d: count inner corners, at least 3x3 (a board of 10x7 squares is 9x6)", b.Cols, b.Rows)
	}
	if !finite(float64(b.Square)) || b.Square <= 0 {
		return fmt.Errorf("board square %v mm: give the printed square's side in mm, more than 0", b.Square)
	}
	return nil
}

// corners lists the board's inner corners in board millimetres, row by
// row, in the order OpenCV's chessboard finder reports them.
func (b BoardSpec) corners() []Pt {
	p := make([]Pt, 0, b.Cols*b.Rows)
	for r := 0; r < b.Rows; r++ {
		for c := 0; c < b.Cols; c++ {
			p = append(p, Pt{float64(c) * float64(b.Square), float64(r) * float64(b.Square)})
		}
	}
	return p
}

// distortNorm applies the distortion model to normalised coordinates
// (x = X/Z, y = Y/Z).
func (l *Lens) distortNorm(x, y float64) (float64, float64) {
	k1, k2, p1, p2, k3 := l.Dist[0], l.Dist[1], l.Dist[2], l.Dist[3], l.Dist[4]
	r2 := x*x + y*y
	rad := 1 + r2*(k1+r2*(k2+r2*k3))
	xd := x*rad + 2*p1*x*y + p2*(r2+2*x*x)
	yd := y*rad + p1*(r2+2*y*y) + 2*p2*x*y
	return xd, yd
}

// Distort maps an undistorted pixel to the raw (distorted) pixel.
func (l *Lens) Distort(u, v float64) (float64, float64) {
	x, y := (u-l.Cx)/l.Fx, (v-l.Cy)/l.Fy
	xd, yd := l.distortNorm(x, y)
	return xd*l.Fx + l.Cx, yd*l.Fy + l.Cy
}

// ErrNoConvergence: a point's undistortion did not converge (the point is
// far outside the region the distortion model was fitted on).
var ErrNoConvergence = errors.New("calib: point undistortion did not converge")

// Undistort maps a raw pixel to the undistorted pixel by fixed-point
// iteration (the method OpenCV's undistortPoints uses), iterating until the
// point moves less than 1e-6 px. It returns ErrNoConvergence when the
// re-distorted result misses the input by more than 0.01 px.
func (l *Lens) Undistort(u, v float64) (float64, float64, error) {
	xd, yd := (u-l.Cx)/l.Fx, (v-l.Cy)/l.Fy
	k1, k2, p1, p2, k3 := l.Dist[0], l.Dist[1], l.Dist[2], l.Dist[3], l.Dist[4]
	x, y := xd, yd
	for i := 0; i < 100; i++ {
		r2 := x*x + y*y
		rad := 1 + r2*(k1+r2*(k2+r2*k3))
		if rad <= 0 {
			break
		}
		dx := 2*p1*x*y + p2*(r2+2*x*x)
		dy := p1*(r2+2*y*y) + 2*p2*x*y
		nx, ny := (xd-dx)/rad, (yd-dy)/rad
		moved := math.Hypot((nx-x)*l.Fx, (ny-y)*l.Fy)
		x, y = nx, ny
		if moved < 1e-6 {
			break
		}
	}
	cu, cv := l.distortNorm(x, y)
	if !finite(x, y) || math.Hypot((cu-xd)*l.Fx, (cv-yd)*l.Fy) > 0.01 {
		return 0, 0, fmt.Errorf("%w: pixel (%.1f, %.1f)", ErrNoConvergence, u, v)
	}
	return x*l.Fx + l.Cx, y*l.Fy + l.Cy, nil
}

// project maps a point in camera coordinates (X right, Y down, Z forward)
// to a raw pixel. ok is false behind the camera.
func (l *Lens) project(X, Y, Z float64) (u, v float64, ok bool) {
	if Z <= 1e-12 {
		return 0, 0, false
	}
	xd, yd := l.distortNorm(X/Z, Y/Z)
	return xd*l.Fx + l.Cx, yd*l.Fy + l.Cy, true
}

// check validates the lens against an image of w×h pixels. Its messages
// say what to do.
func (l *Lens) check(w, h int) error {
	const redo = "run hewline calib lens again"
	if !finite(l.Fx, l.Fy, l.Cx, l.Cy) || !finite(l.Dist[:]...) || !finite(l.RMSPx) {
		return fmt.Errorf("lens: a value is not a finite number; %s", redo)
	}
	if l.Fx <= 0 || l.Fy <= 0 {
		return fmt.Errorf("lens: focal lengths fx=%g, fy=%g must be more than 0; %s", l.Fx, l.Fy, redo)
	}
	if r := l.Fx / l.Fy; r < 0.5 || r > 2 {
		return fmt.Errorf("lens: fx/fy = %.2f is no real camera (expected near 1); %s", r, redo)
	}
	if l.Fx > 100*float64(w) {
		return fmt.Errorf("lens: fx=%g px is over 100 image widths; %s", l.Fx, redo)
	}
	if l.Cx < 0 || l.Cx >= float64(w) || l.Cy < 0 || l.Cy >= float64(h) {
		return fmt.Errorf("lens: principal point (%g, %g) is outside the %dx%d image; %s", l.Cx, l.Cy, w, h, redo)
	}
	for i, d := range l.Dist {
		if math.Abs(d) > 100 {
			return fmt.Errorf("lens: distortion coefficient %d = %g is out of range (|d| <= 100); %s", i+1, d, redo)
		}
	}
	// The model must map the image one to one: the radial function
	// r·(1 + k1 r² + k2 r⁴ + k3 r⁶) has to keep rising out to the image
	// corners, else points have two undistorted positions.
	rmax := 0.0
	for _, c := range [][2]float64{{0, 0}, {float64(w), 0}, {0, float64(h)}, {float64(w), float64(h)}} {
		rmax = math.Max(rmax, math.Hypot((c[0]-l.Cx)/l.Fx, (c[1]-l.Cy)/l.Fy))
	}
	k1, k2, k3 := l.Dist[0], l.Dist[1], l.Dist[4]
	for i := 1; i <= 100; i++ {
		r := rmax * float64(i) / 100
		r2 := r * r
		if d := 1 + 3*k1*r2 + 5*k2*r2*r2 + 7*k3*r2*r2*r2; d <= 0 {
			return fmt.Errorf("lens: the distortion folds over inside the image (at %.0f%% of the corner radius); %s with more views near the image corners", 100*float64(i)/100, redo)
		}
	}
	if l.RMSPx < 0 {
		return fmt.Errorf("lens: rms_px=%g is negative; %s", l.RMSPx, redo)
	}
	return nil
}
