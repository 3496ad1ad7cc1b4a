package calib

import (
	"math"
	"testing"

	"gocv.io/x/gocv"
)

// flatBoardPose puts the board flat on the floor, its centre at floor
// point c, rows running toward the camera and columns to the right, seen
// by a camera h mm up pitched down by pitchDeg (geometry of analyticPixel).
func flatBoardPose(b BoardSpec, h, pitchDeg float64, c Pt) pose {
	th := pitchDeg * math.Pi / 180
	s, co := math.Sincos(th)
	gcx, gcy := float64(b.Cols-1)*float64(b.Square)/2, float64(b.Rows-1)*float64(b.Square)/2
	X0, Y0 := c.X+gcy, c.Y-gcx // floor point of the grid origin
	return pose{
		r: [3]float64{th - math.Pi/2, 0, 0},
		t: [3]float64{Y0, h*co - X0*s, X0*co + h*s},
	}
}

func TestFloorFromBoardAndBirdsEye(t *testing.T) {
	lens := Lens{Fx: 520, Fy: 515, Cx: 322, Cy: 241, Dist: [5]float64{-0.12, 0.02, 0, 0, 0}}
	b := BoardSpec{Cols: 9, Rows: 6, Square: 40}
	const h, pitch = 800.0, 45.0
	centre := Pt{900, 30}
	r := newBoardRenderer(t, lens, 640, 480, 3)
	grey, ok := r.render(b, flatBoardPose(b, h, pitch, centre))
	if !ok {
		t.Fatal("board does not fit the image")
	}
	defer grey.Close()
	frame := gocv.NewMat()
	defer frame.Close()
	gocv.CvtColor(grey, &frame, gocv.ColorGrayToBGR)

	fl, rep, err := FloorFromBoard(&lens, frame, b, centre)
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("board fit: rms %.3f mm, max %.3f mm over %d corners", rep.RMSMM, rep.MaxErrMM, len(rep.Points))
	if rep.RMSMM > 1 {
		t.Errorf("corner residual rms %.2f mm on a perfect render, want under 1", rep.RMSMM)
	}
	m, err := newMapper(&lens, &fl, 0, 0)
	if err != nil {
		t.Fatal(err)
	}
	// Floor points around the board (the analytic truth) within 5 mm.
	for X := 700.0; X <= 1500; X += 200 {
		for Y := -300.0; Y <= 300; Y += 150 {
			u, v := analyticPixel(lens, h, pitch, X, Y)
			q, ok := m.ToFloor(Pt{u, v})
			if !ok || math.Hypot(q.X-X, q.Y-Y) > 5 {
				t.Errorf("floor (%.0f, %.0f) comes back as (%.1f, %.1f) ok=%v", X, Y, q.X, q.Y, ok)
			}
		}
	}

	// Bird's-eye view: 2 mm per pixel over 600 × 800 mm around the board.
	area := Area{XMin: 600, XMax: 1200, YMin: -370, YMax: 430}
	be, err := BirdsEye(frame, m, area, 2, 100)
	if err != nil {
		t.Fatal(err)
	}
	defer be.Close()
	if be.Cols() != 400 || be.Rows() != 300 {
		t.Fatalf("bird's-eye is %dx%d, want 400x300", be.Cols(), be.Rows())
	}
	// Square centres must show the board's colours where the floor
	// frame puts them: the grid origin's square (above-left of corner 0,
	// drawn dark by the renderer) and its neighbours alternate.
	s := float64(b.Square)
	gcx, gcy := float64(b.Cols-1)*s/2, float64(b.Rows-1)*s/2
	for i := 0; i < b.Cols-1; i++ {
		for j := 0; j < b.Rows-1; j++ {
			// Board point inside the square → floor → bird's-eye pixel.
			bx, by := (float64(i)+0.3)*s, (float64(j)+0.3)*s // off the 100 mm grid lines
			X, Y := centre.X-(by-gcy), centre.Y+(bx-gcx)
			col := int((Y - float64(area.YMin)) / 2)
			row := int((float64(area.XMax) - X) / 2)
			v := be.GetVecbAt(row, col)[1]
			dark := (i+j)%2 == 0
			if dark && v > 80 || !dark && v < 170 {
				t.Errorf("square (%d,%d) at bird's-eye (%d,%d) has grey %d, want %s", i, j, col, row, v, map[bool]string{true: "dark", false: "bright"}[dark])
			}
		}
	}
	// Refusals: bad scale, non-BGR frame.
	if _, err := BirdsEye(frame, m, area, 0, 100); err == nil {
		t.Error("scale 0 accepted")
	}
	if _, err := BirdsEye(grey, m, area, 2, 100); err == nil {
		t.Error("grey frame accepted")
	}
}
