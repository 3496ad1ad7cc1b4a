package vision

import (
	"fmt"
	"math"
	"testing"

	"gocv.io/x/gocv"
)

// Scenes without a stripe must not be reported with confidence ≥ 0.5
// (safety: an output that cannot be trusted must say so).
func TestNoStripe(t *testing.T) {
	grout := func() [][4]float64 {
		// A tiled floor in perspective: joints converging to a point above
		// the frame, and cross joints.
		var c [][4]float64
		for i := -3; i <= 3; i++ {
			c = append(c, [4]float64{0.5 + 0.03*float64(i), 0, 0.5 + 0.25*float64(i), 1})
		}
		for _, y := range []float64{0.15, 0.3, 0.5, 0.75} {
			c = append(c, [4]float64{0, y, 1, y})
		}
		return c
	}
	tests := map[string]func(s *scene){
		"bare concrete":  func(s *scene) {},
		"noisy concrete": func(s *scene) { s.noise = 25 },
		"shadow edges": func(s *scene) {
			s.shade = func(x, y float64) float64 {
				if x > 0.4+0.2*y {
					return 0.4
				}
				return 1
			}
		},
		"cracks": func(s *scene) {
			s.cracks = [][4]float64{{0.2, 0.3, 0.3, 1}, {0.7, 0.5, 0.6, 1}, {0, 0.6, 1, 0.65}}
		},
		"tile joints": func(s *scene) { s.cracks = grout() },
		"lamp reflections": func(s *scene) {
			s.streaks = []streak{{x: 0.3, y: 0.45, halfW: 0.02, halfH: 0.08}, {x: 0.65, y: 0.7, halfW: 0.025, halfH: 0.1}}
		},
		"black": func(s *scene) { s.floor = [3]float64{0, 0, 0}; s.noise = 0 },
		"white": func(s *scene) { s.floor = [3]float64{255, 255, 255}; s.noise = 0 },
	}
	for name, mod := range tests {
		t.Run(name, func(t *testing.T) {
			s := baseScene(640, 480)
			s.none = true
			mod(&s)
			img := s.draw(t)
			defer img.Close()
			det, _ := NewClassical(DefaultConfig())
			defer det.Close()
			d := det.Detect(img, Hint{})
			t.Logf("found %v conf %.2f reason %q off %.1f", d.Found, d.Confidence, d.Reason, d.OffsetPx)
			if d.Found && d.Confidence >= 0.5 {
				t.Errorf("no stripe in the scene, but found with confidence %.2f (offset %.1f)", d.Confidence, d.OffsetPx)
			}
			if !d.Found && d.Reason == "" {
				t.Error("not found without a reason")
			}
		})
	}
}

// Distractors beside a real stripe must not pull the line off it.
func TestDistractors(t *testing.T) {
	tests := map[string]func(s *scene){
		"lamp reflections": func(s *scene) {
			s.streaks = []streak{{x: 0.3, y: 0.55, halfW: 0.02, halfH: 0.12}, {x: 0.75, y: 0.75, halfW: 0.025, halfH: 0.15}}
		},
		"reflection on the stripe": func(s *scene) {
			s.streaks = []streak{{x: 0.53, y: 0.6, halfW: 0.03, halfH: 0.1}}
		},
		"tyre mark": func(s *scene) {
			// A dark, wider, fainter trail beside the stripe.
			s.others = []otherLine{{xBottom: 0.25, xTop: 0.4, wBottom: 0.1, wTop: 0.04, top: 0.45, colour: [3]float64{85, 88, 92}}}
		},
		"tile joints": func(s *scene) {
			for i := -3; i <= 3; i++ {
				s.cracks = append(s.cracks, [4]float64{0.5 + 0.03*float64(i), 0, 0.5 + 0.25*float64(i), 1})
			}
			for _, y := range []float64{0.35, 0.5, 0.7, 0.95} {
				s.cracks = append(s.cracks, [4]float64{0, y, 1, y})
			}
		},
		"worn tape": func(s *scene) {
			s.stripe = [3]float64{150, 155, 160} // faded: contrast 0.35
			s.noise = 10
		},
	}
	for name, mod := range tests {
		t.Run(name, func(t *testing.T) {
			s := baseScene(640, 480)
			mod(&s)
			img := s.draw(t)
			defer img.Close()
			det, _ := NewClassical(DefaultConfig())
			defer det.Close()
			d := det.Detect(img, Hint{})
			t.Logf("found %v conf %.2f reason %q off %.1f", d.Found, d.Confidence, d.Reason, d.OffsetPx)
			checkAgainst(t, s, d)
		})
	}
}

// At a junction two stripes leave the same spot: the tracker's prediction
// chooses, and without one the detector says it is unsure.
func TestJunctionHint(t *testing.T) {
	s := baseScene(640, 480)
	s.xBottom, s.xTop = 0.5, 0.48
	branch := otherLine{xBottom: 0.5, xTop: 0.85, wBottom: 0.08, wTop: 0.02, top: 0.3, colour: whiteTape}
	s.others = []otherLine{branch}
	img := s.draw(t)
	defer img.Close()
	det, _ := NewClassical(DefaultConfig())
	defer det.Close()

	d := det.Detect(img, Hint{})
	t.Logf("no hint: found %v conf %.2f reason %q off %.1f head %.1f", d.Found, d.Confidence, d.Reason, d.OffsetPx, d.HeadingDeg)
	if d.Found && d.Confidence >= 0.5 {
		t.Errorf("two equal lines, no prior: confidence %.2f, want < 0.5", d.Confidence)
	}

	// Prior on the straight-on stripe.
	ref := 0.8 * 480
	h := Hint{Valid: true, OffsetPx: s.truthAt(ref) - 320, HeadingDeg: s.truthHeading(ref), OffsetSigma: 6, HeadingSigma: 3}
	d = det.Detect(img, h)
	t.Logf("hint on the stripe: conf %.2f off %.1f head %.1f", d.Confidence, d.OffsetPx, d.HeadingDeg)
	checkAgainst(t, s, d)

	// Prior on the branch: the detector follows the branch.
	bs := s
	bs.xBottom, bs.xTop, bs.others = branch.xBottom, branch.xTop, nil
	h = Hint{Valid: true, OffsetPx: bs.truthAt(ref) - 320, HeadingDeg: bs.truthHeading(ref), OffsetSigma: 6, HeadingSigma: 3}
	d = det.Detect(img, h)
	t.Logf("hint on the branch: conf %.2f off %.1f head %.1f", d.Confidence, d.OffsetPx, d.HeadingDeg)
	if math.Abs(d.HeadingDeg-bs.truthHeading(ref)) > 3 {
		t.Errorf("heading %.1f°, the branch's is %.1f°", d.HeadingDeg, bs.truthHeading(ref))
	}
}

// A coloured tape whose luminance equals the floor's is invisible to a
// luminance detector; with no tape colour configured the chroma channel
// must still find it. The tape colours are chosen so that their ITU-R
// BT.601 luma (0.299 R + 0.587 G + 0.114 B, the weights of OpenCV's
// BGR2GRAY) equals the concrete's, 115.9. A grey copy of the same frame
// carries no evidence at all and must not be claimed.
func TestIsoluminantColourTape(t *testing.T) {
	luma := func(c [3]float64) float64 { return 0.114*c[0] + 0.587*c[1] + 0.299*c[2] }
	tests := map[string][3]float64{
		"green":  {60, 168, 35},
		"yellow": {20, 128, 128},
		"blue":   {240, 120, 60},
	}
	for name, tape := range tests {
		t.Run(name, func(t *testing.T) {
			if d := math.Abs(luma(tape) - luma(concrete)); d > 2.5 {
				t.Fatalf("test colour not isoluminant: luma %.1f vs %.1f", luma(tape), luma(concrete))
			}
			s := baseScene(640, 480)
			s.stripe = tape
			img := s.draw(t)
			defer img.Close()
			det, _ := NewClassical(DefaultConfig())
			defer det.Close()
			d := det.Detect(img, Hint{})
			t.Logf("colour: found %v conf %.2f reason %q off %.1f", d.Found, d.Confidence, d.Reason, d.OffsetPx)
			checkAgainst(t, s, d)

			grey := gocv.NewMat()
			defer grey.Close()
			gocv.CvtColor(img, &grey, gocv.ColorBGRToGray)
			d = det.Detect(grey, Hint{})
			t.Logf("grey: found %v conf %.2f reason %q off %.1f", d.Found, d.Confidence, d.Reason, d.OffsetPx)
			if d.Found && d.Confidence >= 0.5 {
				t.Errorf("grey copy of an isoluminant tape: found with confidence %.2f", d.Confidence)
			}
		})
	}
}

// A stripe whose near stretch ends just beyond the reference row, with a
// missing stretch longer than the line is run out across before it
// resumes far ahead (the start of a worn-away stretch of tape, or the gap
// in the reflections scene), is about to leave the reference row unseen:
// its measurement must not be trusted (confidence below the tracker's
// 0.5) while one whose near stretch reaches well beyond the reference
// row, or a dashed line whose dash ends there, is. The cases follow the
// scene truth's definition of a visible line (capture/synth: laid over at
// least half the rows of the lower half of the frame): stubs up to rows
// 0.79 and 0.77 cover 42 % and 46 % of it, the long one 80 %. At every
// frame size: the mechanism is in fractions of the region, not pixels.
//
// Where the near stretch ends before the missing one, the detection's
// reach (Detection.ReachPx, for the tracker's end-of-line rule) is that
// stretch's end, not the far end of the fitted line that runs on across
// the gap. A gap shorter than half the measured span (the long near
// stretch's) and a dashed line's gaps are bridged and report no reach of
// their own.
func TestNearStretchEnding(t *testing.T) {
	tests := map[string]struct {
		gap                  [2]float64
		dashPeriod, dashDuty float64
		trusted              bool
		ownReach             bool // the near stretch's end is the reach
	}{
		"near stretch ends at the reference row":   {gap: [2]float64{0.2, 0.79}, ownReach: true},
		"near stretch ends a little above it":      {gap: [2]float64{0.2, 0.77}, ownReach: true},
		"near stretch reaches well beyond":         {gap: [2]float64{0.2, 0.6}, trusted: true},
		"dashed, a dash ends at the reference row": {dashPeriod: 0.2, dashDuty: 0.5, trusted: true},
	}
	for name, tc := range tests {
		for _, sz := range [][2]int{{160, 120}, {320, 240}, {640, 480}} {
			t.Run(fmt.Sprintf("%s/%dx%d", name, sz[0], sz[1]), func(t *testing.T) {
				s := baseScene(sz[0], sz[1])
				s.top, s.wTop = 0, 0.015
				s.gap, s.dashPeriod, s.dashDuty = tc.gap, tc.dashPeriod, tc.dashDuty
				img := s.draw(t)
				defer img.Close()
				det, err := NewClassical(DefaultConfig())
				if err != nil {
					t.Fatal(err)
				}
				defer det.Close()
				d := det.Detect(img, Hint{})
				t.Logf("found %v offset %.1f (truth %.1f) confidence %.2f %q", d.Found, d.OffsetPx, s.truthAt(d.RefRow)-float64(s.w)/2, d.Confidence, d.Reason)
				trusted := d.Found && d.Confidence >= 0.5
				if trusted != tc.trusted {
					t.Errorf("trusted %v, want %v", trusted, tc.trusted)
				}
				if trusted && math.Abs(d.OffsetPx-(s.truthAt(d.RefRow)-float64(s.w)/2)) > 0.015*float64(s.w) {
					t.Errorf("offset off the truth by more than 1.5 %% of the width")
				}
				h := float64(sz[1])
				switch {
				case tc.ownReach:
					// the stretch's end, within 4 % of the height (a band
					// and a half at the default band count)
					want := d.RefRow - tc.gap[1]*h
					if !d.HasReach || math.Abs(d.ReachPx-want) > 0.04*h {
						t.Errorf("reach %.1f (reported %v), want the near stretch's end %.1f rows past the reference row", d.ReachPx, d.HasReach, want)
					}
				case d.HasReach:
					t.Errorf("reach %.1f of the near stretch reported across a gap that is bridged", d.ReachPx)
				}
			})
		}
	}
}
