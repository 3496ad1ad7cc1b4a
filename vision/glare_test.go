package vision

import (
	"math"
	"testing"

	"gocv.io/x/gocv"
)

// TestSynthGlare: on glare (the renderer's glossy floor mirroring ceiling
// lamps, a Blinn–Phong lobe that clips the stripe and the floor beside it
// to white over long stretches), the stripe seen before and beyond the
// clipped stretches must be measured: clipped bands are missing evidence,
// not evidence that the tape is absent. Without the tracker's prediction,
// every third frame at 320×240, judged with the TuSimple rule
// (scoreClip). Main before clipped bands were missing evidence: recall
// 0.55 with 13 frames wrong at confidence ≥ 0.5. Three such frames remain:
// one whose near end, run out through the glare, strays 3 px (frame 246),
// and two dark gaps between patches of glare taken for a dark stripe
// (frames 270 and 273, 100 px off at confidence 0.53 and 0.79). Frame 270
// came with 1d3d70e: Classical.bridges takes the pair of estimates that
// lands closest together, where it took (a) first before; with (a) first
// again this frame is right, but dashed-long at 320×240 falls from 0.917
// to 0.720 in replay. In replay, with the tracker's gate, glare has no
// false-track frame at any size (README scores), so the trade is kept and
// measured here.
func TestSynthGlare(t *testing.T) {
	if testing.Short() {
		t.Skip("renders a scene")
	}
	s := scoreClip(t, lookup(t, "glare").Resized(320, 240), 3, DefaultConfig())
	t.Logf("glare 320x240: %d/%d visible frames matched (%.3f), median offset error %.2f px, %d confident wrong",
		s.correct, s.visible, s.recall(), s.medianErr, s.wrongConfident)
	if s.recall() < 0.6 {
		t.Errorf("recall %.3f < 0.6", s.recall())
	}
	if s.wrongConfident > 3 {
		t.Errorf("%d frames wrong with confidence ≥ 0.5, want ≤ 3", s.wrongConfident)
	}
}

// glareOverNearEnd is baseScene with a lamp's reflection (a streak that
// clips to white) of half-size hw × hh (fractions of the frame) centred dx
// beside the stripe's centre at row fraction y.
func glareOverNearEnd(tape [3]float64, hw, hh, y, dx float64) scene {
	s := baseScene(640, 480)
	s.stripe = tape
	s.streaks = []streak{{x: s.centre(y)/float64(s.w) + dx, y: y, halfW: hw, halfH: hh}}
	return s
}

// TestGlareOverTheNearEnd: a lamp's reflection clipped to white over or
// beside the stripe's near end merges with a light stripe into one clipped
// stretch wider than the stripe and off its centre; the stripe seen
// beyond it must place the line, not the glare. Named cases were measured
// confidently wrong before clipped crossings were left out of the fit of
// the line's centre (errors in the comments, main at 9037566).
func TestGlareOverTheNearEnd(t *testing.T) {
	tests := map[string]scene{
		"wide glare right of white tape": glareOverNearEnd(whiteTape, 0.08, 0.15, 0.9, 0.06),  // was +12.7 px, -11.9° at confidence 0.66
		"wide glare left of white tape":  glareOverNearEnd(whiteTape, 0.08, 0.15, 0.9, -0.06), // was -12.7 px, +12.6° at 0.63
		"glare over the bottom rows":     glareOverNearEnd(whiteTape, 0.08, 0.15, 1.0, 0.06),  // was +4.2 px, -6.3° at 0.86
	}
	det, err := NewClassical(DefaultConfig())
	if err != nil {
		t.Fatal(err)
	}
	defer det.Close()
	for name, s := range tests {
		t.Run(name, func(t *testing.T) {
			img := s.draw(t)
			defer img.Close()
			d := det.Detect(img, Hint{})
			t.Logf("found %v conf %.2f reason %q off %.1f (truth %.1f) head %.1f (truth %.1f)", d.Found, d.Confidence, d.Reason,
				d.OffsetPx, s.truthAt(d.RefRow)-float64(s.w)/2, d.HeadingDeg, s.truthHeading(d.RefRow))
			if d.Found && d.Confidence >= 0.5 {
				checkAgainst(t, s, d)
			}
		})
	}
}

// TestGlareOverTheNearEndSweep counts confidently wrong detections (found
// at confidence ≥ 0.5, off by more than the TuSimple tolerance or by more
// than 3° of heading) over 135 placements of a clipped reflection at the
// stripe's near end (three widths, three lengths, three rows, five offsets
// from the centre, white and yellow tape), with and without the tracker's
// prediction. Main before clipped crossings left the centre fit: 87 of
// 540, worst 12.8 px and 12.6°; after: 44, worst 7.8 px and 8.1°, with the
// reflection narrower than the stripe beside it (not clipped over the
// stripe, so not left out) or over yellow tape, whose colour it hides.
// Each frame is judged by a fresh detector and by one that saw the same
// view without the glare just before, and so remembers the stripe's
// width (cutedge.go): measured 43 (worst 6.9 px, 9.4°) and 17 (6.9 px,
// 9.4°).
func TestGlareOverTheNearEndSweep(t *testing.T) {
	if testing.Short() {
		t.Skip("renders 180 frames")
	}
	det, err := NewClassical(DefaultConfig())
	if err != nil {
		t.Fatal(err)
	}
	defer det.Close()
	clean := map[[3]float64]gocv.Mat{}
	for _, tape := range [][3]float64{whiteTape, yellowTape} {
		s := baseScene(640, 480)
		s.stripe = tape
		m := s.draw(t)
		defer m.Close()
		clean[tape] = m
	}
	// wrong[0]: a fresh detector for every frame; wrong[1]: one that saw
	// the same view without the glare just before (as a vehicle does,
	// frames before the lamp's reflection reaches the stripe).
	var wrong [2]int
	var worstOff, worstHead [2]float64
	for _, hw := range []float64{0.03, 0.05, 0.08} {
		for _, hh := range []float64{0.06, 0.1, 0.15} {
			for _, y := range []float64{0.8, 0.9, 1.0} {
				for _, dx := range []float64{-0.06, -0.03, 0, 0.03, 0.06} {
					for _, tape := range [][3]float64{whiteTape, yellowTape} {
						s := glareOverNearEnd(tape, hw, hh, y, dx)
						img := s.draw(t)
						ref := 0.8 * float64(s.h)
						for _, h := range []Hint{{}, {Valid: true, OffsetPx: s.truthAt(ref) - float64(s.w)/2, HeadingDeg: s.truthHeading(ref), OffsetSigma: 4, HeadingSigma: 2}} {
							for before := range 2 {
								det.forgetFrames()
								if before == 1 {
									det.Detect(clean[tape], h)
								}
								d := det.Detect(img, h)
								if !d.Found || d.Confidence < 0.5 {
									continue
								}
								eo := math.Abs(d.OffsetPx - (s.truthAt(d.RefRow) - float64(s.w)/2))
								eh := math.Abs(d.HeadingDeg - s.truthHeading(d.RefRow))
								if eo > tuSimpleTol(s.w) || eh > 3 {
									wrong[before]++
									worstOff[before], worstHead[before] = math.Max(worstOff[before], eo), math.Max(worstHead[before], eh)
								}
							}
						}
						img.Close()
					}
				}
			}
		}
	}
	for before, name := range []string{"fresh detector", "after the clean view"} {
		limit := [2]int{50, 25}[before]
		t.Logf("%s: confidently wrong %d of 540 (worst %.1f px, %.1f°)", name, wrong[before], worstOff[before], worstHead[before])
		if wrong[before] > limit || worstOff[before] > 10 {
			t.Errorf("%s: confidently wrong %d of 540, worst %.1f px off: want ≤ %d and within 10 px (main before clipped crossings left the centre fit: 87, 12.8 px)", name, wrong[before], worstOff[before], limit)
		}
	}
}
