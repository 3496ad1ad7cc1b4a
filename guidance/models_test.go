package guidance_test

import (
	"math"
	"testing"
	"time"

	"github.com/hewline/hewline/guidance"
	"github.com/hewline/hewline/guidance/guidancetest"
)

// hardWeave is a cart weaving hard at 2 m/s over a 3 m wavelength, seen by
// a camera whose stripe image swings ±160 px at 640 px: 1.5 s per cycle,
// peak image acceleration 160·(2π/1.5)² ≈ 2800 px/s², fourteen times the
// default OffsetAccel. (The built-in rolling-shutter scene's motion.)
func hardWeave(seed uint64) guidancetest.Scene {
	w := 2 * math.Pi / 1.5
	return guidancetest.Scene{
		FPS: 30, Length: 10 * time.Second, Seed: seed,
		Offset:  func(t time.Duration) float64 { return 160 * math.Sin(w*t.Seconds()) },
		Heading: func(t time.Duration) float64 { return 18 * math.Cos(w*t.Seconds()) },
		NoisePx: 1.5, NoiseDeg: 1,
	}
}

// singleModelGated runs the scene through one constant-velocity filter pair
// with the default settings and the tracker's 99 % gate (accepting only
// what passes, as a tracker without the model bank would) and returns the
// fraction of frames it refuses. The control for TestHardWeaveIsFollowed.
func singleModelGated(s guidancetest.Scene) float64 {
	cfg := guidance.DefaultConfig()
	gate := guidance.ChiSquareQuantile(cfg.GateProbability, 2)
	off := guidance.NewKalmanCV(cfg.OffsetAccel, cfg.OffsetNoisePx)
	head := guidance.NewKalmanCV(cfg.HeadingAccel, cfg.HeadingNoiseDeg)
	frames := s.Frames()
	off.Init(frames[0].M.OffsetPx, cfg.OffsetRateSigma)
	head.Init(frames[0].M.HeadingDeg, cfg.HeadingRateSigma)
	last, gated := frames[0].T, 0
	for _, f := range frames[1:] {
		dt := (f.T - last).Seconds()
		last = f.T
		off.Predict(dt)
		head.Predict(dt)
		no, so := off.Innovation(f.M.OffsetPx)
		nh, sh := head.Innovation(f.M.HeadingDeg)
		if no*no/so+nh*nh/sh > gate {
			gated++
			continue
		}
		off.Update(f.M.OffsetPx)
		head.Update(f.M.HeadingDeg)
	}
	return float64(gated) / float64(len(frames)-1)
}

func TestHardWeaveIsFollowed(t *testing.T) {
	s := hardWeave(3)
	// The control: one filter tuned for smooth running refuses a large
	// share of these (correct) measurements at the reversals.
	if r := singleModelGated(s); r < 0.10 {
		t.Fatalf("control: a single default filter refuses only %.1f %% of the hard weave; the scene no longer tests manoeuvres", 100*r)
	} else {
		t.Logf("control: single default filter refuses %.1f %%", 100*r)
	}
	tr := newTracker(t, guidance.DefaultConfig())
	gated, n, worst := 0, 0, 0.0
	for _, f := range s.Frames() {
		e := tr.Update(f.T, f.M)
		if f.T < time.Second { // acquisition and the models settling
			continue
		}
		n++
		if e.Gated {
			gated++
		}
		if !e.Tracking {
			t.Fatalf("t=%v: not tracking (%s)", f.T, e.State)
		}
		worst = math.Max(worst, math.Abs(e.OffsetPx-s.Offset(f.T)))
	}
	rate := float64(gated) / float64(n)
	if rate > 0.02 {
		t.Errorf("tracker refused %.1f %% of the hard weave's measurements (%d of %d), want ≤ 2 %%", 100*rate, gated, n)
	}
	// 1.5 px measurement noise; a filter following the swing stays within
	// a few pixels (a lagging one is tens of pixels behind at reversals).
	if worst > 10 {
		t.Errorf("estimate up to %.1f px from the true offset, want ≤ 10", worst)
	}
	t.Logf("refused %.1f %%, worst error %.1f px", 100*rate, worst)
}

func TestGateTightensAgainAfterAManoeuvre(t *testing.T) {
	// During a hard weave the gate is the wide one of a high-noise model:
	// a measurement 3.5 calm sigmas off the line is taken. After a smooth
	// run the narrow gate of the smooth-running model is back, so the same
	// jump (a tyre mark beside the stripe) is refused again.
	ref := newTracker(t, guidance.DefaultConfig())
	now := lockOn(t, ref, 40, 0, 3*time.Second)
	_, _, sigCalm, _, _ := ref.Predict(now)
	jump := 3.5 * sigCalm

	// Probe a copy of the tracker at every frame of the weave after the
	// first 2 s with measurements jump px either side of the true line.
	weave := hardWeave(5)
	during := newTracker(t, guidance.DefaultConfig())
	var last time.Duration
	taken, probes := 0, 0
	frames := weave.Frames()
	for i, f := range frames {
		during.Update(f.T, f.M)
		last = f.T
		if f.T < 2*time.Second || i+1 == len(frames) {
			continue
		}
		nt := frames[i+1].T
		both := true
		for _, sign := range []float64{1, -1} {
			probe := *during
			if e := probe.Update(nt, good(weave.Offset(nt)+sign*jump, weave.Heading(nt))); e.Gated {
				both = false
			}
		}
		if both {
			taken++
		}
		probes++
	}
	if share := float64(taken) / float64(probes); share < 0.5 {
		t.Errorf("during the weave measurements %.1f px either side were both taken in %.0f %% of frames, want ≥ 50 %% (a single smooth-running model: 10 %%): the gate did not widen", jump, 100*share)
	} else {
		t.Logf("during the weave measurements %.1f px either side were both taken in %.0f %% of frames", jump, 100*share)
	}

	after := newTracker(t, guidance.DefaultConfig())
	for _, f := range weave.Frames() {
		after.Update(f.T, f.M)
	}
	smooth := guidancetest.Scene{FPS: 30, Length: 3 * time.Second, Seed: 7,
		Offset: func(time.Duration) float64 { return 40 }, NoisePx: 1.5, NoiseDeg: 1}
	for _, f := range smooth.Frames() {
		now = last + 33*ms + f.T
		after.Update(now, f.M)
	}
	now += 33 * ms
	if e := after.Update(now, good(40+jump, 0)); !e.Gated {
		t.Errorf("after 3 s of smooth running a jump of %.1f px was accepted: %+v", jump, e)
	}
}

func TestBlinkDuringAManoeuvreIsBridged(t *testing.T) {
	// The hard weave with the detector blinking (one frame with nothing)
	// at every reversal, where the stripe's image accelerates hardest. The
	// smooth-running model lags there by tens of pixels; the frame after
	// the blink must still be taken, on the prediction of the model in use.
	s := hardWeave(11)
	for k := 0; k < 13; k++ {
		at := time.Duration((0.375 + 0.75*float64(k)) * float64(time.Second))
		s.Missing = append(s.Missing, guidancetest.Span{From: at, To: at + 20*time.Millisecond})
	}
	tr := newTracker(t, guidance.DefaultConfig())
	gated, afterBlink, n := 0, 0, 0
	prevMissing := false
	for _, f := range s.Frames() {
		e := tr.Update(f.T, f.M)
		if f.T >= time.Second {
			n++
			if e.Gated {
				gated++
				if prevMissing {
					afterBlink++
				}
			}
			if !e.Tracking {
				t.Fatalf("t=%v: not tracking (%s)", f.T, e.State)
			}
		}
		prevMissing = !f.M.Valid
	}
	if afterBlink > 0 || gated > n/50 {
		t.Errorf("refused %d measurements of %d (%d right after a blink), want none after a blink and ≤ 2 %%", gated, n, afterBlink)
	}
	t.Logf("refused %d of %d, %d right after a blink", gated, n, afterBlink)
}

func TestBlinkInCalmRunningKeepsTheNarrowGate(t *testing.T) {
	// After a smooth run, one blank frame and then a measurement 3.5 calm
	// sigmas beside the line (a tyre mark): refused, as while holding.
	for _, sign := range []float64{1, -1} {
		tr := newTracker(t, guidance.DefaultConfig())
		now := lockOn(t, tr, 40, 0, 3*time.Second)
		_, _, sig, _, _ := tr.Predict(now)
		now += 33 * ms
		tr.Update(now, guidance.Measurement{})
		now += 33 * ms
		if e := tr.Update(now, good(40+sign*3.5*sig, 0)); !e.Gated {
			t.Errorf("a jump of %+.1f px after a blink in calm running was taken: %+v", sign*3.5*sig, e)
		}
	}
}
