package synth

import (
	"image"
	"math"
	"testing"

	"gocv.io/x/gocv"
)

// straightScene is a clean test scene: flat floor (no texture), a straight
// 50 mm stripe along +X, no weave.
func straightScene() Scenario {
	sc, _ := Lookup("weave")
	sc.Name = "test-straight"
	sc.Stripe.Path = Path{Segments: []Segment{Straight(40)}}
	sc.Motion = Motion{SpeedMps: 1, StartM: 1}
	sc.Floor = Floor{Colour: RGB{0.5, 0.5, 0.48}}
	sc.Frames = 5
	return sc
}

// TestPinholeProjection checks the camera model against textbook pinhole
// geometry (Hartley & Zisserman, "Multiple View Geometry", ch. 6): for a
// camera at height h pitched down by θ, the horizon is at row cy − fy·tan θ
// and a floor point d ahead on the axis is at row cy + fy·tan(atan(h/d) − θ).
func TestPinholeProjection(t *testing.T) {
	for _, tc := range []struct {
		name     string
		h, pitch float64
		d        []float64
	}{
		{"demo cart", 0.5, 35, []float64{0.3, 0.5, 1, 2, 3}},
		{"tall mount", 1.0, 50, []float64{0.6, 1, 1.5}},
		{"grazing", 0.15, 8, []float64{0.5, 1, 2, 5}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			cam := Camera{Fx: 500, Fy: 510, Cx: 320, Cy: 240, HeightM: tc.h, PitchDeg: tc.pitch}
			p := newCamPose(cam, 2, -1, rad(30), 0, 0, 0) // anywhere, any heading
			th := rad(tc.pitch)
			fwd := vec3{math.Cos(rad(30)), math.Sin(rad(30)), 0}
			far := p.c.add(fwd.scale(1e7))
			far.z = 0
			_, yh, ok := p.project(&cam, far)
			if want := cam.Cy - cam.Fy*math.Tan(th); !ok || math.Abs(yh-want) > 0.01 {
				t.Errorf("horizon row %.3f (ok %v), want %.3f", yh, ok, want)
			}
			for _, d := range tc.d {
				q := p.c.add(fwd.scale(d))
				q.z = 0
				x, y, ok := p.project(&cam, q)
				want := cam.Cy + cam.Fy*math.Tan(math.Atan(tc.h/d)-th)
				if !ok || math.Abs(y-want) > 1e-6 || math.Abs(x-cam.Cx) > 1e-6 {
					t.Errorf("d=%.2f: (%.4f, %.4f) ok %v, want (%.1f, %.4f)", d, x, y, ok, cam.Cx, want)
				}
			}
		})
	}
}

// TestRayCast checks the renderer's per-pixel rays against the same
// textbook formula inverted: the centre column's pixel at row v sees the
// floor at d = h / tan(θ + atan((v − cy)/fy)) ahead, and rows above
// cy − fy·tan θ see no floor.
func TestRayCast(t *testing.T) {
	sc := straightScene()
	sc.Camera.PitchDeg = 12
	sc.Backdrop.FarM = 1e4
	r, err := New(sc)
	if err != nil {
		t.Fatal(err)
	}
	st := r.cartAt(0)
	r.castRows([]cartState{st}, 0, r.h)
	cam := sc.Camera
	th := rad(cam.PitchDeg)
	horizon := cam.Cy - cam.Fy*math.Tan(th)
	i := int(cam.Cx)
	for j := 0; j < r.h; j++ {
		k := j*r.w + i
		above := float64(j) < horizon
		if above != (r.kind[k] == kBackdrop) {
			t.Fatalf("row %d: kind %d, horizon at %.2f", j, r.kind[k], horizon)
		}
		if above || float64(j) < horizon+2 {
			continue
		}
		want := cam.HeightM / math.Tan(th+math.Atan((float64(j)-cam.Cy)/cam.Fy))
		got := hypot2(r.px[k]-st.pose.c.x, r.py[k]-st.pose.c.y)
		if math.Abs(got-want) > 1e-9*want+1e-9 {
			t.Errorf("row %d: floor at %.6f m, want %.6f", j, got, want)
		}
	}
}

// TestDistortionMatchesOpenCV checks the radial model against OpenCV's
// own (cv::initUndistortRectifyMap, a general-purpose reference library):
// for an undistorted pixel it gives the distorted source position, which
// is what Camera.distort computes.
func TestDistortionMatchesOpenCV(t *testing.T) {
	cam := Camera{Fx: 400, Fy: 400, Cx: 320, Cy: 240, K1: -0.25, K2: 0.05}
	k := gocv.NewMatWithSize(3, 3, gocv.MatTypeCV64F)
	defer k.Close()
	k.SetDoubleAt(0, 0, cam.Fx)
	k.SetDoubleAt(0, 2, cam.Cx)
	k.SetDoubleAt(1, 1, cam.Fy)
	k.SetDoubleAt(1, 2, cam.Cy)
	k.SetDoubleAt(2, 2, 1)
	d := gocv.NewMatWithSize(1, 5, gocv.MatTypeCV64F)
	defer d.Close()
	d.SetDoubleAt(0, 0, cam.K1)
	d.SetDoubleAt(0, 1, cam.K2)
	eye := gocv.Eye(3, 3, gocv.MatTypeCV64F)
	defer eye.Close()
	m1, m2 := gocv.NewMat(), gocv.NewMat()
	defer m1.Close()
	defer m2.Close()
	gocv.InitUndistortRectifyMap(k, d, eye, k, image.Pt(640, 480), int(gocv.MatTypeCV32F), m1, m2)
	var worst float64
	for v := 0; v < 480; v += 17 {
		for u := 0; u < 640; u += 19 {
			a, b := cam.distort((float64(u)-cam.Cx)/cam.Fx, (float64(v)-cam.Cy)/cam.Fy)
			x, y := cam.Fx*a+cam.Cx, cam.Fy*b+cam.Cy
			worst = math.Max(worst, math.Hypot(x-float64(m1.GetFloatAt(v, u)), y-float64(m2.GetFloatAt(v, u))))
			// and the renderer's inverse comes back to the pixel
			ua, ub, ok := cam.undistort((x-cam.Cx)/cam.Fx, (y-cam.Cy)/cam.Fy)
			if !ok || math.Abs(ua*cam.Fx+cam.Cx-float64(u)) > 1e-6 || math.Abs(ub*cam.Fy+cam.Cy-float64(v)) > 1e-6 {
				t.Fatalf("undistort(%d,%d) = %.6f,%.6f ok %v", u, v, ua*cam.Fx+cam.Cx, ub*cam.Fy+cam.Cy, ok)
			}
		}
	}
	if worst > 0.01 {
		t.Errorf("distortion differs from OpenCV by up to %.4f px", worst)
	}
}

// TestFloorTruthAnalytic: a cart held 0.1 m left of a straight stripe sees
// it 0.1 m to the right at any look-ahead, heading 0, and at the reference
// row at fx·X/Zc pixels right of centre, Zc being the depth along the
// optical axis (pinhole geometry), leaning towards the vanishing point on
// the horizon. A camera yawed 5° to the right sees the
// same line turn 5° left, tan(5°)·L to the left at look-ahead L.
func TestFloorTruthAnalytic(t *testing.T) {
	for _, tc := range []struct {
		name                 string
		lat, yaw             float64
		wantOffM, wantHeadDg float64
	}{
		{"left of line", 0.1, 0, 0.1, 0},
		{"right of line", -0.07, 0, -0.07, 0},
		{"yawed right", 0, 5, -math.Tan(rad(5)), -5},
	} {
		t.Run(tc.name, func(t *testing.T) {
			sc := straightScene()
			sc.Motion.WeaveAmpM, sc.Motion.WeaveWavelengthM, sc.Motion.WeavePhaseDeg = tc.lat, 1e9, 90
			sc.Camera.YawDeg = tc.yaw
			r, err := New(sc)
			if err != nil {
				t.Fatal(err)
			}
			m := gocv.NewMat()
			defer m.Close()
			if _, err := r.Read(&m); err != nil {
				t.Fatal(err)
			}
			f := r.Truth()
			if math.Abs(f.OffsetM-tc.wantOffM) > 1e-6 || math.Abs(f.HeadingFloorDeg-tc.wantHeadDg) > 1e-6 {
				t.Errorf("offset %.6f m heading %.6f°, want %.6f, %.6f", f.OffsetM, f.HeadingFloorDeg, tc.wantOffM, tc.wantHeadDg)
			}
			if !f.Visible {
				t.Error("not visible")
			}
			if tc.yaw != 0 {
				return
			}
			cam := sc.Camera
			th := rad(cam.PitchDeg)
			ref := 0.8 * float64(sc.Height)
			ang := th + math.Atan((ref-cam.Cy)/cam.Fy)
			d := cam.HeightM / math.Tan(ang)
			zc := d*math.Cos(th) + cam.HeightM*math.Sin(th)
			want := cam.Fx * tc.lat / zc
			// a line parallel to the axis runs to the vanishing point
			// (cx, cy − fy·tan θ) on the horizon
			vy := cam.Cy - cam.Fy*math.Tan(th)
			wantH := deg(math.Atan2(-want, ref-vy))
			if math.Abs(f.OffsetPx-want) > 1e-3 || math.Abs(f.HeadingDeg-wantH) > 0.01 {
				t.Errorf("offset %.4f px heading %.4f°, want %.4f px, %.4f°", f.OffsetPx, f.HeadingDeg, want, wantH)
			}
			if wantW := cam.Fx * sc.Stripe.WidthM / zc; math.Abs(f.WidthPx-wantW) > 1e-3 {
				t.Errorf("width %.4f px, want %.4f", f.WidthPx, wantW)
			}
		})
	}
}
