package cnn

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"

	"github.com/hewline/hewline/vision"
	"gocv.io/x/gocv"
)

// The degradations below make a clean frame hard to read, the way a site
// does: moving shadows, glare from skylights or lamps, worn tape, motion or
// focus blur, sensor noise and dim light. Each works in place on an 8-bit
// BGR Mat and draws its randomness from the rng it is given, so a training
// run is reproducible. They are used on rendered scenes and on site frames
// labelled by the classical detector.

var errNotBGR = errors.New("cnn: degrade needs a non-empty continuous 8-bit BGR Mat")

func bgrPixels(img *gocv.Mat) ([]uint8, int, int, error) {
	if img.Empty() || img.Type() != gocv.MatTypeCV8UC3 || !img.IsContinuous() {
		return nil, 0, 0, errNotBGR
	}
	p, err := img.DataPtrUint8()
	return p, img.Cols(), img.Rows(), err
}

// Shadow darkens a band between two parallel lines crossing the image at
// a random angle (the shadow of a rack upright or a person), or one side
// of a single line, by a factor in [0.25, 0.75], with soft edges.
func Shadow(img *gocv.Mat, rng *rand.Rand) error {
	px, w, h, err := bgrPixels(img)
	if err != nil {
		return err
	}
	ang := rng.Float64() * math.Pi
	nx, ny := math.Cos(ang), math.Sin(ang)
	diag := math.Hypot(float64(w), float64(h))
	c := (rng.Float64() - 0.5) * diag // distance of the band's centre from the image centre
	half := (0.05 + 0.3*rng.Float64()) * diag
	if rng.Float64() < 0.3 {
		half = 2 * diag // one side of a line
	}
	soft := 1 + 0.05*diag*rng.Float64()
	dark := 0.25 + 0.5*rng.Float64()
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			d := math.Abs((float64(x)-float64(w)/2)*nx + (float64(y)-float64(h)/2)*ny - c)
			in := math.Max(0, math.Min(1, (half-d)/soft+0.5))
			if in == 0 {
				continue
			}
			k := 1 - in*(1-dark)
			i := (y*w + x) * 3
			for ch := 0; ch < 3; ch++ {
				px[i+ch] = clampByte(float64(px[i+ch]) * k)
			}
		}
	}
	return nil
}

// Glare adds a bright blob (the reflection of a lamp or skylight) of
// random size and strength, saturating towards white.
func Glare(img *gocv.Mat, rng *rand.Rand) error {
	px, w, h, err := bgrPixels(img)
	if err != nil {
		return err
	}
	cx, cy := rng.Float64()*float64(w), rng.Float64()*float64(h)
	sx := (0.05 + 0.25*rng.Float64()) * float64(w)
	sy := sx * (0.3 + 1.2*rng.Float64())
	amp := 80 + 175*rng.Float64()
	for y := 0; y < h; y++ {
		dy := (float64(y) - cy) / sy
		for x := 0; x < w; x++ {
			dx := (float64(x) - cx) / sx
			g := amp * math.Exp(-(dx*dx+dy*dy)/2)
			if g < 0.5 {
				continue
			}
			i := (y*w + x) * 3
			for ch := 0; ch < 3; ch++ {
				px[i+ch] = clampByte(float64(px[i+ch]) + g)
			}
		}
	}
	return nil
}

// Wear blends blotches along the centreline pts (image pixels) towards
// the image's mean colour, as scuffed or torn tape looks. width is the
// stripe's apparent width; amount in [0, 1] is the share of the line
// covered.
func Wear(img *gocv.Mat, pts []vision.Point, width, amount float64, rng *rand.Rand) error {
	px, w, h, err := bgrPixels(img)
	if err != nil {
		return err
	}
	if len(pts) == 0 || amount <= 0 {
		return nil
	}
	var mean [3]float64
	for i := 0; i < len(px); i += 3 {
		for ch := 0; ch < 3; ch++ {
			mean[ch] += float64(px[i+ch])
		}
	}
	for ch := range mean {
		mean[ch] /= float64(w * h)
	}
	r := math.Max(1, width*(0.5+rng.Float64()))
	n := int(amount * float64(len(pts)))
	for k := 0; k < n; k++ {
		p := pts[rng.IntN(len(pts))]
		bx, by := p.X+(rng.Float64()-0.5)*width, p.Y
		alpha := 0.5 + 0.5*rng.Float64()
		for y := max(0, int(by-r)); y < min(h, int(by+r)+1); y++ {
			for x := max(0, int(bx-r)); x < min(w, int(bx+r)+1); x++ {
				if math.Hypot(float64(x)-bx, float64(y)-by) > r {
					continue
				}
				i := (y*w + x) * 3
				for ch := 0; ch < 3; ch++ {
					px[i+ch] = clampByte(float64(px[i+ch])*(1-alpha) + mean[ch]*alpha)
				}
			}
		}
	}
	return nil
}

// Blur applies a Gaussian blur of standard deviation sigma pixels
// (kernel 2·⌈3σ⌉+1); sigma ≤ 0 does nothing.
func Blur(img *gocv.Mat, sigma float64) error {
	if _, _, _, err := bgrPixels(img); err != nil {
		return err
	}
	if sigma <= 0 {
		return nil
	}
	if sigma > 50 {
		return fmt.Errorf("cnn: blur sigma %g too large", sigma)
	}
	k := 2*int(math.Ceil(3*sigma)) + 1
	gocv.GaussianBlur(*img, img, imagePt(k, k), sigma, sigma, gocv.BorderReflect101)
	return nil
}

// Noise adds Gaussian noise of standard deviation sd grey levels to every
// channel.
func Noise(img *gocv.Mat, sd float64, rng *rand.Rand) error {
	px, _, _, err := bgrPixels(img)
	if err != nil {
		return err
	}
	for i := range px {
		px[i] = clampByte(float64(px[i]) + rng.NormFloat64()*sd)
	}
	return nil
}

// Gain scales every channel by g (g < 1 for dim light).
func Gain(img *gocv.Mat, g float64) error {
	px, _, _, err := bgrPixels(img)
	if err != nil {
		return err
	}
	for i := range px {
		px[i] = clampByte(float64(px[i]) * g)
	}
	return nil
}

// Degrade applies a random mix of the degradations above: each with a
// probability that grows with strength in [0, 1]. pts and width describe
// the stripe for Wear (pts may be nil).
func Degrade(img *gocv.Mat, pts []vision.Point, width, strength float64, rng *rand.Rand) error {
	p := func(base float64) bool { return rng.Float64() < base*strength }
	steps := []struct {
		prob float64
		do   func() error
	}{
		{0.5, func() error { return Wear(img, pts, width, 0.1+0.4*rng.Float64(), rng) }},
		{0.5, func() error { return Shadow(img, rng) }},
		{0.2, func() error { return Shadow(img, rng) }},
		{0.35, func() error { return Glare(img, rng) }},
		{0.3, func() error { return Gain(img, 0.15+0.6*rng.Float64()) }},
		{0.4, func() error { return Blur(img, 0.5+2*rng.Float64()*float64(img.Cols())/160) }},
		{0.6, func() error { return Noise(img, 2+14*rng.Float64(), rng) }},
	}
	for _, s := range steps {
		if p(s.prob) {
			if err := s.do(); err != nil {
				return err
			}
		}
	}
	return nil
}
