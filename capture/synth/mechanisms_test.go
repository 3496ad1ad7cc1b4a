package synth

import (
	"math"
	"testing"

	"gocv.io/x/gocv"
)

// TestDashedTruthContinuous: a dashed line is one line to follow; its truth
// matches the solid line's while the pixels show the dash pattern.
func TestDashedTruthContinuous(t *testing.T) {
	solid, _ := Lookup("weave")
	dash, _ := Lookup("dashed")
	solid.Frames, dash.Frames = 1, 1
	a, _ := New(solid)
	b, _ := New(dash)
	m := gocv.NewMat()
	defer m.Close()
	a.Read(&m)
	b.Read(&m)
	ta, tb := a.Truth(), b.Truth()
	if !tb.Visible || len(ta.Points) != len(tb.Points) || ta.OffsetPx != tb.OffsetPx {
		t.Errorf("dashed truth: visible %v, %d points (solid %d), offset %.2f (solid %.2f)",
			tb.Visible, len(tb.Points), len(ta.Points), tb.OffsetPx, ta.OffsetPx)
	}
	// rows where the centreline pixel is floor-coloured: the dash gaps
	var gapRows int
	for _, p := range tb.Points {
		k := 3 * (int(p[1])*dash.Width + int(math.Round(p[0])))
		if b.Bytes()[k] > 90 { // blue channel high: concrete, not yellow
			gapRows++
		}
	}
	if gapRows < 20 || gapRows > len(tb.Points)*2/3 {
		t.Errorf("%d of %d centreline rows show floor; want the dash gaps", gapRows, len(tb.Points))
	}
}

// TestShadowDarkens: on a flat floor, pixels fully inside a rack shadow
// are darker by the shadow's Darkness (0.65) than lit floor.
func TestShadowDarkens(t *testing.T) {
	sc, _ := Lookup("rack-shadows")
	sc.Floor.Texture = 0
	sc.Frames = 1
	sc.Motion.StartM = 3 // beams and the long shadow in view
	r, err := New(sc)
	if err != nil {
		t.Fatal(err)
	}
	m := gocv.NewMat()
	defer m.Close()
	if _, err := r.Read(&m); err != nil {
		t.Fatal(err)
	}
	tt := 0.0
	var lit, dark, nl, nd float64
	buf := r.Bytes()
	for k, kind := range r.kind {
		if kind != kFloor || int(buf[3*k+2]) > int(buf[3*k])+20 { // skip the yellow tape (red ≫ blue)
			continue
		}
		switch l := r.shadowLight(r.px[k], r.py[k], tt, 0); {
		case l == 1:
			lit += float64(buf[3*k+1])
			nl++
		case math.Abs(l-0.35) < 1e-9:
			dark += float64(buf[3*k+1])
			nd++
		}
	}
	if nl < 1000 || nd < 1000 {
		t.Fatalf("lit %v, shadowed %v pixels: scene does not show both", nl, nd)
	}
	if ratio := (dark / nd) / (lit / nl); math.Abs(ratio-0.35) > 0.01 {
		t.Errorf("shadow/lit ratio %.3f, want 0.35", ratio)
	}
}

// TestWearRemovesTape: worn tape shows floor through about the share of
// holes asked for (wear 0.35 of value noise: between a fifth and a half).
func TestWearRemovesTape(t *testing.T) {
	sc, _ := Lookup("worn")
	sc.Marks = nil // no dirt, only wear
	sc.Frames = 1
	r, _ := New(sc)
	m := gocv.NewMat()
	defer m.Close()
	r.Read(&m)
	var holes, n int
	for _, p := range r.Truth().Points {
		if p[1] < float64(sc.Height)/2 {
			continue
		}
		n++
		if r.Bytes()[3*(int(p[1])*sc.Width+int(math.Round(p[0])))] > 90 {
			holes++
		}
	}
	if f := float64(holes) / float64(n); f < 0.1 || f > 0.5 {
		t.Errorf("%.2f of the near centreline shows floor, want a worn share", f)
	}
}

// TestVisibleThroughout: scenarios without gaps keep the line in view in
// every frame (truth only, no pixels; every second frame to stay quick).
// In fisheye-tight the line leaves the frame on purpose
// (TestFisheyeStripeLeavesSide).
func TestVisibleThroughout(t *testing.T) {
	for _, name := range Names() {
		sc, _ := Lookup(name)
		if len(sc.Stripe.Gaps) > 0 || sc.Stripe.ToM > 0 ||
			(len(sc.Lane.Left.Gaps) > 0 && len(sc.Lane.Right.Gaps) > 0) || name == "fisheye-tight" {
			continue // made to lose the line
		}
		r, err := New(sc)
		if err != nil {
			t.Fatal(err)
		}
		var lost []int
		for i := 0; i < sc.Frames; i += 2 {
			if f := r.truthAt(i, r.cartAt(float64(i)/sc.FPS)); !f.Visible {
				lost = append(lost, i)
			}
		}
		if len(lost) > 0 {
			t.Errorf("%s: line not visible in %d frames, first %d", name, len(lost), lost[0])
		}
	}
}
