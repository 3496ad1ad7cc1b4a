package guidancetest

import (
	"math"
	"math/rand/v2"
	"time"

	"github.com/hewline/hewline/guidance"
)

var _ guidance.Clock = (*FakeClock)(nil)

// Span is a time interval [From, To).
type Span struct{ From, To time.Duration }

func (s Span) contains(t time.Duration) bool { return t >= s.From && t < s.To }

// Frame is one synthetic frame: its timestamp and what a detector reported.
type Frame struct {
	T time.Duration
	M guidance.Measurement
}

// Scene describes a synthetic measurement sequence: a stripe whose true
// offset and heading follow Offset and Heading, seen by a noisy detector at
// a nominal frame rate. The data are invented for tests.
type Scene struct {
	// FPS is the nominal frame rate; Length the clip length.
	FPS    float64
	Length time.Duration
	// Jitter: each timestamp is moved by a uniform amount in
	// [-Jitter, +Jitter] (timestamps stay increasing if Jitter is below
	// half the frame interval).
	Jitter time.Duration
	// Seed makes noise and jitter repeatable.
	Seed uint64
	// Offset (px) and Heading (deg) of the true stripe at time t; nil
	// means 0.
	Offset, Heading func(t time.Duration) float64
	// NoisePx and NoiseDeg: 1-sigma Gaussian detector noise.
	NoisePx, NoiseDeg float64
	// Confidence at time t; nil means 0.9.
	Confidence func(t time.Duration) float64
	// Missing: spans where the detector finds nothing (Valid false).
	Missing []Span
	// Dropped: spans where no frame arrives at all.
	Dropped []Span
}

// Frames returns the scene's frames in time order.
func (s Scene) Frames() []Frame {
	rng := rand.New(rand.NewPCG(s.Seed, 0x68657720))
	interval := time.Duration(float64(time.Second) / s.FPS)
	var out []Frame
	for i := 0; ; i++ {
		t := time.Duration(i) * interval
		if t >= s.Length {
			break
		}
		if s.Jitter > 0 {
			t += time.Duration((rng.Float64()*2 - 1) * float64(s.Jitter))
			if t < 0 {
				t = 0
			}
		}
		if inAny(s.Dropped, t) {
			continue
		}
		f := Frame{T: t}
		if !inAny(s.Missing, t) {
			f.M = guidance.Measurement{
				Valid:      true,
				OffsetPx:   eval(s.Offset, t) + rng.NormFloat64()*s.NoisePx,
				HeadingDeg: eval(s.Heading, t) + rng.NormFloat64()*s.NoiseDeg,
				Confidence: 0.9,
			}
			if s.Confidence != nil {
				f.M.Confidence = math.Min(1, math.Max(0, s.Confidence(t)))
			}
		}
		out = append(out, f)
	}
	return out
}

func eval(f func(time.Duration) float64, t time.Duration) float64 {
	if f == nil {
		return 0
	}
	return f(t)
}

func inAny(spans []Span, t time.Duration) bool {
	for _, s := range spans {
		if s.contains(t) {
			return true
		}
	}
	return false
}
