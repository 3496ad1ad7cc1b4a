package vision

import "testing"

// TestSynthGlare: on glare (the renderer's glossy floor mirroring ceiling
// lamps, a Blinn–Phong lobe that clips the stripe and the floor beside it
// to white over long stretches), the stripe seen before and beyond the
// clipped stretches must be measured: clipped bands are missing evidence,
// not evidence that the tape is absent. Without the tracker's prediction,
// every third frame at 320×240, judged with the TuSimple rule
// (scoreClip). Main before clipped bands were missing evidence: recall
// 0.55 with 13 frames wrong at confidence ≥ 0.5. Two such frames remain:
// one whose near end, run out through the glare, strays 3 px, and one
// dark gap between two patches of glare taken for a dark stripe (main has
// it too).
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
	if s.wrongConfident > 2 {
		t.Errorf("%d frames wrong with confidence ≥ 0.5, want ≤ 2", s.wrongConfident)
	}
}
