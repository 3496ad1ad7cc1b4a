package calib

import (
	"image"
	"io"
	"testing"
	"time"

	"gocv.io/x/gocv"

	"github.com/hewline/hewline/capture"
)

// clip plays Mats as frames; it keeps ownership of them.
type clip struct {
	frames []gocv.Mat
	i      int
}

func (c *clip) Read(dst *gocv.Mat) (capture.FrameInfo, error) {
	if c.i >= len(c.frames) {
		return capture.FrameInfo{}, io.EOF
	}
	f := c.frames[c.i]
	f.CopyTo(dst)
	info := capture.FrameInfo{Index: c.i, T: time.Duration(c.i) * time.Second / 30, Size: image.Pt(f.Cols(), f.Rows())}
	c.i++
	return info, nil
}

func TestPickViewsSpreadsAndCalibrates(t *testing.T) {
	truth := Lens{Fx: 610, Fy: 600, Cx: 328, Cy: 236, Dist: [5]float64{-0.22, 0.06, 0.0008, -0.0006, 0}}
	b := BoardSpec{Cols: 9, Rows: 6, Square: 25}
	r := newBoardRenderer(t, truth, 640, 480, 2)
	blank := gocv.NewMatWithSizeFromScalar(gocv.NewScalar(90, 90, 90, 0), 480, 640, gocv.MatTypeCV8UC1)
	defer blank.Close()
	var renders []gocv.Mat
	defer func() {
		for _, m := range renders {
			m.Close()
		}
	}()
	c := &clip{}
	// Each pose held for 10 frames with blank frames between: a waved board.
	for _, p := range synthPoses(b) {
		m, ok := r.render(b, p)
		if !ok {
			continue
		}
		renders = append(renders, m)
		for k := 0; k < 10; k++ {
			c.frames = append(c.frames, m)
		}
		c.frames = append(c.frames, blank, blank)
	}
	views, seen, found, err := PickViews(c, b, PickOptions{Every: 3, Max: 8})
	if err != nil {
		t.Fatal(err)
	}
	defer func() {
		for _, v := range views {
			v.Img.Close()
		}
	}()
	t.Logf("examined %d frames, board in %d, picked %d", seen, found, len(views))
	if len(views) != 8 {
		t.Fatalf("picked %d views, want 8", len(views))
	}
	// Well spread: no two picked views show the same pose (the same
	// descriptor).
	descs := map[[5]float64]string{}
	for _, v := range views {
		p, err := FindBoard(v.Img, b)
		if err != nil {
			t.Fatalf("%s: %v", v.Name, err)
		}
		f32 := make([]float32, 0, 2*len(p))
		for _, q := range p {
			f32 = append(f32, float32(q.X), float32(q.Y))
		}
		d := viewDescriptor(f32, b, 640, 480)
		d = [5]float64{round2(d[0]), round2(d[1]), round2(d[2]), round2(d[3]), round2(d[4])}
		if other, dup := descs[d]; dup {
			t.Errorf("%s and %s are the same view", v.Name, other)
		}
		descs[d] = v.Name
	}
	if _, _, err := CalibrateLens(views, b); err != nil {
		t.Errorf("calibrating the picked views: %v", err)
	}
	// A clip without the board.
	empty := &clip{frames: []gocv.Mat{blank, blank, blank}}
	if _, _, _, err := PickViews(empty, b, PickOptions{Every: 1}); !errorsIs(err, ErrNoBoard) {
		t.Errorf("clip without a board: err = %v", err)
	}
}

func round2(v float64) float64 { return float64(int(v*100+0.5)) / 100 }
