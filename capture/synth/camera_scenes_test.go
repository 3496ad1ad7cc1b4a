package synth

import (
	"math"
	"slices"
	"testing"

	"gocv.io/x/gocv"
)

// readFrame renders one frame of sc (after skipping skip frames).
func readFrame(t *testing.T, sc Scenario, skip int) (*Renderer, gocv.Mat) {
	t.Helper()
	sc.Frames = skip + 1
	r, err := New(sc)
	if err != nil {
		t.Fatal(err)
	}
	m := gocv.NewMat()
	for i := 0; i <= skip; i++ {
		if _, err := r.Read(&m); err != nil {
			m.Close()
			t.Fatal(err)
		}
	}
	return r, m
}

// TestDotsAreRound looks straight down (pitch 89.9°) on the dotted line
// and measures the dots with OpenCV's connected components: each dot's
// area is the textbook π·r² (r = f·0.04 m / 1 m = 20 px) within 3 %, and
// its bounding box is square within a pixel.
func TestDotsAreRound(t *testing.T) {
	sc, _ := Lookup("dotted")
	sc.Floor = Floor{Colour: RGB{0.5, 0.5, 0.48}}
	sc.Motion = Motion{StartM: 2}
	sc.Camera.HeightM, sc.Camera.PitchDeg = 1, 89.9
	r, m := readFrame(t, sc, 0)
	defer r.Close()
	defer m.Close()
	ch := gocv.Split(m)
	defer func() {
		for _, c := range ch {
			c.Close()
		}
	}()
	bin := gocv.NewMat()
	defer bin.Close()
	// blue channel: floor 122, tape 26; threshold halfway
	gocv.Threshold(ch[0], &bin, 74, 255, gocv.ThresholdBinaryInv)
	labels, stats, cents := gocv.NewMat(), gocv.NewMat(), gocv.NewMat()
	defer labels.Close()
	defer stats.Close()
	defer cents.Close()
	n := gocv.ConnectedComponentsWithStats(bin, &labels, &stats, &cents)
	want := math.Pi * 20 * 20
	var whole int
	for i := 1; i < n; i++ {
		x, y := int(stats.GetIntAt(i, 0)), int(stats.GetIntAt(i, 1))
		w, h := int(stats.GetIntAt(i, 2)), int(stats.GetIntAt(i, 3))
		if x == 0 || y == 0 || x+w >= sc.Width || y+h >= sc.Height {
			continue // cut by the frame
		}
		whole++
		area := float64(stats.GetIntAt(i, 4))
		if math.Abs(area-want) > 0.03*want || absInt(w-h) > 1 {
			t.Errorf("dot %d: area %.0f px (want %.0f), box %dx%d", i, area, want, w, h)
		}
	}
	// 480 px of floor at 2 px/mm... the view is 0.96 m long: 3 whole dots
	if whole < 2 {
		t.Errorf("%d whole dots in view", whole)
	}
}

func absInt(a int) int {
	if a < 0 {
		return -a
	}
	return a
}

// TestJPEGBlocking: jpeg-low's frames carry the 8×8 block grid of a JPEG
// stream. Blockiness is measured as the mean absolute horizontal step
// across block boundaries (columns 8k−1 to 8k) over the mean step inside
// blocks (the idea of Wang, Bovik and Evans' blind blocking measure, ICIP
// 2000, from memory): about 1 for a rendered frame, well above for JPEG.
func TestJPEGBlocking(t *testing.T) {
	sc, _ := Lookup("jpeg-low")
	plain := sc
	plain.JPEGQuality = 0
	ratio := func(sc Scenario) float64 {
		r, m := readFrame(t, sc, 0)
		defer r.Close()
		defer m.Close()
		buf := r.Bytes()
		var at, in, nAt, nIn float64
		for y := 0; y < sc.Height; y++ {
			for x := 1; x < sc.Width; x++ {
				k := 3 * (y*sc.Width + x)
				d := math.Abs(float64(buf[k+1]) - float64(buf[k+1-3]))
				if x%8 == 0 {
					at, nAt = at+d, nAt+1
				} else {
					in, nIn = in+d, nIn+1
				}
			}
		}
		return (at / nAt) / (in / nIn)
	}
	rp, rj := ratio(plain), ratio(sc)
	t.Logf("blockiness: rendered %.2f, JPEG quality %d %.2f", rp, sc.JPEGQuality, rj)
	if rp > 1.15 || rj < 1.5 {
		t.Errorf("blockiness rendered %.2f (want ≈ 1), JPEG %.2f (want > 1.5)", rp, rj)
	}
}

// TestRollingPoseStill: with the cart standing still a rolling shutter
// changes nothing, in the pixels or the truth.
func TestRollingPoseStill(t *testing.T) {
	sc := straightScene()
	sc.Motion = Motion{StartM: 1}
	roll := sc
	roll.Light.LineTimeS = 1.0 / 15000
	roll.Light.RollingPose = true
	a, ma := readFrame(t, sc, 0)
	defer a.Close()
	defer ma.Close()
	b, mb := readFrame(t, roll, 0)
	defer b.Close()
	defer mb.Close()
	ta, tb := a.Truth(), b.Truth()
	if string(a.Bytes()) != string(b.Bytes()) || len(ta.Points) != len(tb.Points) || math.Abs(ta.OffsetPx-tb.OffsetPx) > 1e-6 {
		t.Errorf("still cart: rolling shutter changed the frame or its truth (%d vs %d points, offset %.4f vs %.4f)",
			len(ta.Points), len(tb.Points), ta.OffsetPx, tb.OffsetPx)
	}
}

// TestRollingShutterSkews: a cart turning on the spot (no translation)
// under a rolling shutter sees the straight stripe sheared: the rows read
// last are seen after more rotation. The shear in truth matches the yaw
// rate times the readout time: a floor point straight ahead moves by
// fx·ω·Δt pixels between the reference row and the middle row.
func TestRollingShutterSkews(t *testing.T) {
	sc := straightScene()
	// weave of long wavelength at low speed: nearly pure yaw at the start
	sc.Motion = Motion{SpeedMps: 1, StartM: 1, WeaveAmpM: 0.02, WeaveWavelengthM: 0.5}
	roll := sc
	roll.Light.LineTimeS = 1.0 / 15000
	roll.Light.RollingPose = true
	a, ma := readFrame(t, sc, 3)
	defer a.Close()
	defer ma.Close()
	b, mb := readFrame(t, roll, 3)
	defer b.Close()
	defer mb.Close()
	ta, tb := a.Truth(), b.Truth()
	// the middle row (y = h/2) is exposed at the frame time in both
	mid := func(pts [][2]float64, y float64) float64 {
		for _, p := range pts {
			if p[1] == y {
				return p[0]
			}
		}
		return math.NaN()
	}
	h := float64(sc.Height)
	if d := mid(ta.Points, h/2) - mid(tb.Points, h/2); math.Abs(d) > 0.05 {
		t.Errorf("middle row moved by %.3f px", d)
	}
	// at the reference row the rolling image is dt = (0.8h − h/2)·line
	// later: compare the shift with the global-shutter truth dt later
	dt := (0.8*h - h/2) * roll.Light.LineTimeS
	st := a.cartAt(3/sc.FPS + dt)
	later := a.truthAt(3, st)
	if d := tb.OffsetPx - later.OffsetPx; math.Abs(d) > 0.05 {
		t.Errorf("reference row: rolling %.3f px, global shutter %.4f s later %.3f px", tb.OffsetPx, dt, later.OffsetPx)
	}
	if math.Abs(tb.OffsetPx-ta.OffsetPx) < 0.5 {
		t.Errorf("no skew: %.3f vs %.3f px", tb.OffsetPx, ta.OffsetPx)
	}
}

// TestPropHidesStripe: a person standing with one leg on the stripe
// hides the rows of the stripe behind them, in the truth and in the pixels.
func TestPropHidesStripe(t *testing.T) {
	sc := straightScene()
	sc.Camera.HeightM, sc.Camera.PitchDeg = 0.3, 10
	g := newGeom(sc.Stripe.Path)
	x, y, _ := g.at(3.5)
	y += 0.1 // the path runs along +X: a leg (0.1 m off the person's axis) on the tape
	sc.Props = []Prop{{Name: "person", Shape: "person", X: x, Y: y, WidthM: 0.46, HeightM: 1.75, Colour: RGB{0.1, 0.1, 0.1}}}
	bare := sc
	bare.Props = nil
	a, ma := readFrame(t, bare, 0)
	defer a.Close()
	defer ma.Close()
	b, mb := readFrame(t, sc, 0)
	defer b.Close()
	defer mb.Close()
	hidden := len(a.Truth().Points) - len(b.Truth().Points)
	if hidden < 3 {
		t.Fatalf("%d truth rows hidden by the person", hidden)
	}
	have := map[float64]bool{}
	for _, p := range b.Truth().Points {
		have[p[1]] = true
	}
	for _, p := range a.Truth().Points {
		if have[p[1]] {
			continue
		}
		k := 3 * (int(p[1])*sc.Width + int(math.Round(p[0])))
		if px := b.Bytes()[k : k+3]; px[0] > 40 || px[2] > 40 {
			t.Errorf("row %.0f: truth hides the stripe but the pixel is %v, not the person", p[1], px)
		}
	}
}

// TestLowCameraHorizon: in low-camera the horizon lies below the middle,
// so the lower half holds wall, uprights and windows (distractors for a
// detector that searches a fixed lower half), while the line stays
// visible.
func TestLowCameraHorizon(t *testing.T) {
	sc, _ := Lookup("low-camera")
	r, m := readFrame(t, sc, 0)
	defer r.Close()
	defer m.Close()
	// per column without props: rows of the lower half that see no floor
	var props int
	var runs []float64
	for i := 0; i < sc.Width; i++ {
		var above, p int
		for j := sc.Height / 2; j < sc.Height; j++ {
			switch r.kind[j*sc.Width+i] {
			case kBackdrop:
				above++
			case kProp:
				p++
			}
		}
		if props += p; p == 0 {
			runs = append(runs, float64(above))
		}
	}
	slices.Sort(runs)
	// pinhole (Hartley & Zisserman ch. 6): the horizon is at cy + fy·tan 3°
	// = 266.2 px, and the floor is drawn up to FarM = 30 m ahead, at row
	// cy + fy·tan(atan(h/30) + 3°) = 267.04: rows 240 to 267 see no floor
	far := sc.Camera.Cy + sc.Camera.Fy*math.Tan(math.Atan(sc.Camera.HeightM/30)-rad(sc.Camera.PitchDeg))
	wantRows := math.Floor(far) - float64(sc.Height/2) + 1
	if rows := runs[len(runs)/2]; rows != wantRows {
		t.Errorf("lower half: %.1f rows above the horizon, want %.1f", rows, wantRows)
	}
	if props == 0 || !r.Truth().Visible {
		t.Errorf("props in the lower half %d px, line visible %v", props, r.Truth().Visible)
	}
}

// TestFisheyeStripeLeavesSide: in fisheye-tight the line is lost at the
// side of the frame in the bends (truth not visible, not a gap or the end)
// and seen again after; computed from truth alone.
func TestFisheyeStripeLeavesSide(t *testing.T) {
	sc, _ := Lookup("fisheye-tight")
	r, err := New(sc)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	var lost, back int
	prev := true
	for i := 0; i < sc.Frames; i += 3 {
		f := r.truthAt(i, r.cartAt(float64(i)/sc.FPS))
		for _, tag := range f.Tags {
			if tag == "gap" || tag == "end" {
				t.Fatalf("frame %d tagged %s", i, tag)
			}
		}
		if prev && !f.Visible {
			lost++
		}
		if !prev && f.Visible {
			back++
		}
		prev = f.Visible
	}
	if lost < 2 || back < 2 {
		t.Errorf("line left the frame %d times and came back %d times", lost, back)
	}
}

// TestDriftMovesExposureAndBalance: exposure-drift frames differ in
// brightness and in the balance of their channels from frame to frame,
// within the stated ±40 % and ±20 %.
func TestDriftMovesExposureAndBalance(t *testing.T) {
	sc, _ := Lookup("exposure-drift")
	r, err := New(sc)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	var lo, hi = math.Inf(1), math.Inf(-1)
	var rbLo, rbHi = math.Inf(1), math.Inf(-1)
	for i := 0; i < sc.Frames; i += 5 {
		g := r.gainAt(float64(i) / sc.FPS)
		wb := r.whiteBalance(float64(i) / sc.FPS)
		lo, hi = math.Min(lo, g), math.Max(hi, g)
		rb := wb[0] / wb[2]
		rbLo, rbHi = math.Min(rbLo, rb), math.Max(rbHi, rb)
		if g < 0.6-1e-9 || g > 1.4+1e-9 || wb[0] < 0.8-1e-9 || wb[0] > 1.2+1e-9 {
			t.Fatalf("frame %d: gain %.3f, balance %v", i, g, wb)
		}
	}
	if hi-lo < 0.3 || rbHi-rbLo < 0.15 {
		t.Errorf("gain %.2f–%.2f, red/blue %.2f–%.2f: hardly drifting", lo, hi, rbLo, rbHi)
	}
}
