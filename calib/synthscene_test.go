package calib

import (
	"math"
	"testing"

	"gocv.io/x/gocv"

	"github.com/hewline/hewline/capture/synth"
)

// TestSyntheticSceneOffset checks the whole chain against the scene
// renderer's own truth (package capture/synth, an independent geometry):
// the lens is calibrated from chessboards rendered through the scene's
// camera, the floor from the camera's height and pitch, and the true
// image centreline of each frame must give the renderer's lateral offset
// at the look-ahead (truth offset_m) within 5 mm.
func TestSyntheticSceneOffset(t *testing.T) {
	sc, err := synth.Lookup("weave")
	if err != nil {
		t.Fatal(err)
	}
	cam := sc.Camera
	truthLens := Lens{Fx: cam.Fx, Fy: cam.Fy, Cx: cam.Cx, Cy: cam.Cy, Dist: [5]float64{cam.K1, cam.K2, 0, 0, 0}}

	// Lens calibration from boards seen through the scene's camera.
	b := BoardSpec{Cols: 9, Rows: 6, Square: 25}
	br := newBoardRenderer(t, truthLens, sc.Width, sc.Height, 2)
	var views []View
	defer func() {
		for _, v := range views {
			v.Img.Close()
		}
	}()
	for _, p := range synthPoses(b) {
		if m, ok := br.render(b, p); ok {
			views = append(views, View{Name: "board", Img: m})
		}
	}
	lens, rep, err := CalibrateLens(views, b)
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("calibrated fx %.2f fy %.2f cx %.2f cy %.2f (truth %.0f %.0f %.0f %.0f), rms %.3f px", lens.Fx, lens.Fy, lens.Cx, lens.Cy, cam.Fx, cam.Fy, cam.Cx, cam.Cy, rep.RMSPx)

	fl, err := FloorFromPose(lens, Millimetres(cam.HeightM*1000), Degrees(cam.PitchDeg))
	if err != nil {
		t.Fatal(err)
	}
	f := &File{Format: FormatV1, ImageSize: [2]int{sc.Width, sc.Height}, Lens: &lens, Floor: &fl}
	if err := f.Validate(); err != nil {
		t.Fatal(err)
	}
	m, err := NewMapper(f)
	if err != nil {
		t.Fatal(err)
	}

	sc.Frames = 150 // 5 s of weaving, through the first bend
	r, err := synth.New(sc)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	if err := f.CheckFrameSize(sc.Width, sc.Height); err != nil {
		t.Fatal(err)
	}
	L := Millimetres(r.Header().LookaheadM * 1000)
	frame := gocv.NewMat()
	defer frame.Close()
	var worst, sum float64
	n := 0
	for i := 0; i < sc.Frames; i++ {
		if _, err := r.Read(&frame); err != nil {
			t.Fatal(err)
		}
		if i%5 != 0 {
			continue
		}
		tr := r.Truth()
		if !tr.Visible || len(tr.Points) < 8 {
			continue
		}
		pts := make([]Pt, len(tr.Points))
		for k, p := range tr.Points {
			pts[k] = Pt{p[0], p[1]}
		}
		got, err := m.Measure(pts, r.Header().RefRow, 0, L)
		if err != nil {
			t.Fatal(err)
		}
		if !got.OK {
			t.Errorf("frame %d: not OK: %s", i, got.Reason)
			continue
		}
		d := math.Abs(float64(got.OffsetMM) - 1000*tr.OffsetM)
		if d > 5 {
			t.Errorf("frame %d: offset %.1f mm, renderer truth %.1f mm (%.1f mm off, limit 5)", i, got.OffsetMM, 1000*tr.OffsetM, d)
		}
		worst = math.Max(worst, d)
		sum += d
		n++
		if dh := math.Abs(float64(got.HeadingDeg) - tr.HeadingFloorDeg); dh > 1 {
			t.Errorf("frame %d: heading %.2f°, renderer truth %.2f°", i, got.HeadingDeg, tr.HeadingFloorDeg)
		}
	}
	if n < 20 {
		t.Fatalf("only %d frames with a visible stripe", n)
	}
	t.Logf("%d frames: offset error mean %.2f mm, worst %.2f mm", n, sum/float64(n), worst)
}
