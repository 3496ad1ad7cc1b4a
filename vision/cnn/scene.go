package cnn

import (
	"fmt"
	"math"
	"math/rand/v2"

	"github.com/hewline/hewline/vision"
	"gocv.io/x/gocv"
)

// Scene is a quick image-plane stand-in for a camera looking down at a
// floor stripe: a mottled floor under a smooth light gradient and a stripe
// whose centreline is a parabola in the image, narrowing towards the top
// as perspective would. It exists to make training data and test frames
// cheaply and with exact labels; the 3-D renderer in capture/synth is the
// scene model of record. All lengths are in pixels of a W×H image.
type Scene struct {
	W, H int
	// Floor and Tape are BGR colours in 0..255.
	Floor, Tape [3]float64
	// Texture is the amplitude of the floor's mottling in grey levels,
	// TextureCell the size of its blobs.
	Texture, TextureCell float64
	// Present is false for a bare floor.
	Present bool
	// The centreline is x(t) = X0 + Slope·t·H + Curve·t²·H for
	// t = (H − y)/H, from t = 0 at the bottom edge to t = Length.
	X0, Slope, Curve float64
	Length           float64
	// WidthNear and WidthFar are the stripe's width at the bottom edge and
	// at the top edge.
	WidthNear, WidthFar float64
	// LightX, LightY tilt the brightness linearly across the image (a
	// share of Gain per image width or height); Gain scales everything.
	LightX, LightY, Gain float64
	// Seed drives the texture.
	Seed uint64
}

// RandomScene draws a scene of size w×h from rng: floor and tape colours,
// texture, stripe position (partly outside the image now and then),
// heading, curve, length, width and light, widely spread so that a network
// trained on them does not learn one look. About 8 % have no stripe.
func RandomScene(rng *rand.Rand, w, h int) Scene {
	W, H := float64(w), float64(h)
	u := func(a, b float64) float64 { return a + (b-a)*rng.Float64() }
	grey := u(40, 190)
	floor := [3]float64{grey * u(0.8, 1.2), grey * u(0.85, 1.15), grey * u(0.8, 1.2)}
	tapes := [][3]float64{{20, 200, 235}, {230, 230, 225}, {190, 80, 20}, {60, 150, 30}, {30, 30, 35}, {40, 90, 220}}
	tape := tapes[rng.IntN(len(tapes))]
	k := u(0.7, 1.1)
	for i := range tape {
		tape[i] = math.Min(255, tape[i]*k+u(-15, 15))
	}
	// The network reads grey levels, so a tape of the floor's own
	// brightness is invisible to it: keep at least 30 levels between them
	// (at full light) by moving the floor away from the tape.
	if d := luma(tape) - luma(floor); math.Abs(d) < 30 {
		shift := 30 + d // floor brighter than a dark tape (d < 0)
		if d >= 0 {
			shift = -(30 - d) // floor darker than a bright tape
		}
		for i := range floor {
			floor[i] = math.Max(0, math.Min(255, floor[i]+shift))
		}
	}
	sc := Scene{
		W: w, H: h, Floor: floor, Tape: tape,
		Texture: u(0, 30), TextureCell: u(2, 12) * W / 160,
		Present: rng.Float64() > 0.08,
		X0:      u(-0.1, 1.1) * W,
		Slope:   math.Tan(u(-40, 40)*math.Pi/180) * W / H * 0.75,
		Curve:   u(-0.4, 0.4) * W / H,
		Length:  1,
		LightX:  u(-0.5, 0.5), LightY: u(-0.5, 0.5), Gain: u(0.35, 1.3),
		Seed: rng.Uint64(),
	}
	if rng.Float64() < 0.25 {
		sc.Length = u(0.2, 1)
	}
	sc.WidthNear = u(0.03, 0.14) * W
	sc.WidthFar = sc.WidthNear * u(0.35, 1)
	return sc
}

// CentreX returns the centreline's x at row y and whether the stripe
// reaches that row.
func (sc Scene) CentreX(y float64) (float64, bool) {
	t := (float64(sc.H) - y) / float64(sc.H)
	if !sc.Present || t < 0 || t > sc.Length {
		return 0, false
	}
	H := float64(sc.H)
	return sc.X0 + sc.Slope*t*H + sc.Curve*t*t*H, true
}

func (sc Scene) width(y float64) float64 {
	t := (float64(sc.H) - y) / float64(sc.H)
	return sc.WidthNear + (sc.WidthFar-sc.WidthNear)*t
}

// Truth returns the centreline from the bottom edge upwards, one point
// every 2 rows while it stays within a stripe width of the image, or nil
// when there is no stripe.
func (sc Scene) Truth() []vision.Point {
	var p []vision.Point
	for y := float64(sc.H); y >= 0; y -= 2 {
		x, ok := sc.CentreX(y)
		if !ok {
			continue
		}
		if x < -sc.width(y) || x > float64(sc.W)+sc.width(y) {
			continue
		}
		p = append(p, vision.Point{X: x, Y: y})
	}
	return p
}

// Render draws the scene into dst as an 8-bit BGR image of W×H,
// reallocating dst when its size or type differ.
func (sc Scene) Render(dst *gocv.Mat) error {
	if sc.W <= 0 || sc.H <= 0 || sc.W > 8192 || sc.H > 8192 {
		return fmt.Errorf("cnn: scene size %dx%d", sc.W, sc.H)
	}
	if dst.Rows() != sc.H || dst.Cols() != sc.W || dst.Type() != gocv.MatTypeCV8UC3 {
		dst.Close()
		*dst = gocv.NewMatWithSize(sc.H, sc.W, gocv.MatTypeCV8UC3)
	}
	px, err := dst.DataPtrUint8()
	if err != nil {
		return fmt.Errorf("cnn: render: %w", err)
	}
	W, H := float64(sc.W), float64(sc.H)
	cell := math.Max(sc.TextureCell, 1)
	for y := 0; y < sc.H; y++ {
		fy := float64(y) + 0.5
		cx, on := sc.CentreX(fy)
		half := sc.width(fy) / 2
		for x := 0; x < sc.W; x++ {
			fx := float64(x) + 0.5
			tex := sc.Texture * (valueNoise(sc.Seed, fx/cell, fy/cell) + 0.5*valueNoise(sc.Seed+1, fx/cell*3, fy/cell*3))
			cover := 0.0
			if on {
				cover = math.Max(0, math.Min(1, half-math.Abs(fx-cx)+0.5))
			}
			light := sc.Gain * (1 + sc.LightX*(fx/W-0.5) + sc.LightY*(fy/H-0.5))
			for c := 0; c < 3; c++ {
				v := (sc.Floor[c]+tex)*(1-cover) + (sc.Tape[c]+0.3*tex)*cover
				px[(y*sc.W+x)*3+c] = clampByte(v * light)
			}
		}
	}
	return nil
}

// luma is the grey level OpenCV's BGR-to-grey conversion gives (ITU-R
// BT.601 weights).
func luma(c [3]float64) float64 { return 0.114*c[0] + 0.587*c[1] + 0.299*c[2] }

func clampByte(v float64) uint8 {
	switch {
	case v <= 0:
		return 0
	case v >= 255:
		return 255
	}
	return uint8(v + 0.5)
}

// valueNoise is smooth noise in [−1, 1]: a hashed value at each integer
// lattice point, blended with a smoothstep.
func valueNoise(seed uint64, x, y float64) float64 {
	x0, y0 := math.Floor(x), math.Floor(y)
	tx, ty := x-x0, y-y0
	tx, ty = tx*tx*(3-2*tx), ty*ty*(3-2*ty)
	at := func(i, j float64) float64 {
		h := mix(seed ^ uint64(int64(i))*0x9e3779b97f4a7c15 ^ uint64(int64(j))*0xc2b2ae3d27d4eb4f)
		return float64(h>>11)/float64(1<<53)*2 - 1
	}
	a := at(x0, y0) + (at(x0+1, y0)-at(x0, y0))*tx
	b := at(x0, y0+1) + (at(x0+1, y0+1)-at(x0, y0+1))*tx
	return a + (b-a)*ty
}

// mix is the splitmix64 finaliser.
func mix(z uint64) uint64 {
	z += 0x9e3779b97f4a7c15
	z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9
	z = (z ^ (z >> 27)) * 0x94d049bb133111eb
	return z ^ (z >> 31)
}
