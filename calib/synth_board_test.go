package calib

import (
	"fmt"
	"math"
	"testing"

	"gocv.io/x/gocv"
)

// boardRenderer draws chessboards as a known camera sees them: every
// output pixel is supersampled ss×ss, each sample's ray is found by
// inverting the distortion model, and the ray meets the board plane. The
// squares are therefore exact up to the supersampling's anti-aliasing.
type boardRenderer struct {
	lens   Lens
	w, h   int
	ss     int
	normXY []float64 // undistorted normalised (x, y) of every sample
}

func newBoardRenderer(t testing.TB, lens Lens, w, h, ss int) *boardRenderer {
	r := &boardRenderer{lens: lens, w: w, h: h, ss: ss, normXY: make([]float64, 0, 2*w*h*ss*ss)}
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			for sy := 0; sy < ss; sy++ {
				for sx := 0; sx < ss; sx++ {
					u := float64(x) - 0.5 + (float64(sx)+0.5)/float64(ss)
					v := float64(y) - 0.5 + (float64(sy)+0.5)/float64(ss)
					uu, vv, err := lens.Undistort(u, v)
					if err != nil {
						t.Fatalf("renderer: %v", err)
					}
					r.normXY = append(r.normXY, (uu-lens.Cx)/lens.Fx, (vv-lens.Cy)/lens.Fy)
				}
			}
		}
	}
	return r
}

// render draws the board at pose p into a new 8-bit grey Mat (the caller
// closes it), and returns false when a corner (with a square's margin)
// falls outside the image.
func (r *boardRenderer) render(b BoardSpec, p pose) (gocv.Mat, bool) {
	R := rodrigues(p.r)
	s := float64(b.Square)
	// The board plane to normalised image: [r1 r2 t].
	H := Homography{R[0], R[1], p.t[0], R[3], R[4], p.t[1], R[6], R[7], p.t[2]}
	for _, c := range []Pt{{-s, -s}, {float64(b.Cols) * s, -s}, {-s, float64(b.Rows) * s}, {float64(b.Cols) * s, float64(b.Rows) * s}} {
		X, Y, Z := R[0]*c.X+R[1]*c.Y+p.t[0], R[3]*c.X+R[4]*c.Y+p.t[1], R[6]*c.X+R[7]*c.Y+p.t[2]
		u, v, ok := r.lens.project(X, Y, Z)
		if !ok || u < 2 || v < 2 || u > float64(r.w-3) || v > float64(r.h-3) {
			return gocv.Mat{}, false
		}
	}
	inv, err := H.Inverse()
	if err != nil {
		return gocv.Mat{}, false
	}
	buf := make([]byte, r.w*r.h)
	n := r.ss * r.ss
	for i := range buf {
		var sum float64
		for k := 0; k < n; k++ {
			x, y := r.normXY[2*(i*n+k)], r.normXY[2*(i*n+k)+1]
			X, Y, ok := inv.Apply(x, y)
			sum += shade(X, Y, s, b, ok)
		}
		buf[i] = byte(math.Round(sum / float64(n)))
	}
	m, err := gocv.NewMatFromBytes(r.h, r.w, gocv.MatTypeCV8UC1, buf)
	if err != nil {
		return gocv.Mat{}, false
	}
	out := m.Clone() // own the pixels rather than sharing buf
	m.Close()
	return out, true
}

// shade is the board's brightness at board point (X, Y): squares of side
// s around the inner corners, a white margin of one square, grey beyond.
func shade(X, Y, s float64, b BoardSpec, ok bool) float64 {
	if !ok {
		return 100
	}
	i, j := math.Floor(X/s), math.Floor(Y/s)
	switch {
	case i >= -1 && i < float64(b.Cols) && j >= -1 && j < float64(b.Rows):
		if int(i+j)&1 == 0 {
			return 20
		}
		return 235
	case i >= -2 && i <= float64(b.Cols) && j >= -2 && j <= float64(b.Rows):
		return 235
	}
	return 100
}

// boardPose places the board's centre at (x, y, z) mm in camera
// coordinates, rotated by the rotation vector rv (radians).
func boardPose(b BoardSpec, rv, c [3]float64) pose {
	R := rodrigues(rv)
	bx, by := float64(b.Cols-1)*float64(b.Square)/2, float64(b.Rows-1)*float64(b.Square)/2
	return pose{r: rv, t: [3]float64{
		c[0] - (R[0]*bx + R[1]*by),
		c[1] - (R[3]*bx + R[4]*by),
		c[2] - (R[6]*bx + R[7]*by),
	}}
}

// synthPoses spreads the board over the image with tilts up to about 35°.
func synthPoses(b BoardSpec) []pose {
	var ps []pose
	tilts := [][3]float64{{0.5, 0.1, 0.05}, {-0.5, 0.2, -0.1}, {0.2, 0.55, 0.1}, {0.1, -0.55, -0.05}, {0.4, 0.4, 0.3}, {-0.35, -0.4, -0.2}}
	centres := [][3]float64{{-110, -70, 520}, {110, -70, 520}, {-110, 80, 520}, {110, 80, 520}, {0, 0, 450}, {0, 0, 600}}
	for i, c := range centres {
		ps = append(ps, boardPose(b, tilts[i%len(tilts)], c))
		ps = append(ps, boardPose(b, tilts[(i+3)%len(tilts)], c))
	}
	return ps
}

// TestSyntheticLens renders boards through a known camera (an invented
// lens with barrel distortion) and recovers its intrinsics within 1 %.
func TestSyntheticLens(t *testing.T) {
	truth := Lens{Fx: 610, Fy: 600, Cx: 328, Cy: 236, Dist: [5]float64{-0.22, 0.06, 0.0008, -0.0006, 0}}
	b := BoardSpec{Cols: 9, Rows: 6, Square: 25}
	r := newBoardRenderer(t, truth, 640, 480, 3)
	var views []View
	defer func() {
		for _, v := range views {
			v.Img.Close()
		}
	}()
	for i, p := range synthPoses(b) {
		m, ok := r.render(b, p)
		if !ok {
			t.Logf("pose %d leaves the image; skipped", i)
			continue
		}
		views = append(views, View{Name: fmt.Sprintf("synthetic-%02d", i), Img: m})
	}
	if len(views) < 8 {
		t.Fatalf("only %d synthetic views fit the image", len(views))
	}
	lens, rep, err := CalibrateLens(views, b)
	if err != nil {
		t.Fatal(err)
	}
	for _, v := range rep.Views {
		t.Logf("%s used=%v rms=%.3f %s", v.Name, v.Used, v.RMSPx, v.Reason)
	}
	t.Logf("recovered fx %.2f fy %.2f cx %.2f cy %.2f dist %.4f rms %.3f", lens.Fx, lens.Fy, lens.Cx, lens.Cy, lens.Dist, rep.RMSPx)
	for _, c := range []struct {
		name      string
		got, want float64
	}{{"fx", lens.Fx, truth.Fx}, {"fy", lens.Fy, truth.Fy}, {"cx", lens.Cx, truth.Cx}, {"cy", lens.Cy, truth.Cy}} {
		if math.Abs(c.got-c.want) > 0.01*c.want {
			t.Errorf("%s = %.2f, truth %.2f: more than 1 %% off", c.name, c.got, c.want)
		}
	}
	if math.Abs(lens.Dist[0]-truth.Dist[0]) > 0.02 {
		t.Errorf("k1 = %.4f, truth %.4f", lens.Dist[0], truth.Dist[0])
	}
	// Distortion as a whole: the corrected position of the image corner
	// must agree with the truth within 1 px.
	u1, v1, err1 := lens.Undistort(10, 10)
	u2, v2, err2 := truth.Undistort(10, 10)
	if err1 != nil || err2 != nil || math.Hypot(u1-u2, v1-v2) > 1 {
		t.Errorf("undistorted corner pixel (10,10): recovered (%.2f, %.2f), truth (%.2f, %.2f)", u1, v1, u2, v2)
	}
	if rep.RMSPx > 0.2 {
		t.Errorf("RMS %.3f px on perfect renders; expected under 0.2", rep.RMSPx)
	}
}

// TestNoBoardAnywhere: images without a board are refused with a reason
// per view and an error that says what to do.
func TestNoBoardAnywhere(t *testing.T) {
	var views []View
	for i := 0; i < 3; i++ {
		m := gocv.NewMatWithSizeFromScalar(gocv.NewScalar(float64(60*i), 90, 120, 0), 480, 640, gocv.MatTypeCV8UC3)
		defer m.Close()
		views = append(views, View{Name: fmt.Sprintf("blank%d.png", i), Img: m})
	}
	empty := gocv.NewMat()
	defer empty.Close()
	views = append(views, View{Name: "empty.png", Img: empty})
	_, rep, err := CalibrateLens(views, BoardSpec{Cols: 9, Rows: 6, Square: 25})
	if err == nil || !errorsIs(err, ErrNoBoard) {
		t.Fatalf("err = %v, want ErrNoBoard", err)
	}
	for _, v := range rep.Views {
		if v.Used || v.Reason == "" {
			t.Errorf("view %s: used=%v reason=%q; want rejected with a reason", v.Name, v.Used, v.Reason)
		}
	}
	t.Log(err)
}
