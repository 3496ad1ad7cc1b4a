package vision

import (
	"math"
	"testing"
)

// cutProfile is a band profile of n columns at floor level 126 (a chroma
// profile's grey floor) with a clipped run [20, 40) in gm and the values
// set from column 40 on by tail.
func cutProfile(n int, tail func(j int) float64) (p, gm []float64) {
	p, gm = make([]float64, n), make([]float64, n)
	for i := range p {
		p[i], gm[i] = 126, 150
		if i >= 20 && i < 40 {
			gm[i] = 255
		}
		if i >= 40 {
			p[i] = tail(i - 40)
		}
	}
	return p, gm
}

// TestCutCandidates places the stripe's centre from its one visible edge
// beside a clipped run, half the remembered width in, and refuses what
// is not a stripe cut by glare. Expected values worked by hand: the
// half-height crossing of a one-pixel step from 140 to 126 between
// columns 45 and 46 lies at 46.0 (pixel i covers [i, i+1)), so a 12 px
// stripe ends there and is centred at 40.
func TestCutCandidates(t *testing.T) {
	step := func(j int) float64 {
		if j < 6 {
			return 140
		}
		return 126
	}
	tests := map[string]struct {
		tail  func(j int) float64
		pre   []candidate // the band's candidates found by the ridge filter
		wantX []float64   // ROI-relative centres of the cut candidates
	}{
		"six of twelve px seen right of the run": {tail: step, wantX: []float64{40}},
		// A halo fades from the clipped core over many pixels: its 25 %
		// and 75 % crossings lie 7.7 px apart, over the 4.2 allowed.
		"glare halo fading out": {tail: func(j int) float64 { return math.Max(126, 140-0.7*float64(j)) }},
		// Clipped right up to its edge: too little of it seen to say it is
		// tape (1 px, under 1.5 px and a seventh of the width).
		"a sliver of one pixel": {tail: func(j int) float64 {
			if j < 1 {
				return 140
			}
			return 126
		}},
		"floor beside the run": {tail: func(int) float64 { return 126 }},
		"already measured from both sides": {
			tail: step,
			pre:  []candidate{{x: 40.5, w: 11, chroma: true}},
		},
		// The ridge filter's crossing of the visible part alone, next to
		// the glare: replaced by the cut crossing.
		"visible part's own crossing": {
			tail:  step,
			pre:   []candidate{{x: 43, w: 6, chroma: true, nearClip: true}},
			wantX: []float64{40},
		},
	}
	for name, tc := range tests {
		t.Run(name, func(t *testing.T) {
			c := &Classical{cfg: DefaultConfig()}
			c.cands = append(c.cands, tc.pre...)
			p, gm := cutProfile(80, tc.tail)
			l := bandLayout{x0: 0, x1: 80, y0: 0, y1: 80, step: 1, n: 80}
			c.cutCandidates(p, gm, l, 3, 76.5, 12, 0.5, 0)
			var got []float64
			for _, cd := range c.cands {
				if cd.cut {
					got = append(got, cd.x)
				}
				if cd.nearClip && len(tc.wantX) > 0 {
					t.Errorf("the visible part's own crossing at %.1f was kept beside the cut one", cd.x)
				}
			}
			if len(got) != len(tc.wantX) {
				t.Fatalf("cut candidates at %v, want %v", got, tc.wantX)
			}
			for i := range got {
				if math.Abs(got[i]-tc.wantX[i]) > 1e-9 {
					t.Errorf("cut candidate at %.3f, want %.3f", got[i], tc.wantX[i])
				}
			}
		})
	}
}

// TestCutAtTheRegionSide: a stripe leaving the region of interest at its
// left side shows its right edge only; it is placed half the remembered
// width in from that edge (a 12 px stripe whose right edge is at 6.0 is
// centred at 0.0, on the region's edge), but only when it reaches the
// side: a light patch ending short of it is not a stripe cut there.
func TestCutAtTheRegionSide(t *testing.T) {
	tests := map[string]struct {
		from  int // first column of the 140 level
		wantX []float64
	}{
		"reaches the side":       {from: 0, wantX: []float64{0}},
		"ends short of the side": {from: 2},
	}
	for name, tc := range tests {
		t.Run(name, func(t *testing.T) {
			p, gm := make([]float64, 80), make([]float64, 80)
			for i := range p {
				p[i], gm[i] = 126, 150
				if i >= tc.from && i < 6 {
					p[i] = 140
				}
			}
			c := &Classical{cfg: DefaultConfig()}
			l := bandLayout{x0: 0, x1: 80, y0: 0, y1: 80, step: 1, n: 80}
			c.cutCandidates(p, gm, l, 3, 76.5, 12, 0.5, 0)
			var got []float64
			for _, cd := range c.cands {
				got = append(got, cd.x)
			}
			if len(got) != len(tc.wantX) || len(got) == 1 && math.Abs(got[0]-tc.wantX[0]) > 1e-9 {
				t.Errorf("cut candidates at %v, want %v", got, tc.wantX)
			}
		})
	}
}

// TestWidthMemoryAges: the remembered width is gone after widthMemFrames
// frames without a new measurement, and on forget.
func TestWidthMemoryAges(t *testing.T) {
	m := widthMemory{w: curve{a: 10, scale: 1}, ok: true}
	for i := 0; i < widthMemFrames; i++ {
		m.age()
	}
	if w, ok := m.at(5); !ok || w != 10 {
		t.Fatalf("after %d frames: %v %v, want 10 true", widthMemFrames, w, ok)
	}
	m.age()
	if _, ok := m.at(5); ok {
		t.Errorf("still remembered after %d frames", widthMemFrames+1)
	}
	m = widthMemory{w: curve{a: 10, scale: 1}, ok: true}
	m.forget()
	if _, ok := m.at(5); ok {
		t.Errorf("remembered after forget")
	}
}

// TestStripeCutByGlare: a lamp's reflection clips the left half of yellow
// tape over most of its length (the test scene's streak, whose edge is
// sharp). After clean frames of the same view, the detector remembers
// the stripe's width and places the line from its visible right edge;
// judged against the scene's own geometry with the TuSimple rule
// (checkAgainst) and within 1 px. A fresh detector, with no width to go
// by, measured the visible half: 4.5 px off at confidence 1.00.
func TestStripeCutByGlare(t *testing.T) {
	clean := baseScene(320, 240)
	clean.stripe = yellowTape
	cut := clean
	// The ellipse's right edge runs along the stripe's centre near row
	// fraction 0.85, and across the stripe above and below.
	cut.streaks = []streak{{x: clean.centre(0.85)/float64(clean.w) - 0.1, y: 0.85, halfW: 0.1, halfH: 0.55}}
	det, fresh := defaultDetector(t), defaultDetector(t)
	ci := clean.draw(t)
	defer ci.Close()
	gi := cut.draw(t)
	defer gi.Close()
	d0 := fresh.Detect(gi, Hint{})
	t.Logf("without a remembered width: found %v conf %.2f %q offset %.2f", d0.Found, d0.Confidence, d0.Reason, d0.OffsetPx)
	for i := 0; i < 3; i++ {
		det.Detect(ci, Hint{})
	}
	if !det.widthMem.ok {
		t.Fatal("no width remembered from the clean frames")
	}
	d := det.Detect(gi, Hint{})
	cuts := 0
	for _, cd := range det.cands {
		if cd.cut {
			cuts++
		}
	}
	ref := d.RefRow
	t.Logf("with it: found %v conf %.2f %q, offset %.2f (truth %.2f), %d cut crossings",
		d.Found, d.Confidence, d.Reason, d.OffsetPx, cut.truthAt(ref)-float64(cut.w)/2, cuts)
	if cuts == 0 {
		t.Error("no cut crossing found beside the glare")
	}
	if !d.Found || d.Confidence < 0.5 {
		t.Fatalf("stripe cut by glare not found with confidence ≥ 0.5")
	}
	checkAgainst(t, cut, d)
	// The visible half alone puts the centre a quarter of the width off.
	if e := math.Abs(d.OffsetPx - (cut.truthAt(ref) - float64(cut.w)/2)); e > 1 {
		t.Errorf("offset %.2f px off the truth, want within 1 px (the visible half's centre is 4.5 px off)", e)
	}
}

// TestStripeLeavingTheSide: a bend's near end leaves the frame at the
// left side (its centre 19 px beyond the edge at the bottom row). The
// second frame of the same view, with the width remembered from the
// first, places the near end from the stripe's visible right edge:
// every reported point below 90 % of the height lies within 1 px of the
// scene's own centreline. The first frame, with no width to go by, runs
// its fit out 2.3 px off there.
func TestStripeLeavingTheSide(t *testing.T) {
	s := baseScene(320, 240)
	s.stripe = yellowTape
	s.xBottom, s.xTop, s.bend = -0.06, 0.45, 0.15
	img := s.draw(t)
	defer img.Close()
	det := defaultDetector(t)
	worst := func(d Detection) float64 {
		e := 0.0
		for _, p := range d.Points {
			if p.Y > 0.9*float64(s.h) {
				e = math.Max(e, math.Abs(p.X-s.truthAt(p.Y)))
			}
		}
		return e
	}
	d0 := det.Detect(img, Hint{})
	t.Logf("first frame: found %v conf %.2f, worst near-end error %.2f px", d0.Found, d0.Confidence, worst(d0))
	if !det.widthMem.ok {
		t.Fatal("no width remembered from the first frame")
	}
	d := det.Detect(img, Hint{})
	t.Logf("second frame: found %v conf %.2f, worst near-end error %.2f px", d.Found, d.Confidence, worst(d))
	if !d.Found || d.Confidence < 0.5 {
		t.Fatal("not found with confidence ≥ 0.5")
	}
	if e := worst(d); e > 1 {
		t.Errorf("near end %.2f px off the centreline, want within 1 px", e)
	}
}

// defaultDetector is a classical detector with the default
// configuration, closed when the test ends.
func defaultDetector(t *testing.T) *Classical {
	t.Helper()
	det, err := NewClassical(DefaultConfig())
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { det.Close() })
	return det
}
