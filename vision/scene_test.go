package vision

import (
	"math"
	"math/rand/v2"
	"testing"

	"gocv.io/x/gocv"
)

// scene is an invented test picture drawn here (not a recording): a
// warehouse floor seen from a cart, with a stripe whose centreline and
// width are straight lines (optionally bent) in the image. Everything is
// given as fractions of the frame so that a scene can be drawn at any
// size.
type scene struct {
	w, h int
	// Stripe centre at the bottom row and at the top row, as fractions of
	// the width, plus a bend (fraction of the width added at mid-height).
	xBottom, xTop, bend float64
	// Width at the bottom and top rows as fractions of the width.
	wBottom, wTop float64
	// First visible row of the stripe (fraction of the height); above it
	// the stripe is not drawn (a wall or the end of the line).
	top float64
	// Floor and stripe colours (BGR), noise σ in grey levels.
	floor, stripe [3]float64
	noise         float64
	// shade(x, y) in [0, 1] multiplies the light (shadows, dim light);
	// nil means uniform light.
	shade func(x, y float64) float64
	// dash: period and duty as fractions of the height (0: solid).
	dashPeriod, dashDuty float64
	// gap: rows (fractions of the height, [from, to)) where the stripe
	// is missing, as a worn-away stretch of tape (from = to: none).
	gap [2]float64
	// cracks: thin dark lines across the floor, as (x0, y0, x1, y1)
	// fractions, drawn 0.3 % of the width thick.
	cracks [][4]float64
	none   bool // no stripe at all
	// others are further stripes (a branch at a junction, a parallel
	// line), each drawn like the main one in its own colour.
	others []otherLine
	// streaks are ceiling-lamp reflections on a glossy floor: short
	// bright ellipses, elongated along the view, that saturate.
	streaks []streak
	seed    uint64
}

type otherLine struct {
	xBottom, xTop, wBottom, wTop, top float64
	colour                            [3]float64
}

type streak struct {
	x, y, halfW, halfH float64 // fractions of the frame
}

func (s scene) centre(yf float64) float64 {
	// yf: 0 at the top row, 1 at the bottom row.
	return (s.xTop + (s.xBottom-s.xTop)*yf + s.bend*4*yf*(1-yf)) * float64(s.w)
}

func (s scene) width(yf float64) float64 {
	return (s.wTop + (s.wBottom-s.wTop)*yf) * float64(s.w)
}

// draw renders the scene into a new BGR Mat the caller must Close.
func (s scene) draw(t testing.TB) gocv.Mat {
	t.Helper()
	rng := rand.New(rand.NewPCG(s.seed, 7))
	buf := make([]byte, s.w*s.h*3)
	for y := 0; y < s.h; y++ {
		yf := (float64(y) + 0.5) / float64(s.h)
		xc, wd := s.centre(yf), s.width(yf)
		visible := !s.none && yf >= s.top
		if yf >= s.gap[0] && yf < s.gap[1] {
			visible = false
		}
		if visible && s.dashPeriod > 0 {
			ph := math.Mod(yf, s.dashPeriod) / s.dashPeriod
			visible = ph < s.dashDuty
		}
		for x := 0; x < s.w; x++ {
			cov := 0.0
			if visible {
				lo := math.Max(float64(x), xc-wd/2)
				hi := math.Min(float64(x+1), xc+wd/2)
				cov = math.Max(0, hi-lo)
			}
			px := (float64(x) + 0.5) / float64(s.w)
			var ocov float64
			var ocol [3]float64
			for _, o := range s.others {
				if yf < o.top {
					continue
				}
				oc := (o.xTop + (o.xBottom-o.xTop)*yf) * float64(s.w)
				ow := (o.wTop + (o.wBottom-o.wTop)*yf) * float64(s.w)
				lo := math.Max(float64(x), oc-ow/2)
				hi := math.Min(float64(x+1), oc+ow/2)
				if v := math.Max(0, hi-lo); v > ocov {
					ocov, ocol = v, o.colour
				}
			}
			glare := 0.0
			for _, g := range s.streaks {
				dx, dy := (px-g.x)/g.halfW, (yf-g.y)/g.halfH
				if r := dx*dx + dy*dy; r < 1 {
					glare = math.Max(glare, 1-r*r)
				}
			}
			light := 1.0
			if s.shade != nil {
				light = s.shade((float64(x)+0.5)/float64(s.w), yf)
			}
			crack := 0.0
			for _, c := range s.cracks {
				crack = math.Max(crack, lineCoverage(float64(x)+0.5, float64(y)+0.5, c, s.w, s.h))
			}
			n := rng.NormFloat64() * s.noise
			for ch := 0; ch < 3; ch++ {
				v := s.floor[ch]*(1-cov) + s.stripe[ch]*cov
				if ocov > cov {
					v = s.floor[ch]*(1-ocov) + ocol[ch]*ocov
				}
				v *= 1 - 0.6*crack
				v = v*light + n + 400*glare
				buf[(y*s.w+x)*3+ch] = uint8(math.Max(0, math.Min(255, math.Round(v))))
			}
		}
	}
	m, err := gocv.NewMatFromBytes(s.h, s.w, gocv.MatTypeCV8UC3, buf)
	if err != nil {
		t.Fatal(err)
	}
	defer m.Close()
	return m.Clone()
}

func lineCoverage(px, py float64, c [4]float64, w, h int) float64 {
	x0, y0, x1, y1 := c[0]*float64(w), c[1]*float64(h), c[2]*float64(w), c[3]*float64(h)
	dx, dy := x1-x0, y1-y0
	l2 := dx*dx + dy*dy
	u := math.Max(0, math.Min(1, ((px-x0)*dx+(py-y0)*dy)/l2))
	d := math.Hypot(px-(x0+u*dx), py-(y0+u*dy))
	half := math.Max(0.5, 0.0015*float64(w))
	return math.Max(0, math.Min(1, half+0.5-d))
}

// truthAt is the true centre x (pixel-centre convention) at image row y.
func (s scene) truthAt(y float64) float64 {
	return s.centre((y+0.5)/float64(s.h)) - 0.5
}

// truthHeading is the true heading at row y in degrees (vision/doc.go).
func (s scene) truthHeading(y float64) float64 {
	const e = 0.5
	dxdy := (s.truthAt(y+e) - s.truthAt(y-e)) / (2 * e)
	return math.Atan(-dxdy) * 180 / math.Pi
}

// truthWidth is the true width across the stripe at row y.
func (s scene) truthWidth(y float64) float64 {
	return s.width((y+0.5)/float64(s.h)) * math.Cos(s.truthHeading(y)*math.Pi/180)
}

var (
	concrete   = [3]float64{110, 115, 120}
	whiteTape  = [3]float64{215, 220, 225}
	blackTape  = [3]float64{35, 35, 38}
	yellowTape = [3]float64{20, 190, 215}
	paleEpoxy  = [3]float64{170, 180, 175}
)

// baseScene is a plain white stripe on concrete at w×h.
func baseScene(w, h int) scene {
	return scene{
		w: w, h: h,
		xBottom: 0.55, xTop: 0.5, wBottom: 0.08, wTop: 0.02, top: 0.3,
		floor: concrete, stripe: whiteTape, noise: 6, seed: 1,
	}
}
