package reffollow

import (
	"image"
	"image/color"
	"math"
	"testing"

	"gocv.io/x/gocv"

	"github.com/hewline/hewline/capture/matcheck"
)

func TestMain(m *testing.M) { matcheck.Main(m) }

// TestFindsDrawnStripe: a light band drawn with OpenCV's FillPoly, its
// centreline from (300, 479) to (340, 0), on a grey floor is found with
// the offset and heading of the drawn centreline (at row 384 x = 300 +
// 40·95/479 = 307.9; heading atan(40/479) = 4.77° to the right).
func TestFindsDrawnStripe(t *testing.T) {
	img := gocv.NewMatWithSizeFromScalar(gocv.NewScalar(100, 100, 100, 0), 480, 640, gocv.MatTypeCV8UC3)
	defer img.Close()
	// centreline from (300, 479) at the bottom to (340, 0) at the top,
	// 30 px wide
	pv := gocv.NewPointsVectorFromPoints([][]image.Point{{{285, 479}, {315, 479}, {355, 0}, {325, 0}}})
	defer pv.Close()
	gocv.FillPoly(&img, pv, color.RGBA{220, 220, 220, 0})
	f := New(false)
	defer f.Close()
	l := f.Find(img, 384)
	wantX := 300 + 40*(479-384.0)/479
	wantH := math.Atan(40.0/479) * 180 / math.Pi
	if !l.Found || math.Abs(l.OffsetPx-(wantX-320)) > 1 || math.Abs(l.HeadingDeg-wantH) > 0.5 || len(l.Points) < 8 {
		t.Errorf("found %v (%s): offset %.2f (want %.2f), heading %.2f° (want %.2f°), %d points",
			l.Found, l.Reason, l.OffsetPx, wantX-320, l.HeadingDeg, wantH, len(l.Points))
	}
	// the same, dark on light, with Dark set
	inv := gocv.NewMat()
	defer inv.Close()
	gocv.BitwiseNot(img, &inv)
	fd := New(true)
	defer fd.Close()
	if d := fd.Find(inv, 384); !d.Found || math.Abs(d.OffsetPx-l.OffsetPx) > 0.5 {
		t.Errorf("dark stripe: %+v", d)
	}
}

// TestRefusesBadFrames: empty, tiny and float frames are refused with a
// reason, not passed to OpenCV.
func TestRefusesBadFrames(t *testing.T) {
	f := New(false)
	defer f.Close()
	empty := gocv.NewMat()
	defer empty.Close()
	tiny := gocv.NewMatWithSize(8, 8, gocv.MatTypeCV8UC3)
	defer tiny.Close()
	fl := gocv.NewMatWithSize(64, 64, gocv.MatTypeCV32F)
	defer fl.Close()
	for name, m := range map[string]gocv.Mat{"empty": empty, "tiny": tiny, "float": fl} {
		if l := f.Find(m, 10); l.Found || l.Reason == "" {
			t.Errorf("%s: %+v", name, l)
		}
	}
}

// BenchmarkFind640 measures one 640×480 frame.
func BenchmarkFind640(b *testing.B) {
	img := gocv.NewMatWithSizeFromScalar(gocv.NewScalar(100, 100, 100, 0), 480, 640, gocv.MatTypeCV8UC3)
	defer img.Close()
	gocv.Rectangle(&img, image.Rect(300, 0, 340, 480), color.RGBA{220, 220, 220, 0}, -1)
	f := New(false)
	defer f.Close()
	for i := 0; i < b.N; i++ {
		f.Find(img, 384)
	}
}
