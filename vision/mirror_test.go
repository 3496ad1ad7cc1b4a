package vision

import (
	"testing"

	"gocv.io/x/gocv"

	"github.com/hewline/hewline/capture/synth"
)

// mirrorScene is lane-straight on a glossy epoxy floor under rows of
// 1.2 m ceiling luminaires every 1.6 m, 4 m up, parallel to the aisle:
// one row over the lane's centre and one 2.25 m to each side, whose
// mirror images (a fifth of the way out from under the camera, 1.0 m up:
// the law of reflection, see synth.Tube) fall on and near the boundary
// lines. From fromM to toM of the aisle both lines are worn away, so
// only the streaks remain there.
func mirrorScene(t *testing.T, fromM, toM float64) synth.Scenario {
	t.Helper()
	sc := lookup(t, "lane-straight")
	sc.Name = "lane-straight-mirrored"
	sc.Floor = synth.Floor{Colour: synth.RGB{R: 0.42, G: 0.44, B: 0.45}, Texture: 0.05, Gloss: 1}
	if toM > fromM {
		sc.Lane.Left.Gaps = []synth.Span{{From: fromM, To: toM}}
		sc.Lane.Right.Gaps = []synth.Span{{From: fromM, To: toM}}
	}
	for x := 0.0; x < 26; x += 1.6 {
		for _, lat := range []float64{2.25, 0, -2.25} {
			sc.Light.Tubes = append(sc.Light.Tubes, synth.Tube{
				X1: x, Y1: lat, X2: x + 1.2, Y2: lat, Z: 4,
				WidthM: 0.12, Strength: 3, BlurM: 0.02,
			})
		}
	}
	return sc
}

// renderPair renders frames i and i+1 of sc.
func renderPair(t *testing.T, sc synth.Scenario, i int) (a, b gocv.Mat) {
	t.Helper()
	sc.Frames = i + 2
	r, err := synth.New(sc)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	a, b = gocv.NewMat(), gocv.NewMat()
	for k := 0; k <= i+1; k++ {
		dst := &a
		if k == i+1 {
			dst = &b
		}
		if _, err := r.Read(dst); err != nil {
			a.Close()
			b.Close()
			t.Fatal(err)
		}
	}
	return a, b
}

// satCands counts c's saturated and other candidates.
func satCands(c *Classical) (sat, other int) {
	for _, cd := range c.cands {
		if cd.sat {
			sat++
		} else {
			other++
		}
	}
	return sat, other
}

// TestMirrorMotion checks the motion test of mirrored lamps on pairs of
// rendered frames, keyed by case: the streaks of lamps 4 m up move a
// fifth as fast as the floor (law of reflection) and are dropped; white
// tape clipped by the exposure moves with the floor and is kept; with the
// same frame twice (the vehicle standing) nothing is decided.
func TestMirrorMotion(t *testing.T) {
	for _, tc := range []struct {
		name      string
		scene     func(t *testing.T) synth.Scenario
		same      bool // the second frame is the first again
		wantDrops bool
	}{
		{name: "lamp streaks", scene: func(t *testing.T) synth.Scenario { return mirrorScene(t, 0, 0) }, wantDrops: true},
		{name: "lamp streaks, vehicle standing", scene: func(t *testing.T) synth.Scenario { return mirrorScene(t, 0, 0) }, same: true},
		{name: "clipped white tape", scene: func(t *testing.T) synth.Scenario {
			sc := lookup(t, "lane-straight")
			sc.Lane.Left.Colour, sc.Lane.Right.Colour = synth.White, synth.White
			sc.Lane.Left.Gaps = []synth.Span{{From: 1.6, To: 1.9}, {From: 2.3, To: 2.6}} // ends in view
			sc.Light.Gain = 1.3                                                          // the tape clips, the floor does not
			return sc
		}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			a, b := renderPair(t, tc.scene(t), 10)
			defer a.Close()
			defer b.Close()
			if tc.same {
				b.Close()
				b = a.Clone()
			}
			ln, err := NewLane(DefaultConfig(), DefaultLaneConfig())
			if err != nil {
				t.Fatal(err)
			}
			defer ln.Close()
			ln.Detect(a, Hint{})
			fr, why := ln.c.load(b)
			if why != "" {
				t.Fatal(why)
			}
			l, byBand, _, _, why := ln.c.extract(fr)
			if why != "" {
				t.Fatal(why)
			}
			sat0, other0 := satCands(ln.c)
			n := ln.c.mirror.drop(ln.c, fr, l, byBand)
			sat1, other1 := satCands(ln.c)
			t.Logf("%d streaks judged, %d dropped: saturated candidates %d -> %d, others %d -> %d", ln.c.mirror.judged, n, sat0, sat1, other0, other1)
			if sat0 == 0 {
				t.Fatalf("no saturated candidates: the case tests nothing")
			}
			if other1 != other0 {
				t.Errorf("%d unsaturated candidates dropped", other0-other1)
			}
			if tc.wantDrops && (n == 0 || sat1 > sat0/2) {
				t.Errorf("streaks not dropped: %d of %d saturated candidates kept", sat1, sat0)
			}
			if !tc.same && ln.c.mirror.judged == 0 {
				t.Errorf("no streak compared with the floor: the case tests nothing")
			}
			if !tc.wantDrops && n > 0 {
				t.Errorf("%d streaks dropped (%d of %d saturated candidates kept)", n, sat1, sat0)
			}
			// byBand still indexes the candidates, band by band
			for k := 0; k < l.n; k++ {
				for i := byBand[k][0]; i < byBand[k][1]; i++ {
					if ln.c.cands[i].band != k {
						t.Fatalf("candidate %d in band %d listed under band %d", i, ln.c.cands[i].band, k)
					}
				}
			}
		})
	}
}

// TestStripeMirrorMotion: the stripe detector drops the streaks of the
// reflections scene's lamps (4 m up, the stripe cart's camera lower
// still) on a pair of rendered frames and keeps the tape's candidates.
func TestStripeMirrorMotion(t *testing.T) {
	a, b := renderPair(t, lookup(t, "reflections"), 20)
	defer a.Close()
	defer b.Close()
	c, err := NewClassical(DefaultConfig())
	if err != nil {
		t.Fatal(err)
	}
	defer c.Close()
	c.Detect(a, Hint{})
	fr, why := c.load(b)
	if why != "" {
		t.Fatal(why)
	}
	l, byBand, _, _, why := c.extract(fr)
	if why != "" {
		t.Fatal(why)
	}
	sat0, other0 := satCands(c)
	n := c.mirror.drop(c, fr, l, byBand)
	sat1, other1 := satCands(c)
	t.Logf("%d streaks judged, %d dropped: saturated candidates %d -> %d, others %d -> %d", c.mirror.judged, n, sat0, sat1, other0, other1)
	if sat0 == 0 {
		t.Fatalf("no saturated candidates: the case tests nothing")
	}
	if n == 0 || sat1 > sat0/2 {
		t.Errorf("streaks not dropped: %d of %d saturated candidates kept", sat1, sat0)
	}
	if other1 != other0 {
		t.Errorf("%d unsaturated candidates dropped", other0-other1)
	}
}
