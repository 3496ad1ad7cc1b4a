package vision

import (
	"math"
	"testing"

	"github.com/hewline/hewline/calib"
	"github.com/hewline/hewline/capture/synth"
	"gocv.io/x/gocv"
)

// The lane scenes' camera (capture/synth laneCamera): 640×480, fx = fy =
// 500 px, principal point at the centre, 1.0 m up, pitched 30° down; the
// detector works at 320×240 (half).
const (
	laneCamF     = 500.0
	laneCamH     = 1000.0 // mm
	laneCamPitch = 30.0   // degrees
)

// laneCamLens is that camera as a calib.Lens.
func laneCamLens() calib.Lens { return calib.Lens{Fx: laneCamF, Fy: laneCamF, Cx: 320, Cy: 240} }

// calibPlane is the scene camera's floor mapping built by calib from
// the pose (calib.PoseMatrix: the textbook pinhole, Hartley & Zisserman
// ch. 6), as a FloorPlane.
type calibPlane struct{ m *calib.Mapper }

func (p calibPlane) ToFloorMM(x, y float64) (float64, float64, bool) {
	q, ok := p.m.ToFloor(calib.Pt{X: x, Y: y})
	return q.X, q.Y, ok
}

func (p calibPlane) ToImageMM(forward, right float64) (float64, float64, bool) {
	q, ok := p.m.ToImage(calib.Pt{X: forward, Y: right})
	return q.X, q.Y, ok
}

func lanePinhole(t *testing.T) calibPlane {
	t.Helper()
	lens := laneCamLens()
	fl, err := calib.FloorFromPose(lens, laneCamH, laneCamPitch)
	if err != nil {
		t.Fatal(err)
	}
	m, err := calib.NewMapper(&calib.File{ImageSize: [2]int{640, 480}, Lens: &lens, Floor: &fl})
	if err != nil {
		t.Fatal(err)
	}
	return calibPlane{m}
}

// TestFloorModelPinhole checks the uncalibrated floor model against the
// pinhole projection of the scene camera (calib.PoseMatrix): with the
// camera's horizon (yh = cy − f·tan φ) and focal length, floor points
// map to X = right·cos φ/h and Z = (forward + h·tan φ)·cos φ/h (the
// model's units), and a point beside a 2 m-radius arc lies at the floor
// distance asked along the arc's normal.
func TestFloorModelPinhole(t *testing.T) {
	phi := laneCamPitch * math.Pi / 180
	const sx = 0.5 // working / input pixels
	fw := laneCamF * sx
	// the principal point (320, 240) in working pixels (pixel centres on
	// integers in input pixels, as frameGeom)
	m := floorModel{cx: (320 + 0.5) * sx, cy: (240 + 0.5) * sx, f: fw}
	m.setHorizon(m.cy - fw*math.Tan(phi))
	if want := fw / math.Cos(phi); math.Abs(m.k-want) > 1e-9 {
		t.Fatalf("forward scale %.3f, want f/cos φ = %.3f", m.k, want)
	}
	H := calib.PoseMatrix(laneCamLens(), laneCamH, laneCamPitch)
	// working pixel of floor point (forward, right) in mm
	img := func(fwd, right float64) (float64, float64) {
		x, y, ok := H.Apply(fwd, right)
		if !ok {
			t.Fatalf("floor point (%v, %v) behind the camera", fwd, right)
		}
		return (x + 0.5) * sx, (y + 0.5) * sx
	}
	unit := math.Cos(phi) / laneCamH // model units per mm
	for _, p := range [][2]float64{{800, 0}, {1200, -400}, {2500, 600}, {5000, 1500}} {
		x, y := img(p[0], p[1])
		X, Z, ok := m.toFloor(x, y)
		if !ok {
			t.Fatalf("%v: above the horizon", p)
		}
		if wx, wz := p[1]*unit, (p[0]+laneCamH*math.Tan(phi))*unit; math.Abs(X-wx) > 1e-3 || math.Abs(Z-wz) > 1e-3 {
			t.Errorf("%v mm: model (%.4f, %.4f), want (%.4f, %.4f)", p, X, Z, wx, wz)
		}
		if x2, y2, ok := m.toImage(X, Z); !ok || math.Hypot(x2-x, y2-y) > 1e-6 {
			t.Errorf("%v mm: back to (%.3f, %.3f), want (%.3f, %.3f)", p, x2, y2, x, y)
		}
	}
	// A left bend of 2 m radius whose centre is 2 m left of a point 1.2 m
	// ahead, 0.45 m right; the lane centre 450 mm inside it.
	const R, d = 2000.0, 450.0
	cf, cr := 1200.0, 450.0-R
	for _, a := range []float64{0, 15, 30, 45} {
		s, c := math.Sincos(a * math.Pi / 180)
		fwd, right := cf+R*s, cr+R*c
		x, y := img(fwd, right)
		// the image slope from two points along the arc
		s2, c2 := math.Sincos((a + 0.01) * math.Pi / 180)
		xa, ya := img(cf+R*s2, cr+R*c2)
		slope := (xa - x) / (ya - y)
		xc, yc, ok := beside(&m, x, y, slope, -d*unit)
		if !ok {
			t.Fatalf("%v°: no point beside", a)
		}
		wx, wy := img(cf+(R-d)*s, cr+(R-d)*c)
		if e := math.Hypot(xc-wx, yc-wy); e > 0.02 {
			t.Errorf("%v° round the bend: centre at (%.2f, %.2f), want (%.2f, %.2f): %.2f px off", a, xc, yc, wx, wy, e)
		}
	}
}

// TestLaneLearnsHorizon: on the straight lane scene the horizon and the
// width learned from the two lines are the camera's (pinhole: yh = cy −
// f·tan φ = −24.3 working rows) and the lane's 0.9 m (0.9 m·cos φ/h in
// the model's units), within 2 px and 2 %.
func TestLaneLearnsHorizon(t *testing.T) {
	det, err := NewLane(DefaultConfig(), DefaultLaneConfig())
	if err != nil {
		t.Fatal(err)
	}
	sc := lookup(t, "lane-straight")
	s := scoreTracked(t, sc, 60, 2, keepOpen{det})
	defer det.Close()
	if s.recall() < 0.98 {
		t.Errorf("recall %.3f", s.recall())
	}
	phi := laneCamPitch * math.Pi / 180
	wantYh := 120 - laneCamF/2*math.Tan(phi)
	wantW := 900 * math.Cos(phi) / laneCamH
	if !det.fm.ok {
		t.Fatal("no floor model learned")
	}
	t.Logf("horizon %.2f (pinhole %.2f), width %.4f (%.4f)", det.fm.yh, wantYh, det.fm.w, wantW)
	if math.Abs(det.fm.yh-wantYh) > 2 {
		t.Errorf("horizon at %.2f, want %.2f ± 2", det.fm.yh, wantYh)
	}
	if math.Abs(det.fm.w/wantW-1) > 0.02 {
		t.Errorf("lane width %.4f, want %.4f ± 2 %%", det.fm.w, wantW)
	}
}

// keepOpen hands a detector to scoreTracked without letting it close it.
type keepOpen struct{ *Lane }

func (keepOpen) Close() error { return nil }

// TestLaneConfigValidate: the lane width settings that cannot work.
func TestLaneConfigValidate(t *testing.T) {
	floor := calibPlane{}
	for name, tc := range map[string]struct {
		mod func(*LaneConfig)
		ok  bool
	}{
		"default":           {func(*LaneConfig) {}, true},
		"px":                {func(c *LaneConfig) { c.WidthPx = 340 }, true},
		"mm with floor":     {func(c *LaneConfig) { c.WidthMM, c.Floor = 900, floor }, true},
		"mm without floor":  {func(c *LaneConfig) { c.WidthMM = 900 }, false},
		"both":              {func(c *LaneConfig) { c.WidthMM, c.WidthPx, c.Floor = 900, 340, floor }, false},
		"negative px":       {func(c *LaneConfig) { c.WidthPx = -1 }, false},
		"not a number (mm)": {func(c *LaneConfig) { c.WidthMM, c.Floor = math.NaN(), floor }, false},
	} {
		t.Run(name, func(t *testing.T) {
			lc := DefaultLaneConfig()
			tc.mod(&lc)
			if err := lc.Validate(); (err == nil) != tc.ok {
				t.Errorf("Validate() = %v, want ok %v", err, tc.ok)
			}
		})
	}
}

// TestLaneWidthSettings runs the stretch of lane-one-side where the left
// line is worn away (from 3.5 m) with the lane width learned, configured
// in pixels, configured in millimetres on the calibrated floor (the
// scene's pinhole camera) and configured 40 % off. The right widths keep
// the recall; with a wrong one the two lines seen are no lane, nothing is
// tracked and nothing is tracked falsely (the fail-safe's case).
func TestLaneWidthSettings(t *testing.T) {
	sc := lookup(t, "lane-one-side")
	sc.Motion.StartM = 2
	// The lane's width along the reference row (384) on the straight,
	// from the scene's truth (lane_width_px).
	widthPx := laneTruthWidth(t, sc)
	floor := lanePinhole(t)
	for _, tc := range []struct {
		name      string
		lc        func(*LaneConfig)
		minRecall float64
		maxRecall float64
	}{
		{name: "learned", lc: func(*LaneConfig) {}, minRecall: 0.98, maxRecall: 1},
		{name: "px", lc: func(c *LaneConfig) { c.WidthPx = widthPx }, minRecall: 0.98, maxRecall: 1},
		{name: "mm", lc: func(c *LaneConfig) { c.WidthMM, c.Floor = 900, floor }, minRecall: 0.98, maxRecall: 1},
		{name: "px 40 % too wide", lc: func(c *LaneConfig) { c.WidthPx = 1.4 * widthPx }, minRecall: 0, maxRecall: 0},
		{name: "mm 40 % too narrow", lc: func(c *LaneConfig) { c.WidthMM, c.Floor = 900/1.4, floor }, minRecall: 0, maxRecall: 0},
	} {
		t.Run(tc.name, func(t *testing.T) {
			lc := DefaultLaneConfig()
			tc.lc(&lc)
			det, err := NewLane(DefaultConfig(), lc)
			if err != nil {
				t.Fatal(err)
			}
			s := scoreTracked(t, sc, 60, 2, det)
			t.Logf("recall %.3f (%d/%d), one line %d frames, false tracks %d", s.recall(), s.correct, s.visible, s.oneSide, s.falseTrack)
			if s.falseTrack > 0 {
				t.Errorf("%d false-track frames", s.falseTrack)
			}
			if tc.maxRecall == 0 {
				return // a wrong width: no lane at all, so no false track
			}
			if s.oneSide < 10 {
				t.Fatalf("%d frames from one line: the window should hold the worn stretch", s.oneSide)
			}
			if r := s.recall(); r < tc.minRecall || r > tc.maxRecall {
				t.Errorf("recall %.3f, want %.2f..%.2f", r, tc.minRecall, tc.maxRecall)
			}
		})
	}
}

// laneTruthWidth is the scene's lane width along the reference row in its
// first frame (the truth's lane_width_px).
func laneTruthWidth(t *testing.T, sc synth.Scenario) float64 {
	t.Helper()
	sc.Frames = 1
	r, err := synth.New(sc)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	img := gocv.NewMat()
	defer img.Close()
	if _, err := r.Read(&img); err != nil {
		t.Fatal(err)
	}
	w := r.Truth().LaneWidthPx
	if w <= 0 {
		t.Fatal("no lane width in the truth")
	}
	return w
}
