package calib

import (
	"math"
	"testing"

	"gocv.io/x/gocv"
)

// analyticPixel projects floor point (X forward, Y right, mm) through a
// pinhole camera at height h above the floor origin, pitched down by
// pitch, from the camera's basis vectors (textbook pinhole geometry,
// Hartley & Zisserman ch. 6). It is written apart from PoseMatrix so the
// two check each other.
func analyticPixel(l Lens, h, pitchDeg, X, Y float64) (float64, float64) {
	th := pitchDeg * math.Pi / 180
	d := [3]float64{X, Y, -h} // from the camera to the point
	right := [3]float64{0, 1, 0}
	down := [3]float64{-math.Sin(th), 0, -math.Cos(th)}
	axis := [3]float64{math.Cos(th), 0, -math.Sin(th)}
	dot := func(a, b [3]float64) float64 { return a[0]*b[0] + a[1]*b[1] + a[2]*b[2] }
	xc, yc, zc := dot(d, right), dot(d, down), dot(d, axis)
	u, v, _ := l.project(xc, yc, zc)
	return u, v
}

var testCam = Lens{Fx: 520, Fy: 515, Cx: 322, Cy: 241}

func TestHomographyFromFourPointsMatchesPinhole(t *testing.T) {
	const h, pitch = 1100.0, 32.0
	floor := []Pt{{800, -400}, {800, 450}, {2600, -700}, {2500, 800}}
	img := make([]Pt, len(floor))
	for i, q := range floor {
		u, v := analyticPixel(testCam, h, pitch, q.X, q.Y)
		img[i] = Pt{u, v}
	}
	fl, rep, err := FloorFromPoints(nil, img, floor)
	if err != nil {
		t.Fatal(err)
	}
	if !rep.Exact {
		t.Error("four points should be reported as an exact fit")
	}
	pose, err := FloorFromPose(testCam, h, pitch)
	if err != nil {
		t.Fatal(err)
	}
	m, _ := newMapper(nil, &fl, 0, 0)
	mp, _ := newMapper(nil, &pose, 0, 0)
	for X := 600.0; X <= 4000; X += 340 {
		for Y := -900.0; Y <= 900; Y += 300 {
			u, v := analyticPixel(testCam, h, pitch, X, Y)
			for name, mm := range map[string]*Mapper{"points": m, "pose": mp} {
				q, ok := mm.ToFloor(Pt{u, v})
				if !ok || math.Hypot(q.X-X, q.Y-Y) > 0.01 {
					t.Errorf("%s: pixel of (%.0f, %.0f) maps to (%.3f, %.3f) ok=%v", name, X, Y, q.X, q.Y, ok)
				}
			}
		}
	}
	// A point behind the camera's image plane (X < −h·tan θ) and a pixel
	// above the horizon (v < cy − fy·tan θ) are refused.
	if _, ok := mp.ToImage(Pt{-3000, 0}); ok {
		t.Error("a floor point behind the camera mapped into the image")
	}
	horizon := testCam.Cy - testCam.Fy*math.Tan(pitch*math.Pi/180)
	for name, mm := range map[string]*Mapper{"points": m, "pose": mp} {
		if _, ok := mm.ToFloor(Pt{320, horizon - 20}); ok {
			t.Errorf("%s: a pixel 20 rows above the horizon mapped onto the floor", name)
		}
		if _, ok := mm.ToFloor(Pt{320, horizon + 20}); !ok {
			t.Errorf("%s: a pixel 20 rows below the horizon did not map onto the floor", name)
		}
	}
}

// TestHomographyAgainstOpenCV compares our normalised DLT with OpenCV's
// findHomography (least squares, method 0) on noisy points.
func TestHomographyAgainstOpenCV(t *testing.T) {
	src := []Pt{{100, 400}, {540, 410}, {200, 250}, {450, 240}, {320, 300}, {150, 330}, {500, 330}}
	H0 := Homography{1.2, 0.1, -30, 0.05, 0.9, 12, 0.0004, 0.0011, 1}
	dst := make([]Pt, len(src))
	for i, p := range src {
		x, y, _ := H0.Apply(p.X, p.Y)
		dst[i] = Pt{x + 0.3*math.Sin(float64(i)), y + 0.3*math.Cos(float64(3*i))}
	}
	ours, err := FitHomography(src, dst)
	if err != nil {
		t.Fatal(err)
	}
	sm := gocv.NewMatWithSize(len(src), 1, gocv.MatTypeCV64FC2)
	defer sm.Close()
	dm := gocv.NewMatWithSize(len(src), 1, gocv.MatTypeCV64FC2)
	defer dm.Close()
	for i := range src {
		sm.SetDoubleAt(i, 0, src[i].X)
		sm.SetDoubleAt(i, 1, src[i].Y)
		dm.SetDoubleAt(i, 0, dst[i].X)
		dm.SetDoubleAt(i, 1, dst[i].Y)
	}
	mask := gocv.NewMat()
	defer mask.Close()
	ref := gocv.FindHomography(sm, &dm, 0, 3, &mask, 2000, 0.995)
	defer ref.Close()
	var cv Homography
	for i := 0; i < 9; i++ {
		cv[i] = ref.GetDoubleAt(i/3, i%3)
	}
	for _, p := range src {
		x1, y1, _ := ours.Apply(p.X, p.Y)
		x2, y2, _ := cv.Apply(p.X, p.Y)
		if d := math.Hypot(x1-x2, y1-y2); d > 0.05 {
			t.Errorf("point %v: ours (%.3f, %.3f), OpenCV (%.3f, %.3f), %.3f apart", p, x1, y1, x2, y2, d)
		}
	}
}

// TestUndistortAgainstOpenCV compares our iterative point undistortion with
// OpenCV's undistortPoints (new camera matrix = K).
func TestUndistortAgainstOpenCV(t *testing.T) {
	l := Lens{Fx: 532.8, Fy: 532.9, Cx: 342.5, Cy: 233.9, Dist: [5]float64{-0.281, 0.0291, 0.0012, -0.00014, 0.155}}
	pts := []Pt{{10, 10}, {630, 20}, {320, 240}, {50, 470}, {600, 460}, {200, 100}}
	src := gocv.NewMatWithSize(len(pts), 1, gocv.MatTypeCV64FC2)
	defer src.Close()
	for i, p := range pts {
		src.SetDoubleAt(i, 0, p.X)
		src.SetDoubleAt(i, 1, p.Y)
	}
	K := gocv.NewMatWithSize(3, 3, gocv.MatTypeCV64F)
	defer K.Close()
	for i, v := range []float64{l.Fx, 0, l.Cx, 0, l.Fy, l.Cy, 0, 0, 1} {
		K.SetDoubleAt(i/3, i%3, v)
	}
	D := gocv.NewMatWithSize(1, 5, gocv.MatTypeCV64F)
	defer D.Close()
	for i, v := range l.Dist {
		D.SetDoubleAt(0, i, v)
	}
	R := gocv.NewMat()
	defer R.Close()
	dst := gocv.NewMat()
	defer dst.Close()
	gocv.UndistortPoints(src, &dst, K, D, R, K)
	for i, p := range pts {
		u, v, err := l.Undistort(p.X, p.Y)
		if err != nil {
			t.Fatal(err)
		}
		ou, ov := dst.GetDoubleAt(i, 0), dst.GetDoubleAt(i, 1)
		// OpenCV 4.6 stops after 5 iterations by default; ours runs to
		// convergence, so allow its residual near the corners.
		if d := math.Hypot(u-ou, v-ov); d > 0.5 {
			t.Errorf("%v: ours (%.3f, %.3f), OpenCV (%.3f, %.3f)", p, u, v, ou, ov)
		}
		du, dv := l.Distort(u, v)
		if math.Hypot(du-p.X, dv-p.Y) > 1e-4 {
			t.Errorf("%v: re-distorted to (%.5f, %.5f)", p, du, dv)
		}
	}
}

// TestRoundTrip: image → floor → image within 0.5 px with a distorting lens.
func TestRoundTrip(t *testing.T) {
	l := Lens{Fx: 532.8, Fy: 532.9, Cx: 342.5, Cy: 233.9, Dist: [5]float64{-0.281, 0.0291, 0.0012, -0.00014, 0.155}}
	fl, err := FloorFromPose(l, 900, 40)
	if err != nil {
		t.Fatal(err)
	}
	m, err := newMapper(&l, &fl, 0, 0)
	if err != nil {
		t.Fatal(err)
	}
	worst := 0.0
	for y := 120.0; y < 480; y += 20 {
		for x := 0.0; x < 640; x += 20 {
			q, ok := m.ToFloor(Pt{x, y})
			if !ok {
				t.Fatalf("pixel (%v, %v) did not reach the floor", x, y)
			}
			p, ok := m.ToImage(q)
			if !ok {
				t.Fatalf("floor (%v) did not map back", q)
			}
			worst = math.Max(worst, math.Hypot(p.X-x, p.Y-y))
		}
	}
	if worst > 0.5 {
		t.Errorf("worst round trip %.3g px, limit 0.5", worst)
	}
	t.Logf("worst round trip %.2g px", worst)
}

// TestMeasureStraightStripe: a straight stripe of known offset, heading and
// width on the floor, seen through a known camera (analytic projection).
func TestMeasureStraightStripe(t *testing.T) {
	const h, pitch = 1000.0, 35.0
	const off0, headDeg, tape = 120.0, 5.0, 50.0
	tanH := math.Tan(headDeg * math.Pi / 180)
	lineY := func(X float64) float64 { return off0 + tanH*X }
	fl, err := FloorFromPose(testCam, h, pitch)
	if err != nil {
		t.Fatal(err)
	}
	fl.TapeWidthMM = tape
	m, _ := newMapper(nil, &fl, 1500, tape)
	var pts []Pt
	for X := 700.0; X <= 3000; X += 200 {
		u, v := analyticPixel(testCam, h, pitch, X, lineY(X))
		pts = append(pts, Pt{u, v})
	}
	// Width in pixels at the row of X = 1200: the distance, along the
	// image normal of the centreline, between the two projected edges.
	const Xr = 1200.0
	cu, cv := analyticPixel(testCam, h, pitch, Xr, lineY(Xr))
	au, av := analyticPixel(testCam, h, pitch, Xr+10, lineY(Xr+10))
	n := math.Hypot(au-cu, av-cv)
	nx, ny := -(av-cv)/n, (au-cu)/n
	// Edge lines offset by ±tape/2 across the stripe on the floor.
	cosH := math.Cos(headDeg * math.Pi / 180)
	edge := func(sign, X float64) (float64, float64) {
		return analyticPixel(testCam, h, pitch, X-sign*tape/2*math.Sin(headDeg*math.Pi/180), lineY(X)+sign*tape/2*cosH)
	}
	hit := func(sign float64) float64 { // distance along the normal to the edge line
		p1u, p1v := edge(sign, 900)
		p2u, p2v := edge(sign, 1500)
		// Solve c + s·n = p1 + r·(p2 − p1) for s.
		dx, dy := p2u-p1u, p2v-p1v
		det := nx*(-dy) - ny*(-dx)
		return ((p1u-cu)*(-dy) - (p1v-cv)*(-dx)) / det
	}
	widthPx := math.Abs(hit(1) - hit(-1))
	got, err := m.Measure(pts, cv, widthPx, 0)
	if err != nil {
		t.Fatal(err)
	}
	if !got.OK {
		t.Fatalf("measurement not OK: %s", got.Reason)
	}
	wantOff := lineY(1500)
	if math.Abs(float64(got.OffsetMM)-wantOff) > 1 || math.Abs(float64(got.HeadingDeg)-headDeg) > 0.05 || math.Abs(float64(got.WidthMM)-tape) > 1 {
		t.Errorf("got offset %.2f mm, heading %.3f°, width %.2f mm; want %.2f, %.1f, %.0f", got.OffsetMM, got.HeadingDeg, got.WidthMM, wantOff, headDeg, tape)
	}
	// Far beyond the seen stripe: not OK.
	far, _ := m.Measure(pts, cv, widthPx, 8000)
	if far.OK {
		t.Error("look-ahead 8 m beyond a stripe seen to 3 m was reported OK")
	}
	// A width twice and more the tape's: not OK.
	wide, _ := m.Measure(pts, cv, 3*widthPx, 0)
	if wide.OK {
		t.Errorf("a stripe 3x the tape width was reported OK (%.0f mm)", wide.WidthMM)
	}
}
