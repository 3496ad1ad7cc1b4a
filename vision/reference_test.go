package vision

import (
	"math"
	"testing"

	"gocv.io/x/gocv"

	"github.com/hewline/hewline/vision/reffollow"
)

// plainFollower is the simple baseline the classical detector is compared
// with (package reffollow: adaptive mean threshold, largest blob, band
// centroids, a least-squares line). It knows the stripe's polarity (the
// classical detector is run with polarity auto).
func plainFollower(img gocv.Mat, dark bool, refRow float64) Detection {
	f := reffollow.New(dark)
	defer f.Close()
	l := f.Find(img, refRow)
	if !l.Found {
		return Detection{Reason: l.Reason}
	}
	pts := make([]Point, len(l.Points))
	for i, p := range l.Points {
		pts[i] = Point{p[0], p[1]}
	}
	return Detection{Found: true, Points: pts, RefRow: l.RefRow, OffsetPx: l.OffsetPx,
		HeadingDeg: l.HeadingDeg, Confidence: 1, Method: "plain"}
}

// offsetOK is the per-frame test used in the comparison: the offset at the
// reference row within the TuSimple tolerance scaled to the width.
func offsetOK(s scene, d Detection) bool {
	return d.Found && math.Abs(d.OffsetPx-(s.truthAt(d.RefRow)-float64(s.w)/2)) <= tuSimpleTol(s.w)
}

// The classical detector must be right wherever the plain follower is, and
// right on the hard scenes (shadows, cracks, reflections) where a single
// adaptive threshold is known to struggle.
func TestAgainstPlainFollower(t *testing.T) {
	hard := map[string]func(s *scene){
		"plain":       func(s *scene) {},
		"dark stripe": func(s *scene) { s.floor, s.stripe = paleEpoxy, blackTape },
		// Smooth light and shade in diagonal bands (light through a row of
		// skylights): the light varies smoothly, without the sharp edges of
		// a marking.
		"banded light": func(s *scene) {
			s.shade = func(x, y float64) float64 { return 0.3 + 0.7*(0.5+0.5*math.Sin(12*(x+0.5*y))) }
		},
		"dim":    func(s *scene) { s.shade = func(x, y float64) float64 { return 0.1 }; s.noise = 2 },
		"cracks": func(s *scene) { s.cracks = [][4]float64{{0.1, 0.4, 0.4, 1}, {0, 0.8, 1, 0.85}} },
		"reflections": func(s *scene) {
			s.streaks = []streak{{x: 0.3, y: 0.6, halfW: 0.04, halfH: 0.2}, {x: 0.8, y: 0.8, halfW: 0.04, halfH: 0.2}}
		},
		"bright floor patch": func(s *scene) {
			s.shade = func(x, y float64) float64 {
				if x < 0.45 && y > 0.5 {
					return 1.8
				}
				return 1
			}
		},
	}
	det, _ := NewClassical(DefaultConfig())
	defer det.Close()
	var cWins, pWins int
	for name, mod := range hard {
		s := baseScene(640, 480)
		mod(&s)
		img := s.draw(t)
		d := det.Detect(img, Hint{})
		p := plainFollower(img, s.stripe == blackTape, 0.8*float64(s.h))
		img.Close()
		cOK, pOK := offsetOK(s, d) && d.Confidence >= 0.5, offsetOK(s, p)
		t.Logf("%-18s classical ok=%-5v (off %7.1f conf %.2f)  plain ok=%-5v (off %7.1f)  truth %.1f",
			name, cOK, d.OffsetPx, d.Confidence, pOK, p.OffsetPx, s.truthAt(d.RefRow)-320)
		if cOK {
			cWins++
		}
		if pOK {
			pWins++
		}
		if pOK && !cOK {
			t.Errorf("%s: the plain follower is right and the classical detector is not", name)
		}
	}
	t.Logf("right: classical %d, plain %d of %d scenes", cWins, pWins, len(hard))
	if cWins <= pWins {
		t.Errorf("classical detector right on %d scenes, plain follower on %d: no better than the baseline", cWins, pWins)
	}
}
