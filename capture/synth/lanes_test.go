package synth

import (
	"math"
	"testing"

	"gocv.io/x/gocv"
)

// TestTubeReflectionByHand checks the mirrored lamp against the law of
// reflection (angle of incidence = angle of reflection on a flat floor)
// and pinhole projection, both worked by hand here:
//
// camera centre C at height h = 0.5 m, pitched θ = 35° down, fy = 500 px,
// cy = 240; a luminaire across the aisle at height H = 4 m, D ahead of the
// camera's foot point. The reflected ray meets the floor where the line
// from C to the lamp's mirror image (at −H) crosses z = 0, d = D·h/(h + H)
// ahead; that floor point is at row cy + fy·tan(atan(h/d) − θ).
//
//	D = 5 m:            d = 5·0.5/4.5 = 0.5556 m, atan(0.9) = 41.99°, row 240 + 500·tan 6.99° = 301.3
//	camera 0.9 m on:    D = 4.1 m, d = 0.4556 m, atan(1.0976) = 47.66°, row 240 + 500·tan 12.66° = 352.3
//
// A mark on the floor 0.5556 m ahead would be 0.34 m behind the camera
// after the move: the streak moves with the camera, not the floor.
func TestTubeReflectionByHand(t *testing.T) {
	sc := straightScene()
	sc.Stripe.Path = Path{Segments: []Segment{Straight(40)}}
	sc.Stripe.FromM = 30 // no tape in view
	sc.Motion = Motion{SpeedMps: 0.9, StartM: 0}
	sc.FPS = 1
	sc.Frames = 2
	sc.Floor = Floor{Colour: RGB{0.3, 0.3, 0.3}, Gloss: 1}
	sc.Light.Tubes = []Tube{{X1: 5, Y1: -3, X2: 5, Y2: 3, Z: 4, WidthM: 0.05, Strength: 3}}
	r, err := New(sc)
	if err != nil {
		t.Fatal(err)
	}
	m := gocv.NewMat()
	defer m.Close()
	for i, want := range []float64{301.3, 352.3} {
		if _, err := r.Read(&m); err != nil {
			t.Fatal(err)
		}
		// brightness-weighted centre row of the streak in the centre column
		buf := r.Bytes()
		var sw, swy float64
		for y := 0; y < sc.Height; y++ {
			v := float64(buf[3*(y*sc.Width+320)+1]) - 0.3*255
			if v > 20 {
				sw += v
				swy += v * float64(y)
			}
		}
		if sw == 0 {
			t.Fatalf("frame %d: no streak in the centre column", i)
		}
		if got := swy / sw; math.Abs(got-want) > 1.5 {
			t.Errorf("frame %d: streak at row %.1f, want %.1f (law of reflection, by hand)", i, got, want)
		}
	}
}

// TestLaneTruthByHand checks the lane's truth against pinhole projection
// worked by hand: camera 1.0 m up, pitched 30°, f = 500 px, on the lane's
// centre and aligned with it; boundaries at ±0.45 m. At row y the floor
// point on the axis is d = h/tan(30° + atan((y − 240)/500)) ahead, at depth
// z = d·cos 30° + h·sin 30° along the optical axis, and a boundary at
// lateral X is at column 320 ± 500·X/z.
//
//	row 384 (reference): 30° + 16.07°, d = 0.9635 m, z = 1.3344 m, width 2·500·0.45/1.3344 = 337.24 px
//	row 478 (lowest):    30° + 25.45°, d = 0.6885 m, z = 1.0962 m, columns 114.75 and 525.25
func TestLaneTruthByHand(t *testing.T) {
	sc, _ := Lookup("lane-straight")
	sc.Motion = Motion{SpeedMps: 1, StartM: 1}
	sc.Frames = 1
	r, err := New(sc)
	if err != nil {
		t.Fatal(err)
	}
	f := r.truthAt(0, r.cartAt(0))
	if math.Abs(f.LaneWidthPx-337.24) > 0.05 || f.LaneWidthM != 0.9 {
		t.Errorf("lane width at the reference row %.2f px (%.2f m), want 337.24 (0.9)", f.LaneWidthPx, f.LaneWidthM)
	}
	if len(f.Left) == 0 || len(f.Right) == 0 || len(f.Points) == 0 {
		t.Fatalf("left %d right %d centre %d points", len(f.Left), len(f.Right), len(f.Points))
	}
	l, rt, c := f.Left[0], f.Right[0], f.Points[0]
	if l[1] != 478 || math.Abs(l[0]-114.75) > 0.05 || math.Abs(rt[0]-525.25) > 0.05 || math.Abs(c[0]-320) > 0.01 {
		t.Errorf("row %.0f: left %.2f right %.2f centre %.2f, want 114.75, 525.25, 320", l[1], l[0], rt[0], c[0])
	}
	if h := r.Header(); h.Follow != FollowLane {
		t.Errorf("header follow %q", h.Follow)
	}
}

// TestLaneOneSideTruth: where one line is worn away the frame is still
// visible (the centre is inferred from the other), tagged one-boundary,
// and the missing side has no truth points in the near half.
func TestLaneOneSideTruth(t *testing.T) {
	sc, _ := Lookup("lane-one-side")
	r, err := New(sc)
	if err != nil {
		t.Fatal(err)
	}
	// the camera's near half sees about 0.7 to 1.7 m ahead: at s = 4.0 m
	// (frame 90) the left line is missing from the near half
	f := r.truthAt(90, r.cartAt(3))
	if !f.Visible || !hasTag(f.Tags, "one-boundary") {
		t.Errorf("visible %v tags %v", f.Visible, f.Tags)
	}
	for _, p := range f.Left {
		if p[1] >= 300 {
			t.Fatalf("left point %v in the worn stretch", p)
		}
	}
	if len(f.Right) < 100 {
		t.Errorf("right line: %d points", len(f.Right))
	}
}

// TestOffsetPath: a path shifted sideways keeps its distance everywhere
// (arcs change radius by the shift) and the arc-length map follows.
func TestOffsetPath(t *testing.T) {
	p := Path{Start: Pose{X: 1, Y: 2, HeadingDeg: 20}, Segments: []Segment{Straight(1), Arc(2, 70), Arc(2, -70), Straight(1)}}
	for _, lat := range []float64{0.45, -0.45} {
		q, m := offsetPath(p, lat)
		g, h := newGeom(p), newGeom(q)
		for s := 0.0; s <= p.Length(); s += 0.1 {
			x, y, psi := g.at(s)
			wx, wy := x-lat*math.Sin(psi), y+lat*math.Cos(psi)
			qx, qy, _ := h.at(m(s))
			if d := math.Hypot(qx-wx, qy-wy); d > 1e-9 {
				t.Fatalf("lat %.2f s %.1f: shifted point off by %.3g m", lat, s, d)
			}
		}
	}
}

func hasTag(tags []string, t string) bool {
	for _, x := range tags {
		if x == t {
			return true
		}
	}
	return false
}
