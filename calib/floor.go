package calib

import (
	"fmt"
	"math"
)

// Floor is the ground-plane mapping.
type Floor struct {
	// H maps undistorted image pixels to floor millimetres (X forward, Y
	// right; see the package documentation).
	H Homography `json:"h"`
	// Method says how H was found: "points", "board" or "pose".
	Method string `json:"method"`
	// RMSMM is the fit's root-mean-square residual on the floor, mm (0
	// when the fit is exact, as with exactly four points, or for "pose").
	RMSMM float64 `json:"rms_mm"`
	// HeightMM and PitchDeg are the camera pose for method "pose".
	HeightMM Millimetres `json:"height_mm,omitempty"`
	PitchDeg Degrees     `json:"pitch_deg,omitempty"`
	// LookaheadMM is the default distance ahead of the floor origin at
	// which Measure reports the offset; 0 means DefaultLookahead.
	LookaheadMM Millimetres `json:"lookahead_mm,omitempty"`
	// TapeWidthMM is the stripe's real width; 0 means unknown. Measure
	// marks a measurement untrusted when its width is far from it.
	TapeWidthMM Millimetres `json:"tape_width_mm,omitempty"`
}

// DefaultLookahead is the look-ahead used when a Floor does not set one.
const DefaultLookahead Millimetres = 1000

func (f *Floor) check() error {
	const redo = "run hewline calib floor again"
	switch f.Method {
	case "points", "board", "pose":
	default:
		return fmt.Errorf("floor: method %q is not points, board or pose; %s", f.Method, redo)
	}
	if !finite(f.H[:]...) || !finite(f.RMSMM, float64(f.HeightMM), float64(f.PitchDeg), float64(f.LookaheadMM), float64(f.TapeWidthMM)) {
		return fmt.Errorf("floor: a value is not a finite number; %s", redo)
	}
	if _, err := f.H.Inverse(); err != nil {
		return fmt.Errorf("floor: the homography h is not invertible; %s", redo)
	}
	if f.RMSMM < 0 || f.LookaheadMM < 0 || f.TapeWidthMM < 0 {
		return fmt.Errorf("floor: rms_mm, lookahead_mm and tape_width_mm must not be negative; fix or %s", redo)
	}
	if f.TapeWidthMM > 1000 {
		return fmt.Errorf("floor: tape_width_mm %v is over a metre; give the stripe's width in mm (common practice 50 to 100)", f.TapeWidthMM)
	}
	return nil
}

// PointResidual is one marked point's misfit after a floor fit.
type PointResidual struct {
	Image Pt // the raw pixel given
	Floor Pt // the floor position given, mm
	// FloorErrMM is the distance on the floor between the given position
	// and where the fitted mapping puts the pixel.
	FloorErrMM float64
	// ImageErrPx is the distance in the image between the given pixel and
	// where the fitted mapping puts the floor position.
	ImageErrPx float64
}

// FloorReport tells how well a floor fit matches its points.
type FloorReport struct {
	Points []PointResidual
	RMSMM  float64
	// MaxErrMM is the largest FloorErrMM.
	MaxErrMM float64
	// Exact is true when there were just enough points for an exact fit
	// (four), so the residuals say nothing: add a fifth mark to check.
	Exact bool
}

// FloorFromPoints fits the floor mapping to four or more marked points:
// img are raw pixels, floor their measured positions in mm (X forward, Y
// right). lens may be nil for a lens without distortion data; then pixels
// are used as they are.
func FloorFromPoints(lens *Lens, img, floor []Pt) (Floor, FloorReport, error) {
	if len(img) != len(floor) {
		return Floor{}, FloorReport{}, fmt.Errorf("calib: %d image points but %d floor points", len(img), len(floor))
	}
	und := make([]Pt, len(img))
	for i, p := range img {
		if !finite(p.X, p.Y) {
			return Floor{}, FloorReport{}, fmt.Errorf("calib: image point %d is not a finite number", i+1)
		}
		und[i] = p
		if lens != nil {
			x, y, err := lens.Undistort(p.X, p.Y)
			if err != nil {
				return Floor{}, FloorReport{}, fmt.Errorf("calib: image point %d: %w", i+1, err)
			}
			und[i] = Pt{x, y}
		}
	}
	if len(img) == 4 {
		if i, j, k, ok := threeInLine(img); ok {
			return Floor{}, FloorReport{}, fmt.Errorf("%w: image points %d, %d and %d lie on one line; mark four points with no three in a row", ErrSingular, i+1, j+1, k+1)
		}
		if i, j, k, ok := threeInLine(floor); ok {
			return Floor{}, FloorReport{}, fmt.Errorf("%w: floor points %d, %d and %d lie on one line; mark four points with no three in a row", ErrSingular, i+1, j+1, k+1)
		}
	}
	h, err := FitHomography(und, floor)
	if err != nil {
		return Floor{}, FloorReport{}, err
	}
	f := Floor{H: h, Method: "points"}
	rep, err := f.report(lens, img, floor)
	if err != nil {
		return Floor{}, FloorReport{}, err
	}
	rep.Exact = len(img) == 4
	f.RMSMM = rep.RMSMM
	return f, rep, nil
}

func (f *Floor) report(lens *Lens, img, floor []Pt) (FloorReport, error) {
	m, err := newMapper(lens, f, 0, 0)
	if err != nil {
		return FloorReport{}, err
	}
	var rep FloorReport
	var ss float64
	for i := range img {
		q, ok := m.ToFloor(img[i])
		if !ok {
			return FloorReport{}, fmt.Errorf("calib: point %d maps behind the camera; check the order of the points", i+1)
		}
		back, ok := m.ToImage(floor[i])
		ie := math.Inf(1)
		if ok {
			ie = math.Hypot(back.X-img[i].X, back.Y-img[i].Y)
		}
		fe := math.Hypot(q.X-floor[i].X, q.Y-floor[i].Y)
		rep.Points = append(rep.Points, PointResidual{Image: img[i], Floor: floor[i], FloorErrMM: fe, ImageErrPx: ie})
		ss += fe * fe
		rep.MaxErrMM = math.Max(rep.MaxErrMM, fe)
	}
	rep.RMSMM = math.Sqrt(ss / float64(len(img)))
	return rep, nil
}

// threeInLine finds three of p (nearly) on one line.
func threeInLine(p []Pt) (int, int, int, bool) {
	for i := 0; i < len(p); i++ {
		for j := i + 1; j < len(p); j++ {
			for k := j + 1; k < len(p); k++ {
				if collinear([]Pt{p[i], p[j], p[k]}) {
					return i, j, k, true
				}
			}
		}
	}
	return 0, 0, 0, false
}

// PoseMatrix returns the pinhole projection from floor millimetres to
// undistorted pixels for a camera height above the floor, pitched down by
// pitch from the horizontal, with no roll or yaw, looking along the
// vehicle's axis; the floor origin is the point straight below the camera.
//
// A floor point (X forward, Y right) is, in camera coordinates (x right,
// y down, z along the optical axis): x = Y, y = h·cos θ − X·sin θ,
// z = X·cos θ + h·sin θ (textbook pinhole geometry, Hartley & Zisserman
// ch. 6), and the pixel is (fx·x/z + cx, fy·y/z + cy).
func PoseMatrix(lens Lens, height Millimetres, pitch Degrees) Homography {
	s, c := math.Sincos(pitch.Radians())
	h := float64(height)
	// M maps (X, Y, 1) to camera (x, y, z); K·M maps to pixels.
	M := Homography{0, 1, 0, -s, 0, h * c, c, 0, h * s}
	K := Homography{lens.Fx, 0, lens.Cx, 0, lens.Fy, lens.Cy, 0, 0, 1}
	return mul3(K, M)
}

// FloorFromPose builds the floor mapping from the camera's height above
// the floor and its downward pitch (0 = looking at the horizon, 90 =
// straight down), for a camera on the vehicle's axis with no roll or yaw.
func FloorFromPose(lens Lens, height Millimetres, pitch Degrees) (Floor, error) {
	if !finite(float64(height), float64(pitch)) || height <= 0 || height > 10000 {
		return Floor{}, fmt.Errorf("calib: camera height %v mm: give the lens's height above the floor in mm (0 to 10000)", height)
	}
	if pitch <= 0 || pitch > 90 {
		return Floor{}, fmt.Errorf("calib: pitch %v degrees: give the camera's downward tilt from horizontal, more than 0 and at most 90", pitch)
	}
	if lens.Fx <= 0 || lens.Fy <= 0 || !finite(lens.Fx, lens.Fy, lens.Cx, lens.Cy) {
		return Floor{}, fmt.Errorf("calib: the pose method needs a lens calibration; run hewline calib lens first")
	}
	h, err := PoseMatrix(lens, height, pitch).Inverse()
	if err != nil {
		return Floor{}, err
	}
	// Points in front of the camera must map with w > 0.
	_, _, ok := h.Apply(lens.Cx, lens.Cy)
	if !ok {
		for i := range h {
			h[i] = -h[i]
		}
	}
	return Floor{H: h, Method: "pose", HeightMM: height, PitchDeg: pitch}, nil
}
