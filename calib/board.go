package calib

import (
	"errors"
	"fmt"
	"image"
	"math"
	"sort"

	"gocv.io/x/gocv"
)

// ErrNoBoard: the chessboard was not found in an image (or in any).
var ErrNoBoard = errors.New("chessboard not found")

// Sub-pixel refinement settings: an 11×11 window (half-size 5), at most 30
// iterations or 0.1 px movement, as in OpenCV's own calibration test
// (modules/python/test/test_calibration.py, from memory).
var (
	subPixWin  = image.Pt(5, 5)
	subPixTerm = gocv.NewTermCriteria(gocv.Count|gocv.EPS, 30, 0.1)
)

// toGray returns a single-channel 8-bit view of img for the chessboard
// finder. The caller closes the result when owned is true. It refuses
// empty and non-8-bit images before OpenCV sees them.
func toGray(img gocv.Mat) (gray gocv.Mat, owned bool, err error) {
	if img.Empty() || img.Cols() < 16 || img.Rows() < 16 {
		return gocv.Mat{}, false, errors.New("empty or tiny image")
	}
	switch img.Type() {
	case gocv.MatTypeCV8UC1:
		return img, false, nil
	case gocv.MatTypeCV8UC3:
		g := gocv.NewMat()
		gocv.CvtColor(img, &g, gocv.ColorBGRToGray)
		return g, true, nil
	case gocv.MatTypeCV8UC4:
		g := gocv.NewMat()
		gocv.CvtColor(img, &g, gocv.ColorBGRAToGray)
		return g, true, nil
	}
	return gocv.Mat{}, false, fmt.Errorf("image type %v: need 8-bit grey or BGR", img.Type())
}

// FindBoard finds the board's inner corners in img (8-bit grey or BGR; not
// retained) with sub-pixel refinement, in OpenCV's order (row by row).
// It returns an error wrapping ErrNoBoard when the board is not there.
func FindBoard(img gocv.Mat, board BoardSpec) ([]Pt, error) {
	if err := board.check(); err != nil {
		return nil, err
	}
	gray, owned, err := toGray(img)
	if err != nil {
		return nil, err
	}
	if owned {
		defer gray.Close()
	}
	corners := gocv.NewMat()
	defer corners.Close()
	flags := gocv.CalibCBAdaptiveThresh | gocv.CalibCBNormalizeImage
	if !gocv.FindChessboardCorners(gray, image.Pt(board.Cols, board.Rows), &corners, flags) {
		return nil, fmt.Errorf("%w (%s inner corners)", ErrNoBoard, board)
	}
	n := board.Cols * board.Rows
	if corners.Empty() || corners.Total() != n || corners.Type() != gocv.MatTypeCV32FC2 {
		return nil, fmt.Errorf("%w: the finder returned %d corners", ErrNoBoard, corners.Total())
	}
	gocv.CornerSubPix(gray, &corners, subPixWin, image.Pt(-1, -1), subPixTerm)
	data, err := corners.DataPtrFloat32()
	if err != nil {
		return nil, fmt.Errorf("calib: corners: %w", err)
	}
	p := make([]Pt, n)
	for i := range p {
		p[i] = Pt{float64(data[2*i]), float64(data[2*i+1])}
	}
	return p, nil
}

// View is one calibration image. The caller owns Img.
type View struct {
	Name string
	Img  gocv.Mat
}

// ViewResult is what happened to one view.
type ViewResult struct {
	Name string
	// Used is true when the view went into the final calibration.
	Used bool
	// RMSPx is its reprojection error in the final model (also for
	// rejected views whose board was found).
	RMSPx float64
	// Reason says why a view was rejected.
	Reason string
}

// LensReport tells how a lens calibration went.
type LensReport struct {
	Views []ViewResult
	// RMSPx is OpenCV's overall reprojection error over the used views.
	RMSPx float64
	// Used counts the views that went into the calibration.
	Used int
}

// MinViews is the fewest views CalibrateLens accepts.
const MinViews = 4

// Views whose reprojection error is over RejectFactor times the median
// (and over RejectFloorPx) are dropped and the calibration is run again.
const (
	RejectFactor  = 3.0
	RejectFloorPx = 0.5
)

// CalibrateLens calibrates the lens from chessboard views with OpenCV's
// calibrateCamera (flags 0: full 5-coefficient model, Zhang's method).
// All views must be the same size. Views without the board, of another
// size, or with a reprojection error far above the others are rejected,
// with the reason in the report. It returns an error wrapping ErrNoBoard
// when the board is in no view, and refuses fewer than MinViews usable
// views. The Mats are not retained.
func CalibrateLens(views []View, board BoardSpec) (Lens, LensReport, error) {
	var rep LensReport
	if err := board.check(); err != nil {
		return Lens{}, rep, err
	}
	if len(views) == 0 {
		return Lens{}, rep, errors.New("calib: no images given")
	}
	var size image.Point
	var corners [][]Pt
	var idx []int // view index of each corner set
	rep.Views = make([]ViewResult, len(views))
	for i, v := range views {
		rep.Views[i].Name = v.Name
		if v.Img.Empty() {
			rep.Views[i].Reason = "empty or unreadable image"
			continue
		}
		sz := image.Pt(v.Img.Cols(), v.Img.Rows())
		if size != (image.Point{}) && sz != size {
			rep.Views[i].Reason = fmt.Sprintf("image is %dx%d, the first is %dx%d", sz.X, sz.Y, size.X, size.Y)
			continue
		}
		p, err := FindBoard(v.Img, board)
		if err != nil {
			rep.Views[i].Reason = err.Error()
			continue
		}
		size = sz
		corners = append(corners, p)
		idx = append(idx, i)
	}
	if len(corners) == 0 {
		return Lens{}, rep, fmt.Errorf("calib: %w in any of the %d images: check -board counts inner corners (a board of 10x7 squares is 9x6), that the whole board is in view, sharp and evenly lit", ErrNoBoard, len(views))
	}
	use := make([]bool, len(corners))
	for i := range use {
		use[i] = true
	}
	for round := 0; ; round++ {
		var sel [][]Pt
		for i, u := range use {
			if u {
				sel = append(sel, corners[i])
			}
		}
		if len(sel) < MinViews {
			return Lens{}, rep, fmt.Errorf("calib: only %d usable views of the board; take at least %d (better 10 to 20) from different angles and positions", len(sel), MinViews)
		}
		lens, poses, rms, err := calibrate(sel, board, size)
		if err != nil {
			return Lens{}, rep, err
		}
		// Per-view errors for every found board, with this model.
		errs := make([]float64, len(corners))
		var usedErrs []float64
		k := 0
		for i := range corners {
			if use[i] {
				errs[i] = viewRMS(&lens, poses[k], board, corners[i])
				usedErrs = append(usedErrs, errs[i])
				k++
			}
		}
		med := median(usedErrs)
		limit := math.Max(RejectFactor*med, RejectFloorPx)
		dropped := false
		if round == 0 {
			for i := range corners {
				if use[i] && errs[i] > limit {
					use[i] = false
					dropped = true
					rep.Views[idx[i]].RMSPx = errs[i]
					rep.Views[idx[i]].Reason = fmt.Sprintf("reprojection error %.2f px is over %.2f px (%.0fx the median %.2f px): blurred, moving or bent board", errs[i], limit, RejectFactor, med)
				}
			}
		}
		if dropped {
			continue
		}
		for i := range corners {
			if use[i] {
				rep.Views[idx[i]].Used = true
				rep.Views[idx[i]].RMSPx = errs[i]
			}
		}
		rep.RMSPx = rms
		rep.Used = len(sel)
		lens.RMSPx = rms
		lens.Views = len(sel)
		lens.Board = board
		if err := lens.check(size.X, size.Y); err != nil {
			return Lens{}, rep, fmt.Errorf("calib: the calibration came out impossible (%v); take more views covering the whole image, corners included", err)
		}
		return lens, rep, nil
	}
}

// pose is a board's rotation (Rodrigues vector) and translation.
type pose struct{ r, t [3]float64 }

// calibrate runs OpenCV's calibrateCamera on corner sets of one size.
func calibrate(sets [][]Pt, board BoardSpec, size image.Point) (Lens, []pose, float64, error) {
	obj := board.corners()
	objPts := make([][]gocv.Point3f, len(sets))
	imgPts := make([][]gocv.Point2f, len(sets))
	for i, s := range sets {
		objPts[i] = make([]gocv.Point3f, len(obj))
		imgPts[i] = make([]gocv.Point2f, len(s))
		for j := range obj {
			objPts[i][j] = gocv.Point3f{X: float32(obj[j].X), Y: float32(obj[j].Y)}
			imgPts[i][j] = gocv.Point2f{X: float32(s[j].X), Y: float32(s[j].Y)}
		}
	}
	ov := gocv.NewPoints3fVectorFromPoints(objPts)
	defer ov.Close()
	iv := gocv.NewPoints2fVectorFromPoints(imgPts)
	defer iv.Close()
	K, D, R, T := gocv.NewMat(), gocv.NewMat(), gocv.NewMat(), gocv.NewMat()
	defer K.Close()
	defer D.Close()
	defer R.Close()
	defer T.Close()
	rms := gocv.CalibrateCamera(ov, iv, size, &K, &D, &R, &T, 0)
	k, err1 := K.DataPtrFloat64()
	d, err2 := D.DataPtrFloat64()
	r, err3 := R.DataPtrFloat64()
	t, err4 := T.DataPtrFloat64()
	if err := errors.Join(err1, err2, err3, err4); err != nil || len(k) != 9 || len(d) < 5 || len(r) != 3*len(sets) || len(t) != 3*len(sets) {
		return Lens{}, nil, 0, fmt.Errorf("calib: calibrateCamera returned unexpected results (%v)", err)
	}
	lens := Lens{Fx: k[0], Fy: k[4], Cx: k[2], Cy: k[5]}
	copy(lens.Dist[:], d[:5])
	poses := make([]pose, len(sets))
	for i := range poses {
		copy(poses[i].r[:], r[3*i:3*i+3])
		copy(poses[i].t[:], t[3*i:3*i+3])
	}
	return lens, poses, rms, nil
}

// rodrigues turns a rotation vector into a row-major 3×3 matrix.
func rodrigues(r [3]float64) [9]float64 {
	th := math.Sqrt(r[0]*r[0] + r[1]*r[1] + r[2]*r[2])
	if th < 1e-15 {
		return [9]float64{1, 0, 0, 0, 1, 0, 0, 0, 1}
	}
	x, y, z := r[0]/th, r[1]/th, r[2]/th
	s, c := math.Sincos(th)
	v := 1 - c
	return [9]float64{
		c + x*x*v, x*y*v - z*s, x*z*v + y*s,
		y*x*v + z*s, c + y*y*v, y*z*v - x*s,
		z*x*v - y*s, z*y*v + x*s, c + z*z*v,
	}
}

// viewRMS is the root-mean-square distance between the found corners and
// the board corners projected through the lens at pose p.
func viewRMS(l *Lens, p pose, board BoardSpec, found []Pt) float64 {
	R := rodrigues(p.r)
	var ss float64
	for j, o := range board.corners() {
		X := R[0]*o.X + R[1]*o.Y + p.t[0]
		Y := R[3]*o.X + R[4]*o.Y + p.t[1]
		Z := R[6]*o.X + R[7]*o.Y + p.t[2]
		u, v, ok := l.project(X, Y, Z)
		if !ok {
			return math.Inf(1)
		}
		ss += (u-found[j].X)*(u-found[j].X) + (v-found[j].Y)*(v-found[j].Y)
	}
	return math.Sqrt(ss / float64(len(found)))
}

func median(v []float64) float64 {
	if len(v) == 0 {
		return 0
	}
	s := append([]float64(nil), v...)
	sort.Float64s(s)
	if len(s)%2 == 1 {
		return s[len(s)/2]
	}
	return (s[len(s)/2-1] + s[len(s)/2]) / 2
}
