package vision

import (
	"math"
	"testing"
)

// tuSimpleTol is the point tolerance used throughout: the TuSimple lane
// benchmark's 20 px on 1280-wide images (its evaluate/lane.py), scaled to
// the frame width (10 px at 640). See /work/shared/REFERENCES.md.
func tuSimpleTol(w int) float64 { return 20 * float64(w) / 1280 }

// checkAgainst compares d with the scene's truth and reports failures.
// A lane counts as matched in TuSimple when at least 85 % of its points
// are within tolerance; we apply the same rule to the near half.
func checkAgainst(t *testing.T, s scene, d Detection) {
	t.Helper()
	if !d.Found {
		t.Fatalf("not found: %q", d.Reason)
	}
	tol := tuSimpleTol(s.w)
	x := s.truthAt(d.RefRow)
	if got, want := d.OffsetPx, x-float64(s.w)/2; math.Abs(got-want) > tol {
		t.Errorf("offset %.2f px, truth %.2f (tolerance %.1f)", got, want, tol)
	}
	if got, want := d.HeadingDeg, s.truthHeading(d.RefRow); math.Abs(got-want) > 3 {
		t.Errorf("heading %.2f°, truth %.2f°", got, want)
	}
	if got, want := d.WidthPx, s.truthWidth(d.RefRow); math.Abs(got-want) > 0.3*want+1 {
		t.Errorf("width %.2f px, truth %.2f", got, want)
	}
	if len(d.Points) < 8 {
		t.Errorf("%d points, want ≥ 8", len(d.Points))
	}
	near, ok := 0, 0
	for i, p := range d.Points {
		if i > 0 && p.Y >= d.Points[i-1].Y {
			t.Errorf("points not ordered bottom to top at %d: %v after %v", i, p, d.Points[i-1])
		}
		if p.Y < float64(s.h)/2 {
			continue
		}
		near++
		if math.Abs(p.X-s.truthAt(p.Y)) <= tol {
			ok++
		}
	}
	if near == 0 || float64(ok) < 0.85*float64(near) {
		t.Errorf("%d of %d near-half points within %.1f px", ok, near, tol)
	}
	if d.Confidence < 0 || d.Confidence > 1 || math.IsNaN(d.Confidence) {
		t.Errorf("confidence %v outside [0, 1]", d.Confidence)
	}
	if d.Method != "classical" {
		t.Errorf("method %q", d.Method)
	}
}

func TestClassicalScenes(t *testing.T) {
	shadowBand := func(x, y float64) float64 {
		// A rack's shadow falling diagonally across the aisle.
		if x+0.6*y > 0.5 && x+0.6*y < 0.9 {
			return 0.35
		}
		return 1
	}
	tests := map[string]func() scene{
		"light straight": func() scene { return baseScene(640, 480) },
		"dark on epoxy": func() scene {
			s := baseScene(640, 480)
			s.floor, s.stripe = paleEpoxy, blackTape
			s.xBottom, s.xTop = 0.35, 0.6
			return s
		},
		"curve": func() scene {
			s := baseScene(640, 480)
			s.xBottom, s.xTop, s.bend = 0.5, 0.62, 0.08
			return s
		},
		"diagonal shadow": func() scene {
			s := baseScene(640, 480)
			s.shade = shadowBand
			return s
		},
		"dim": func() scene {
			s := baseScene(640, 480)
			s.shade = func(x, y float64) float64 { return 0.12 }
			s.noise = 2
			return s
		},
		"light gradient": func() scene {
			s := baseScene(640, 480)
			s.shade = func(x, y float64) float64 { return 0.3 + 0.9*x*y }
			return s
		},
		"dashed": func() scene {
			s := baseScene(640, 480)
			s.dashPeriod, s.dashDuty = 0.2, 0.55
			return s
		},
		"cracks": func() scene {
			s := baseScene(640, 480)
			s.cracks = [][4]float64{{0.1, 0.4, 0.35, 1}, {0, 0.7, 1, 0.72}, {0.8, 0.35, 0.9, 1}}
			return s
		},
		"yellow same luminance": func() scene {
			s := baseScene(640, 480)
			// Luminance of this yellow is ≈ 0.114·20 + 0.587·190 + 0.299·215 = 178.
			s.floor = [3]float64{178, 178, 178}
			s.stripe = yellowTape
			return s
		},
		"160x120":  func() scene { return baseScene(160, 120) },
		"320x240":  func() scene { return baseScene(320, 240) },
		"1280x720": func() scene { return baseScene(1280, 720) },
		"noisy": func() scene {
			s := baseScene(640, 480)
			s.noise = 20
			return s
		},
	}
	for name, mk := range tests {
		t.Run(name, func(t *testing.T) {
			s := mk()
			cfg := DefaultConfig()
			if name == "yellow same luminance" {
				cfg.TapeColour = "yellow"
			}
			det, err := NewClassical(cfg)
			if err != nil {
				t.Fatal(err)
			}
			defer det.Close()
			img := s.draw(t)
			defer img.Close()
			d := det.Detect(img, Hint{})
			t.Logf("found %v conf %.2f off %.2f head %.2f width %.2f reason %q", d.Found, d.Confidence, d.OffsetPx, d.HeadingDeg, d.WidthPx, d.Reason)
			checkAgainst(t, s, d)
		})
	}
}
