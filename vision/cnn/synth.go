package cnn

import (
	"errors"
	"fmt"
	"image"
	"io"
	"math/rand/v2"

	"github.com/hewline/hewline/capture/synth"
	"github.com/hewline/hewline/vision"
	"gocv.io/x/gocv"
)

// SynthSamples renders about n frames of the renderer's built-in scenarios
// (capture/synth) at 160×120, each clip of 10 frames with its own
// randomised look: floor colour and texture, tape colour and width,
// exposure, sensor noise, the stretch of route and the cart's weave. Half
// of the frames are then degraded (Degrade). Labels come from the
// renderer's truth centreline.
func SynthSamples(a Arch, n int, seed uint64) ([]Sample, error) {
	rng := rand.New(rand.NewPCG(seed, 0x73796e7468))
	names := synth.Names()
	if len(names) == 0 {
		return nil, errors.New("cnn: the renderer has no scenarios")
	}
	tapes := []synth.RGB{synth.Yellow, synth.White, synth.Blue, synth.Green, synth.Black}
	u := func(lo, hi float64) float64 { return lo + (hi-lo)*rng.Float64() }
	img := gocv.NewMat()
	defer img.Close()
	pre := NewPreprocessor(a)
	defer pre.Close()
	roi := image.Rect(0, 0, trainW, trainH)
	out := make([]Sample, 0, n)
	const perClip = 10
	for c := 0; len(out) < n; c++ {
		sc, err := synth.Lookup(names[c%len(names)])
		if err != nil {
			return nil, err
		}
		sc = sc.Resized(trainW, trainH)
		sc.Seed = rng.Int64()
		g := u(0.15, 0.75)
		sc.Floor.Colour = synth.RGB{R: g * u(0.85, 1.15), G: g * u(0.85, 1.15), B: g * u(0.85, 1.15)}
		sc.Floor.Texture = u(0, 0.3)
		sc.Stripe.Colour = tapes[rng.IntN(len(tapes))]
		sc.Stripe.WidthM = u(0.04, 0.12)
		sc.Light.Gain = u(0.4, 1.3)
		sc.Light.NoiseSD = u(0, 6)
		sc.Motion.StartM = u(0, 12)
		sc.Motion.WeaveAmpM = u(0, 0.25)
		sc.Motion.SpeedMps = u(0.5, 2)
		sc.Frames = perClip
		sc.FPS = 3 // frames a third of a second apart
		r, err := synth.New(sc)
		if err != nil {
			return nil, fmt.Errorf("cnn: synth scenario %s: %w", sc.Name, err)
		}
		for len(out) < n {
			if _, err := r.Read(&img); errors.Is(err, io.EOF) {
				break
			} else if err != nil {
				r.Close()
				return nil, err
			}
			tf := r.Truth()
			pts := make([]vision.Point, len(tf.Points))
			for i, p := range tf.Points {
				pts[i] = vision.Point{X: p[0], Y: p[1]}
			}
			if rng.Float64() < 0.5 {
				if err := Degrade(&img, pts, tf.WidthPx, 0.3+0.7*rng.Float64(), rng); err != nil {
					r.Close()
					return nil, err
				}
			}
			s := Sample{In: make([]float32, a.InW*a.InH), Labels: Labels(a, roi, pts)}
			if err := pre.Run(img, roi, s.In); err != nil {
				r.Close()
				return nil, err
			}
			out = append(out, s)
		}
		r.Close()
	}
	return out, nil
}
