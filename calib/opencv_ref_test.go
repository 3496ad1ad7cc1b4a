package calib

import (
	"fmt"
	"math"
	"os"
	"path/filepath"
	"testing"

	"gocv.io/x/gocv"
)

// opencvData is where Debian's opencv-doc package puts OpenCV's sample
// images (installed by scripts/setup.sh).
const opencvData = "/usr/share/doc/opencv-doc/examples/data"

// loadOpenCVSamples reads left01..left14 without left10 as grey images,
// as OpenCV's test does. It skips loudly when opencv-doc is missing.
func loadOpenCVSamples(t testing.TB) []View {
	t.Helper()
	var views []View
	for i := 1; i <= 14; i++ {
		if i == 10 {
			continue
		}
		p := filepath.Join(opencvData, fmt.Sprintf("left%02d.jpg", i))
		if _, err := os.Stat(p); err != nil {
			for _, v := range views {
				v.Img.Close()
			}
			t.Skipf("SKIPPED OUTSIDE SETUP: %s missing; install Debian's opencv-doc (scripts/setup.sh does) to run OpenCV's reference calibration check", p)
		}
		img := gocv.IMRead(p, gocv.IMReadGrayScale)
		if img.Empty() {
			t.Fatalf("cannot decode %s", p)
		}
		views = append(views, View{Name: filepath.Base(p), Img: img})
	}
	return views
}

// TestOpenCVReference reproduces OpenCV's own calibration test
// (modules/python/test/test_calibration.py in the OpenCV repository; values
// in /work/shared/REFERENCES.md "Calibration"): 13 sample views, 9×6 inner
// corners, square 1, flags 0.
func TestOpenCVReference(t *testing.T) {
	views := loadOpenCVSamples(t)
	defer func() {
		for _, v := range views {
			v.Img.Close()
		}
	}()
	lens, rep, err := CalibrateLens(views, BoardSpec{Cols: 9, Rows: 6, Square: 1})
	if err != nil {
		t.Fatal(err)
	}
	for _, v := range rep.Views {
		t.Logf("%s used=%v rms=%.3f %s", v.Name, v.Used, v.RMSPx, v.Reason)
	}
	if rep.Used != 13 {
		t.Errorf("used %d views, OpenCV's test uses all 13", rep.Used)
	}
	// Published: RMS 0.19633, tolerance 0.01.
	if d := math.Abs(rep.RMSPx - 0.196334638034); d > 0.01 {
		t.Errorf("RMS %.5f, OpenCV's test expects 0.19633 ± 0.01", rep.RMSPx)
	}
	// Published camera matrix; L1 tolerance 10 over the matrix.
	l1 := math.Abs(lens.Fx-532.80992189) + math.Abs(lens.Fy-532.93346422) + math.Abs(lens.Cx-342.4952186) + math.Abs(lens.Cy-233.8879292)
	if l1 > 10 {
		t.Errorf("camera matrix fx %.3f fy %.3f cx %.3f cy %.3f: L1 distance %.3f from OpenCV's, tolerance 10", lens.Fx, lens.Fy, lens.Cx, lens.Cy, l1)
	}
	// Published distortion; L1 tolerance 0.05 as in the OpenCV test file
	// (normDistEps = 0.05; REFERENCES.md lists 0.001, stricter than the
	// source: the higher-order k2, k3 trade off against each other and
	// move by a few thousandths between OpenCV builds).
	want := [5]float64{-2.81325576e-01, 2.91130406e-02, 1.21234330e-03, -1.40825372e-04, 1.54865844e-01}
	var dl1 float64
	for i := range want {
		dl1 += math.Abs(lens.Dist[i] - want[i])
	}
	if dl1 > 0.05 {
		t.Errorf("distortion %v: L1 distance %.5f from OpenCV's %v, tolerance 0.05", lens.Dist, dl1, want)
	}
	// Our own tighter bound on the well-determined terms k1, p1, p2.
	for _, i := range []int{0, 2, 3} {
		if d := math.Abs(lens.Dist[i] - want[i]); d > 0.001 {
			t.Errorf("distortion term %d = %.6f, OpenCV's %.6f: off by %.4f (> 0.001)", i, lens.Dist[i], want[i], d)
		}
	}
	t.Logf("rms %.5f fx %.3f fy %.3f cx %.3f cy %.3f dist %v (L1 %.3g, %.3g)", rep.RMSPx, lens.Fx, lens.Fy, lens.Cx, lens.Cy, lens.Dist, l1, dl1)
}
