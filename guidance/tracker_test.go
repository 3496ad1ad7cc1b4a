package guidance_test

import (
	"math"
	"strings"
	"testing"
	"time"

	"github.com/hewline/hewline/guidance"
	"github.com/hewline/hewline/guidance/guidancetest"
)

const ms = time.Millisecond

func newTracker(t *testing.T, cfg guidance.Config) *guidance.Tracker {
	t.Helper()
	tr, err := guidance.NewTracker(cfg)
	if err != nil {
		t.Fatal(err)
	}
	return tr
}

func good(off, head float64) guidance.Measurement {
	return guidance.Measurement{Valid: true, OffsetPx: off, HeadingDeg: head, Confidence: 0.9}
}

// lockOn feeds a steady line at 30 fps from 0 for d and returns the time of
// the next frame. It fails the test if the tracker is not Holding.
func lockOn(t *testing.T, tr *guidance.Tracker, off, head float64, d time.Duration) time.Duration {
	t.Helper()
	var now time.Duration
	var e guidance.Estimate
	for ; now < d; now += 33 * ms {
		e = tr.Update(now, good(off, head))
	}
	if e.State != guidance.Holding || !e.Tracking || e.Alarm {
		t.Fatalf("after %v of a steady line: %+v, want holding", d, e)
	}
	return now
}

func TestStateNames(t *testing.T) {
	want := map[guidance.State]string{
		guidance.Seeking: "seeking", guidance.Holding: "holding", guidance.Coasting: "coasting",
		guidance.Lost: "lost", guidance.Regaining: "regaining", guidance.State(99): "state(99)",
	}
	for s, name := range want {
		if s.String() != name {
			t.Errorf("State(%d).String() = %q, want %q", int(s), s.String(), name)
		}
	}
}

func TestConfigValidate(t *testing.T) {
	if err := guidance.DefaultConfig().Validate(); err != nil {
		t.Fatalf("default config: %v", err)
	}
	tests := map[string]struct {
		change func(*guidance.Config)
		field  string
	}{
		"zero fail-safe":       {func(c *guidance.Config) { c.FailSafeAfter = 0 }, "fail_safe_after"},
		"negative reacquire":   {func(c *guidance.Config) { c.ReacquireFor = -ms }, "reacquire_for"},
		"zero frame gap":       {func(c *guidance.Config) { c.MaxFrameGap = 0 }, "max_frame_gap"},
		"confidence above 1":   {func(c *guidance.Config) { c.MinConfidence = 1.2 }, "min_confidence"},
		"hold above min":       {func(c *guidance.Config) { c.HoldConfidence = 0.6 }, "hold_confidence"},
		"gate probability 1":   {func(c *guidance.Config) { c.GateProbability = 1 }, "gate_probability"},
		"no step frames":       {func(c *guidance.Config) { c.StepConfirmFrames = 0 }, "step_confirm_frames"},
		"NaN offset noise":     {func(c *guidance.Config) { c.OffsetNoisePx = math.NaN() }, "offset_noise_px"},
		"zero heading process": {func(c *guidance.Config) { c.HeadingAccel = 0 }, "heading_accel"},
	}
	for name, tc := range tests {
		t.Run(name, func(t *testing.T) {
			cfg := guidance.DefaultConfig()
			tc.change(&cfg)
			err := cfg.Validate()
			if err == nil || !strings.Contains(err.Error(), tc.field) || strings.Contains(err.Error(), "\n") {
				t.Fatalf("Validate() = %v, want a one-line error naming %s", err, tc.field)
			}
			if _, err := guidance.NewTracker(cfg); err == nil {
				t.Fatal("NewTracker accepted a bad config")
			}
		})
	}
}

func TestGateRejectsOutlierAndCoasts(t *testing.T) {
	tr := newTracker(t, guidance.DefaultConfig())
	now := lockOn(t, tr, 20, 3, time.Second)
	// 10 sigma of the innovation: the filter's own predicted spread.
	_, _, sigOff, _, ok := tr.Predict(now)
	if !ok {
		t.Fatal("Predict not ok while holding")
	}
	e := tr.Update(now, good(20+10*sigOff, 3))
	if !e.Gated || e.State != guidance.Coasting || !e.Tracking || e.Alarm {
		t.Fatalf("10-sigma outlier: %+v, want gated, coasting, still tracking", e)
	}
	if math.Abs(e.OffsetPx-20) > 1 {
		t.Errorf("outlier moved the estimate to %.2f px, want ≈ 20", e.OffsetPx)
	}
	// Back on the line: the track resumes (Holding after two frames).
	var states []guidance.State
	for i := 0; i < 3; i++ {
		now += 33 * ms
		e = tr.Update(now, good(20, 3))
		if e.Gated {
			t.Fatalf("frame %d after the outlier gated: %+v", i, e)
		}
		states = append(states, e.State)
	}
	if states[len(states)-1] != guidance.Holding {
		t.Errorf("states after the outlier %v, want holding at the end", states)
	}
}

func TestGateReacquiresGenuineStep(t *testing.T) {
	// The vehicle really moved: the offset jumps by 80 px and stays.
	// The documented behaviour: StepConfirmFrames consecutive, mutually
	// consistent gated measurements re-lock the track onto the new line.
	for name, frames := range map[string]int{"confirm 1": 1, "confirm 3 (default)": 3, "confirm 5": 5} {
		t.Run(name, func(t *testing.T) {
			cfg := guidance.DefaultConfig()
			cfg.StepConfirmFrames = frames
			tr := newTracker(t, cfg)
			now := lockOn(t, tr, 0, 0, time.Second)
			for i := 1; i <= frames; i++ {
				e := tr.Update(now, good(80, 2))
				now += 33 * ms
				if e.Alarm || !e.Tracking {
					t.Fatalf("frame %d of the step: %+v, must stay tracking (no alarm)", i, e)
				}
				if i < frames {
					if !e.Gated || e.State != guidance.Coasting {
						t.Fatalf("frame %d of %d: %+v, want gated coasting", i, frames, e)
					}
					continue
				}
				if e.Gated || e.State != guidance.Holding || math.Abs(e.OffsetPx-80) > 1 {
					t.Fatalf("frame %d (confirming): %+v, want holding at ≈ 80 px", i, e)
				}
				if !strings.Contains(e.Reason, "line moved") {
					t.Errorf("Reason %q does not say the line moved", e.Reason)
				}
			}
		})
	}
}

// TestGateStepAcrossAnUnusableFrame: the measurements of a step may hold
// one unusable frame (too unsure to use) between them, as an acquisition
// run may; two in a row start the count again. The pattern is that of
// fisheye-tight at 640×480, frames 236–239 (README scores): after a fast
// sweep stops, the detector rates the moved line below the hold
// confidence in every other frame.
func TestGateStepAcrossAnUnusableFrame(t *testing.T) {
	unsure := good(80, 2)
	unsure.Confidence = 0.1
	tests := map[string]struct {
		frames   []guidance.Measurement
		relocked bool // at the last frame
	}{
		"three agreeing, one unusable between":    {[]guidance.Measurement{good(80, 2), unsure, good(80, 2), good(80, 2)}, true},
		"three agreeing, unusable between each":   {[]guidance.Measurement{good(80, 2), unsure, good(80, 2), unsure, good(80, 2)}, true},
		"two unusable in a row restart the count": {[]guidance.Measurement{good(80, 2), good(80, 2), unsure, unsure, good(80, 2)}, false},
		"no line in between counts as unusable":   {[]guidance.Measurement{good(80, 2), {}, {}, good(80, 2), good(80, 2)}, false},
	}
	for name, tc := range tests {
		t.Run(name, func(t *testing.T) {
			tr := newTracker(t, guidance.DefaultConfig())
			now := lockOn(t, tr, 0, 0, time.Second)
			var e guidance.Estimate
			for i, m := range tc.frames {
				e = tr.Update(now, m)
				now += 33 * ms
				if e.Alarm || !e.Tracking {
					t.Fatalf("frame %d: %+v, must stay tracking (no alarm)", i, e)
				}
				if i < len(tc.frames)-1 && e.State == guidance.Holding {
					t.Fatalf("frame %d of %d: re-locked early: %+v", i, len(tc.frames), e)
				}
			}
			moved := e.State == guidance.Holding && math.Abs(e.OffsetPx-80) < 1
			if moved != tc.relocked {
				t.Errorf("last frame %+v: re-locked %v, want %v", e, moved, tc.relocked)
			}
		})
	}
}

func TestGateAlternatingOutliersNeverRelock(t *testing.T) {
	// Outliers that disagree with each other are not a step: the track
	// stays on the true line.
	tr := newTracker(t, guidance.DefaultConfig())
	now := lockOn(t, tr, 0, 0, time.Second)
	for i := 0; i < 30; i++ {
		m := good(0, 0)
		if i%2 == 0 {
			m.OffsetPx = 100 * float64(1-2*(i/2%2)) // +100, −100, +100 ...
		}
		e := tr.Update(now, m)
		now += 33 * ms
		if math.Abs(e.OffsetPx) > 5 || !e.Tracking {
			t.Fatalf("frame %d: %+v, want tracking near 0", i, e)
		}
	}
}

// alarmRun summarises a run of the tracker over a scene.
type alarmRun struct {
	firstAlarm, alarmOff time.Duration // -1 when it did not happen
	alarmBefore          bool          // alarm at any time before the loss
}

func TestFailSafeTiming(t *testing.T) {
	// Line visible 0–2 s, gone 2–4 s (detector finds nothing), visible
	// again 4–6 s. The alarm must come on no earlier than FailSafeAfter
	// and no later than FailSafeAfter + one frame interval after the last
	// trusted measurement, never while the line is visible, and go off
	// only after ReacquireFor of continuous trusted measurements.
	tests := map[string]struct {
		fps      float64
		jitter   time.Duration
		failSafe time.Duration
		reacq    time.Duration
	}{
		"30 fps default":         {30, 0, 300 * ms, 200 * ms},
		"10 fps default":         {10, 0, 300 * ms, 200 * ms},
		"30 fps jittered 10 ms":  {30, 10 * ms, 300 * ms, 200 * ms},
		"10 fps jittered 30 ms":  {10, 30 * ms, 300 * ms, 200 * ms},
		"30 fps fail-safe 0.1 s": {30, 0, 100 * ms, 200 * ms},
		"30 fps fail-safe 1 s":   {30, 0, time.Second, 500 * ms},
		"15 fps fail-safe 1 s":   {15, 5 * ms, time.Second, 100 * ms},
	}
	for name, tc := range tests {
		t.Run(name, func(t *testing.T) {
			cfg := guidance.DefaultConfig()
			cfg.FailSafeAfter, cfg.ReacquireFor = tc.failSafe, tc.reacq
			tr := newTracker(t, cfg)
			scene := guidancetest.Scene{
				FPS: tc.fps, Length: 6 * time.Second, Jitter: tc.jitter, Seed: 7,
				Offset:  func(t time.Duration) float64 { return 30 * math.Sin(t.Seconds()) },
				Heading: func(t time.Duration) float64 { return 5 * math.Cos(t.Seconds()) },
				NoisePx: 2, NoiseDeg: 0.7,
				Missing: []guidancetest.Span{{From: 2 * time.Second, To: 4 * time.Second}},
			}
			interval := time.Duration(float64(time.Second)/tc.fps) + 2*tc.jitter
			var lastTrusted, firstBack, alarmOn, alarmOff time.Duration = -1, -1, -1, -1
			for _, f := range scene.Frames() {
				e := tr.Update(f.T, f.M)
				visible := f.T < 2*time.Second || f.T >= 4*time.Second
				switch {
				case e.Alarm && alarmOn < 0:
					alarmOn = f.T
					if visible {
						t.Fatalf("alarm at %v while the line is visible: %+v", f.T, e)
					}
				case !e.Alarm && alarmOn >= 0 && alarmOff < 0:
					alarmOff = f.T
				case e.Alarm && alarmOff >= 0:
					t.Fatalf("alarm again at %v after it went off at %v: %+v", f.T, alarmOff, e)
				}
				if f.T < 2*time.Second && e.Tracking {
					lastTrusted = f.T
				}
				if f.T >= 4*time.Second && firstBack < 0 {
					firstBack = f.T
				}
				if e.Tracking && e.Alarm {
					t.Fatalf("tracking and alarm together at %v: %+v", f.T, e)
				}
			}
			if alarmOn < 0 {
				t.Fatal("the alarm never came on")
			}
			if d := alarmOn - lastTrusted; d < tc.failSafe || d > tc.failSafe+interval {
				t.Errorf("alarm %v after the last trusted frame, want in [%v, %v]", d, tc.failSafe, tc.failSafe+interval)
			}
			if alarmOff < 0 {
				t.Fatal("the alarm never went off after the line came back")
			}
			if d := alarmOff - firstBack; d < tc.reacq || d > tc.reacq+interval {
				t.Errorf("alarm off %v after the line came back, want in [%v, %v]", d, tc.reacq, tc.reacq+interval)
			}
		})
	}
}

func TestNoAlarmWhileLineVisible(t *testing.T) {
	// A long clip with the line always visible, noisy, with a dropped
	// frame now and then and one detector miss per second: never an alarm.
	for name, fps := range map[string]float64{"30 fps": 30, "10 fps": 10} {
		t.Run(name, func(t *testing.T) {
			tr := newTracker(t, guidance.DefaultConfig())
			var missing []guidancetest.Span
			for s := time.Second; s < 60*time.Second; s += time.Second {
				missing = append(missing, guidancetest.Span{From: s, To: s + 40*ms})
			}
			scene := guidancetest.Scene{
				FPS: fps, Length: 60 * time.Second, Jitter: 8 * ms, Seed: 3,
				Offset:  func(t time.Duration) float64 { return 60 * math.Sin(0.5*t.Seconds()) },
				Heading: func(t time.Duration) float64 { return 8 * math.Sin(0.3*t.Seconds()) },
				NoisePx: 4, NoiseDeg: 1.5,
				Confidence: func(t time.Duration) float64 { return 0.55 + 0.4*math.Abs(math.Sin(t.Seconds())) },
				Missing:    missing,
				Dropped:    []guidancetest.Span{{From: 10 * time.Second, To: 10*time.Second + 120*ms}},
			}
			tracking := 0
			frames := scene.Frames()
			for _, f := range frames {
				e := tr.Update(f.T, f.M)
				if e.Alarm {
					t.Fatalf("alarm at %v with the line visible: %+v", f.T, e)
				}
				if e.Tracking {
					tracking++
				}
			}
			if tracking < len(frames)-int(fps) {
				t.Errorf("tracking in %d of %d frames", tracking, len(frames))
			}
		})
	}
}

func TestTickRaisesAlarmWhenCameraStalls(t *testing.T) {
	for name, failSafe := range map[string]time.Duration{"0.1 s": 100 * ms, "0.3 s": 300 * ms, "1 s": time.Second} {
		t.Run(name, func(t *testing.T) {
			cfg := guidance.DefaultConfig()
			cfg.FailSafeAfter = failSafe
			tr := newTracker(t, cfg)
			now := lockOn(t, tr, 5, 1, time.Second)
			lastFrame := now - 33*ms
			// The watchdog ticks every 10 ms; no frames arrive.
			for ; ; now += 10 * ms {
				e := tr.Tick(now)
				if e.Alarm {
					if d := now - lastFrame; d < failSafe || d > failSafe+10*ms {
						t.Errorf("alarm %v after the last frame, want in [%v, %v]", d, failSafe, failSafe+10*ms)
					}
					if e.Tracking || !strings.Contains(e.Reason, "camera stalled") {
						t.Errorf("stall estimate %+v, want not tracking, reason naming the stall", e)
					}
					break
				}
				if !e.Tracking {
					t.Fatalf("not tracking but no alarm at %v: %+v", now, e)
				}
				if now-lastFrame > 2*failSafe {
					t.Fatal("no alarm after twice the fail-safe time")
				}
			}
		})
	}
}

func TestTickDuringHealthyStreamKeepsHolding(t *testing.T) {
	tr := newTracker(t, guidance.DefaultConfig())
	now := lockOn(t, tr, 0, 0, time.Second)
	for i := 0; i < 90; i++ {
		e := tr.Update(now, good(0, 0))
		if e2 := tr.Tick(now + 20*ms); e2.State != guidance.Holding || e.State != guidance.Holding {
			t.Fatalf("frame %d: update %v, tick %v, want holding", i, e.State, e2.State)
		}
		now += 33 * ms
	}
}

func TestFaultRaisesAlarmAtOnce(t *testing.T) {
	cfg := guidance.DefaultConfig()
	tr := newTracker(t, cfg)
	now := lockOn(t, tr, 0, 0, time.Second)
	e := tr.Fault(now, "camera gone: /dev/video0 vanished")
	if !e.Alarm || e.Tracking || e.State != guidance.Lost || e.Reason != "camera gone: /dev/video0 vanished" {
		t.Fatalf("after Fault: %+v, want lost with the reason", e)
	}
	if _, _, _, _, ok := tr.Predict(now); ok {
		t.Error("Predict ok after a fault")
	}
	// Frames come back: the alarm stays on for ReacquireFor.
	back := now + 500*ms
	for now = back; ; now += 33 * ms {
		e = tr.Update(now, good(0, 0))
		if !e.Alarm {
			break
		}
		if e.Tracking {
			t.Fatalf("tracking while alarmed: %+v", e)
		}
	}
	if d := now - back; d < cfg.ReacquireFor || d > cfg.ReacquireFor+33*ms {
		t.Errorf("alarm off %v after frames returned, want ReacquireFor %v (+1 frame)", d, cfg.ReacquireFor)
	}
	if e.State != guidance.Holding || !e.Tracking {
		t.Errorf("after reacquiring: %+v, want holding", e)
	}
}

func TestReacquireNeedsASteadyLine(t *testing.T) {
	// After a loss the line must be seen steadily for ReacquireFor: in at
	// least four frames of five, never missing twice in a row. Bursts
	// of two frames on, one off never turn the alarm off; two frames off
	// in a row start the count again.
	tests := map[string]struct {
		missing func(i int) bool
		regain  bool
	}{
		"two on, one off":                 {func(i int) bool { return i%3 == 2 }, false},
		"two off in a row every 6 frames": {func(i int) bool { return i%6 >= 4 }, false},
		// A line read in most frames but blinking out in some (smeared
		// dashes, a flickering lamp).
		"one frame in seven missing": {func(i int) bool { return i%7 == 6 }, true},
		"steady":                     {func(i int) bool { return false }, true},
	}
	for name, tc := range tests {
		t.Run(name, func(t *testing.T) {
			tr := newTracker(t, guidance.DefaultConfig())
			now := lockOn(t, tr, 0, 0, time.Second)
			tr.Fault(now, "test")
			regained := -1
			for i := 0; i < 90 && regained < 0; i++ {
				now += 33 * ms
				m := good(0, 0)
				if tc.missing(i) {
					m = guidance.Measurement{}
				}
				e := tr.Update(now, m)
				if e.Tracking {
					regained = i
				} else if !e.Alarm {
					t.Fatalf("frame %d: %+v, want the alarm on until regained", i, e)
				}
			}
			switch {
			case !tc.regain && regained >= 0:
				t.Fatalf("regained at frame %d, want the alarm on throughout", regained)
			case tc.regain && regained < 0:
				t.Fatalf("never regained in 90 frames")
			case tc.regain && regained > 8: // ReacquireFor 200 ms: frame 6, one blink later 7
				t.Errorf("regained at frame %d, want by frame 8", regained)
			}
		})
	}
}

func TestTimeGoingBackwardsIsAFault(t *testing.T) {
	tr := newTracker(t, guidance.DefaultConfig())
	now := lockOn(t, tr, 0, 0, time.Second)
	e := tr.Update(now-100*ms, good(0, 0))
	if !e.Alarm || e.Tracking || !strings.Contains(e.Reason, "time went backwards by 67ms") {
		t.Fatalf("after a backwards timestamp: %+v", e)
	}
	if e.T != now-33*ms {
		t.Errorf("estimate time %v, want the latest time seen %v", e.T, now-33*ms)
	}
	if e := tr.Tick(now - 50*ms); !e.Alarm {
		t.Errorf("Tick going backwards: %+v, want alarm", e)
	}
}

func TestSeekingWithoutLineRaisesAlarm(t *testing.T) {
	cfg := guidance.DefaultConfig()
	tr := newTracker(t, cfg)
	start := 5 * time.Second // any origin
	for now := start; now < start+time.Second; now += 33 * ms {
		e := tr.Update(now, guidance.Measurement{})
		if e.Tracking {
			t.Fatalf("tracking with no line: %+v", e)
		}
		if wantAlarm := now-start >= cfg.FailSafeAfter; e.Alarm != wantAlarm {
			t.Fatalf("at %v since start: alarm %v, want %v (%+v)", now-start, e.Alarm, wantAlarm, e)
		}
	}
	tr.Reset()
	if e := tr.Tick(0); e.State != guidance.Seeking || e.Alarm {
		t.Errorf("after Reset: %+v, want seeking without alarm", e)
	}
}

// TestSeekingWithUnsteadyLineRaisesAlarm: a line that is seen but jumps
// between two places every 100 ms never gives a steady acquisition run of
// ReacquireFor. The tracker must not sit in Seeking with the alarm off:
// the fail-safe also counts from the start: no lock within ReacquireFor +
// FailSafeAfter of the start → Lost.
func TestSeekingWithUnsteadyLineRaisesAlarm(t *testing.T) {
	cfg := guidance.DefaultConfig()
	tr := newTracker(t, cfg)
	var e guidance.Estimate
	for now := time.Duration(0); now < time.Second; now += 33 * ms {
		off := 0.0
		if now/(100*ms)%2 == 1 {
			off = 120 // far outside the gate of a run at 0
		}
		e = tr.Update(now, good(off, 0))
		if e.Tracking {
			t.Fatalf("at %v: tracking an unsteady line: %+v", now, e)
		}
		if now >= cfg.ReacquireFor+cfg.FailSafeAfter && !e.Alarm {
			t.Fatalf("at %v since start, never locked: %+v, want the alarm", now, e)
		}
	}
}

func TestLowConfidenceIsNotTrusted(t *testing.T) {
	// A line reported at confidence 0.3 (below both thresholds) never
	// locks, and the alarm comes on after FailSafeAfter.
	tr := newTracker(t, guidance.DefaultConfig())
	var e guidance.Estimate
	for now := time.Duration(0); now < time.Second; now += 33 * ms {
		m := good(0, 0)
		m.Confidence = 0.3
		e = tr.Update(now, m)
		if e.Tracking {
			t.Fatalf("tracking at confidence 0.3: %+v", e)
		}
	}
	if !e.Alarm {
		t.Errorf("no alarm after 1 s of low-confidence measurements: %+v", e)
	}
}

func TestConfidenceHysteresis(t *testing.T) {
	// Confidence hovering around a threshold must not make the state
	// chatter. Counts are of changes after the initial lock.
	tests := map[string]struct {
		lo, hi                 float64 // alternating confidences
		afterFault             bool
		maxStateChanges        int
		wantTracking, wantLarm bool
	}{
		"around MinConfidence while locked":  {0.45, 0.55, false, 0, true, false},
		"around HoldConfidence while locked": {0.35, 0.45, false, 1, true, false},
		"around MinConfidence after a loss":  {0.45, 0.55, true, 1, false, true},
	}
	for name, tc := range tests {
		t.Run(name, func(t *testing.T) {
			tr := newTracker(t, guidance.DefaultConfig())
			now := lockOn(t, tr, 0, 0, time.Second)
			if tc.afterFault {
				tr.Fault(now, "test")
			}
			prev := tr.Tick(now)
			changes, trackChanges, alarmChanges := 0, 0, 0
			for i := 0; i < 300; i++ {
				now += 33 * ms
				m := good(0, 0)
				m.Confidence = tc.lo
				if i%2 == 1 {
					m.Confidence = tc.hi
				}
				e := tr.Update(now, m)
				if e.State != prev.State {
					changes++
				}
				if e.Tracking != prev.Tracking {
					trackChanges++
				}
				if e.Alarm != prev.Alarm {
					alarmChanges++
				}
				prev = e
			}
			if changes > tc.maxStateChanges || trackChanges != 0 || alarmChanges != 0 {
				t.Errorf("over 300 frames: %d state changes (max %d), %d tracking changes, %d alarm changes (want 0)",
					changes, tc.maxStateChanges, trackChanges, alarmChanges)
			}
			if prev.Tracking != tc.wantTracking || prev.Alarm != tc.wantLarm {
				t.Errorf("final %+v, want tracking %v alarm %v", prev, tc.wantTracking, tc.wantLarm)
			}
		})
	}
}

func TestFilterFollowsARamp(t *testing.T) {
	// A line drifting at a steady 40 px/s and 3 deg/s: after a few
	// seconds the constant-velocity filter reports the rates and has no
	// lag (a CV model tracks a ramp without steady-state error).
	tr := newTracker(t, guidance.DefaultConfig())
	var e guidance.Estimate
	for now := time.Duration(0); now < 3*time.Second; now += 33 * ms {
		s := now.Seconds()
		e = tr.Update(now, good(-50+40*s, 2+3*s))
	}
	s := e.T.Seconds()
	if math.Abs(e.OffsetPx-(-50+40*s)) > 0.5 || math.Abs(e.OffsetRate-40) > 1 ||
		math.Abs(e.HeadingDeg-(2+3*s)) > 0.1 || math.Abs(e.HeadingRate-3) > 0.2 {
		t.Errorf("ramp estimate %+v", e)
	}
	off, head, so, sh, ok := tr.Predict(e.T + 33*ms)
	s += 0.033
	if !ok || math.Abs(off-(-50+40*s)) > 0.5 || math.Abs(head-(2+3*s)) > 0.1 || so < 4 || sh < 1.5 {
		t.Errorf("Predict = %v %v ±%v ±%v ok %v", off, head, so, sh, ok)
	}
}

func TestVariableFrameIntervalUsesTimestamps(t *testing.T) {
	// Two trackers see the same ramp, one at 30 fps and one with every
	// other frame dropped: the estimates at a shared timestamp agree.
	a := newTracker(t, guidance.DefaultConfig())
	b := newTracker(t, guidance.DefaultConfig())
	var ea, eb guidance.Estimate
	for i := 0; i <= 120; i++ { // ends on a frame both see
		now := time.Duration(i) * 33 * ms
		m := good(10+20*now.Seconds(), 0)
		ea = a.Update(now, m)
		if i%2 == 0 {
			eb = b.Update(now, m)
		}
	}
	if math.Abs(ea.OffsetPx-eb.OffsetPx) > 0.5 || math.Abs(ea.OffsetRate-eb.OffsetRate) > 1 {
		t.Errorf("30 fps %+v vs 15 fps %+v", ea, eb)
	}
}

func TestNonFiniteMeasurementIgnored(t *testing.T) {
	tr := newTracker(t, guidance.DefaultConfig())
	now := lockOn(t, tr, 0, 0, time.Second)
	e := tr.Update(now, good(math.NaN(), 0))
	if e.State != guidance.Coasting || math.IsNaN(e.OffsetPx) {
		t.Fatalf("NaN measurement: %+v", e)
	}
}

func BenchmarkUpdate(b *testing.B) {
	tr, err := guidance.NewTracker(guidance.DefaultConfig())
	if err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	var now time.Duration
	for i := 0; b.Loop(); i++ {
		now += 33 * ms
		tr.Update(now, good(10*math.Sin(float64(i)*0.01), 1))
	}
}

func TestGateRateOnDetectorNoise(t *testing.T) {
	// With detector noise as configured (4 px, 1.5 deg) and a smoothly
	// moving line, the 99 % gate should reject about 1 % of genuine
	// measurements or fewer (the chi-square gate's design rate); many
	// more would mean the innovation variance is wrong.
	tr := newTracker(t, guidance.DefaultConfig())
	scene := guidancetest.Scene{
		FPS: 30, Length: 120 * time.Second, Seed: 11,
		Offset:  func(t time.Duration) float64 { return 50 * math.Sin(0.4*t.Seconds()) },
		Heading: func(t time.Duration) float64 { return 6 * math.Sin(0.25*t.Seconds()) },
		NoisePx: 4, NoiseDeg: 1.5,
	}
	gated, n := 0, 0
	for _, f := range scene.Frames() {
		if e := tr.Update(f.T, f.M); e.Gated {
			gated++
		}
		n++
	}
	if rate := float64(gated) / float64(n); rate > 0.02 {
		t.Errorf("gate rejected %.2f %% of genuine measurements (%d of %d), want ≤ 2 %%", 100*rate, gated, n)
	} else {
		t.Logf("gate rejected %.2f %% (%d of %d)", 100*rate, gated, n)
	}
}

func TestConfigStringNamesTheFailSafeTime(t *testing.T) {
	// The configured fail-safe time goes into the log.
	cfg := guidance.DefaultConfig()
	cfg.FailSafeAfter = 450 * ms
	if s := cfg.String(); !strings.Contains(s, "fail_safe_after=450ms") || !strings.Contains(s, "reacquire_for=200ms") {
		t.Errorf("Config.String() = %q", s)
	}
}

func TestLateFrameCannotHideALoss(t *testing.T) {
	// Frames stop for 0.5 s and nobody calls Tick; the next frame is a
	// good one. The tracker must still report the loss (alarm on, now
	// regaining) and name the stall, not carry on holding.
	tr := newTracker(t, guidance.DefaultConfig())
	now := lockOn(t, tr, 0, 0, time.Second)
	e := tr.Update(now+500*ms, good(0, 0))
	if !e.Alarm || e.Tracking || e.State != guidance.Regaining || !strings.Contains(e.Reason, "camera stalled: no frame for 0.53 s") {
		t.Fatalf("first frame after a 0.53 s gap: %+v", e)
	}
}

// TestMeasuredSaysWhetherTheFrameWasUsed: Measured is true exactly on the
// frames whose measurement went into the track, so that a log can show the
// prediction on the others (coasting through a missing, unsure or gated
// frame).
func TestMeasuredSaysWhetherTheFrameWasUsed(t *testing.T) {
	tr := newTracker(t, guidance.DefaultConfig())
	now := lockOn(t, tr, 10, 2, time.Second)
	steps := []struct {
		name string
		m    guidance.Measurement
		want bool
	}{
		{"steady", good(10, 2), true},
		{"missing", guidance.Measurement{}, false},
		{"unsure", guidance.Measurement{Valid: true, OffsetPx: 10, HeadingDeg: 2, Confidence: 0.01}, false},
		{"far off (gated)", good(200, 2), false},
		{"back", good(10, 2), true},
	}
	for _, s := range steps {
		e := tr.Update(now, s.m)
		now += 33 * ms
		if !e.Tracking {
			t.Fatalf("%s: not tracking: %+v", s.name, e)
		}
		if e.Measured != s.want {
			t.Errorf("%s: Measured = %v, want %v (%+v)", s.name, e.Measured, s.want, e)
		}
	}
	if e := tr.Tick(now); e.Measured {
		t.Errorf("a watchdog tick says Measured: %+v", e)
	}
	// Seeking: a measurement that only starts a run is not in a track.
	tr = newTracker(t, guidance.DefaultConfig())
	if e := tr.Update(0, good(10, 2)); e.Measured {
		t.Errorf("first frame of an acquisition says Measured: %+v", e)
	}
}

// TestFrameWidthScalesPixelSettings: the same scene at another frame size
// (every offset scaled by width/640) gets the same decisions, and offsets
// in proportion, once the tracker is told the frame width. Without
// SetFrameWidth a 1280 px frame's line moves twice as many pixels against
// the same pixel noise, and the gate refuses it.
func TestFrameWidthScalesPixelSettings(t *testing.T) {
	// A weave of ±60 px at 0.8 Hz with a 3 px jitter, a 0.2 s dropout and a
	// 40 px step (a line moved), at 30 fps: worked at 640 px wide.
	meas := func(i int) guidance.Measurement {
		if i >= 50 && i < 56 {
			return guidance.Measurement{}
		}
		off := 60*math.Sin(2*math.Pi*0.8*float64(i)/30) + 3*float64(i%3-1)
		if i >= 80 {
			off += 40
		}
		return good(off, 1)
	}
	run := func(w int, set bool) []guidance.Estimate {
		tr := newTracker(t, guidance.DefaultConfig())
		if set {
			tr.SetFrameWidth(w)
		}
		var es []guidance.Estimate
		for i := 0; i < 120; i++ {
			m := meas(i)
			m.OffsetPx *= float64(w) / 640
			es = append(es, tr.Update(time.Duration(i)*time.Second/30, m))
		}
		return es
	}
	ref := run(640, false)
	for _, w := range []int{160, 320, 1280} {
		got := run(w, true)
		for i := range ref {
			if got[i].State != ref[i].State || got[i].Gated != ref[i].Gated ||
				math.Abs(got[i].OffsetPx-ref[i].OffsetPx*float64(w)/640) > 1e-6*float64(w) {
				t.Fatalf("%d px wide, frame %d: %s gated=%v offset %.3f; at 640: %s gated=%v offset %.3f (×%.2f)",
					w, i, got[i].State, got[i].Gated, got[i].OffsetPx, ref[i].State, ref[i].Gated, ref[i].OffsetPx, float64(w)/640)
			}
		}
	}
	// Unscaled, the 1280 px run differs: the test can tell.
	raw, same := run(1280, false), true
	for i := range ref {
		same = same && raw[i].State == ref[i].State && raw[i].Gated == ref[i].Gated
	}
	if same {
		t.Error("without SetFrameWidth the 1280 px run decided as at 640: the scene does not exercise the scaling")
	}
}
