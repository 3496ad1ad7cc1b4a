package pipeline_test

import (
	"context"
	"errors"
	"image"
	"sync"
	"testing"
	"testing/synctest"
	"time"

	"gocv.io/x/gocv"

	"github.com/hewline/hewline/capture"
	"github.com/hewline/hewline/capture/capturetest"
	"github.com/hewline/hewline/capture/record"
	"github.com/hewline/hewline/capture/v4l2"
	"github.com/hewline/hewline/cmd/internal/pipeline"
	"github.com/hewline/hewline/guidance"
	"github.com/hewline/hewline/vision"
)

// The live pipeline over the supervised fake camera, deterministically:
// each test runs inside a testing/synctest bubble, where the fake camera
// (Clock: capturetest.Sleeper), the Supervisor (SystemClock), the
// pipeline's watchdog ticker, the detector's work and the context's
// deadline all share the bubble's clock. That clock moves only when every
// goroutine is blocked, straight to the next timer, so a 1 s stall is one
// second of simulated time, whatever the machine's load or -race, and
// takes a few milliseconds of real time.

// patternDetector reads the frame number the fake camera wrote into the
// image and reports the stripe where capturetest.Pattern drew it. Work is
// the time one detection takes (a sleep: simulated time in the bubble).
type patternDetector struct{ work time.Duration }

func (d patternDetector) Detect(img gocv.Mat, _ vision.Hint) vision.Detection {
	if d.work > 0 {
		time.Sleep(d.work)
	}
	k, ok := capturetest.FrameNumber(img)
	if !ok {
		return vision.Detection{Method: "pattern", Reason: "no frame number"}
	}
	w, h := img.Cols(), img.Rows()
	cx := float64(capturetest.StripeCentre(image.Pt(w, h), k))
	return vision.Detection{Found: true, OffsetPx: cx - float64(w)/2, Confidence: 0.9, Method: "pattern", WidthPx: 24,
		Points: []vision.Point{{X: cx, Y: float64(h - 1)}, {X: cx, Y: 0}}, RefRow: float64(h) * 0.8}
}

// at is one result with the bubble's time it reached the sinks.
type at struct {
	r pipeline.Result
	t time.Time
}

type clockSink struct {
	mu  sync.Mutex
	got []at
}

func (s *clockSink) Frame(r *pipeline.Result, _ gocv.Mat) error {
	s.mu.Lock()
	rr := *r
	rr.Det.Points = nil
	s.got = append(s.got, at{rr, time.Now()})
	s.mu.Unlock()
	return nil
}

// cameraRun is one live run over a scripted fake camera.
type cameraRun struct {
	st     pipeline.Stats
	err    error
	got    []at
	events *capturetest.EventLog
	sup    v4l2.Stats
	served int
	start  time.Time
	tcfg   guidance.Config
}

const (
	stallAfter = 250 * time.Millisecond // the Supervisor's (its default)
	watchdog   = 20 * time.Millisecond  // run's -watchdog default
)

// runCamera runs the live pipeline for span of simulated time over a fake
// camera playing steps at 30 fps; it must be called inside a bubble.
func runCamera(t *testing.T, span time.Duration, det pipeline.Detector, steps ...capturetest.Step) cameraRun {
	t.Helper()
	return runCameraWith(t, span, det, nil, nil, steps...)
}

// runCameraWith is runCamera with setup called on the fake before it
// starts and more sinks after the test's own.
func runCameraWith(t *testing.T, span time.Duration, det pipeline.Detector, setup func(*capturetest.FakeCamera), sinks []pipeline.Sink, steps ...capturetest.Step) cameraRun {
	t.Helper()
	fake := capturetest.NewFakeCamera(steps...)
	fake.Clock = capturetest.Sleeper{}
	if setup != nil {
		setup(fake)
	}
	ev := &capturetest.EventLog{}
	sup := v4l2.NewSupervisor(fake, v4l2.Options{Name: "fake0", FPS: 30, StallAfter: stallAfter, OnEvent: ev.Add})
	if err := sup.Start(); err != nil {
		t.Fatal(err)
	}
	defer sup.Close()
	tcfg := guidance.DefaultConfig()
	tr, err := guidance.NewTracker(tcfg)
	if err != nil {
		t.Fatal(err)
	}
	sink := &clockSink{}
	ctx, cancel := context.WithTimeout(context.Background(), span)
	defer cancel()
	run := cameraRun{events: ev, start: time.Now(), tcfg: tcfg}
	run.st, run.err = pipeline.Run(ctx, sup, pipeline.Config{
		Detector: det, Tracker: tr, Sinks: append([]pipeline.Sink{sink}, sinks...),
		Live: true, Watchdog: watchdog,
		Transient: func(err error) bool { return errors.Is(err, v4l2.ErrStalled) || errors.Is(err, v4l2.ErrGone) },
	})
	if !errors.Is(run.err, context.DeadlineExceeded) {
		t.Fatalf("run ended with %v, want the test's deadline", run.err)
	}
	sup.Close()
	run.got, run.sup = sink.got, sup.Stats()
	_, _, run.served = fake.Counts()
	return run
}

// outage finds the last frame before the first untrusted result, the
// first alarm after it, the first frame after the outage and the first
// trusted result after that.
type outage struct {
	lastGood, alarm, resumed, trusted *at
}

func findOutage(t *testing.T, got []at) outage {
	t.Helper()
	var o outage
	for i := range got {
		a := &got[i]
		switch {
		case o.alarm == nil && !a.r.Tick && a.r.Est.Tracking:
			o.lastGood = a
		case o.alarm == nil && a.r.Est.Alarm && o.lastGood != nil:
			o.alarm = a
		case o.alarm != nil && o.resumed == nil && !a.r.Tick:
			o.resumed = a
		case o.resumed != nil && o.trusted == nil && a.r.Est.Tracking:
			o.trusted = a
		}
	}
	if o.lastGood == nil || o.alarm == nil || o.resumed == nil || o.trusted == nil {
		t.Fatalf("want tracking, an alarm, frames again and tracking again; got %+v", o)
	}
	return o
}

// checkReacquired: after the outage guidance resumes only once the line
// has been seen again for the tracker's ReacquireFor, never on the first
// frame back.
func checkReacquired(t *testing.T, run cameraRun, o outage) {
	t.Helper()
	if d := o.trusted.t.Sub(o.resumed.t); d < run.tcfg.ReacquireFor {
		t.Errorf("tracking resumed %v after the first frame back, before the %v reacquisition", d, run.tcfg.ReacquireFor)
	}
	for _, a := range run.got {
		if a.t.Before(o.trusted.t) && a.t.After(o.alarm.t) && (a.r.Est.Tracking || a.r.Cue.Guide) {
			t.Errorf("result at %v trusted during the outage: %+v", a.t.Sub(run.start), a.r.Est)
		}
	}
}

// TestCameraStallRaisesAlarm: the camera stops sending for 1 s. The
// Supervisor reports the stall after StallAfter, the tracker is faulted
// and the alarm reaches the sinks within StallAfter plus one watchdog
// period of the last frame; tracking comes back only after reacquisition.
// The silent variant holds the camera's read (no poll timeouts at all).
func TestCameraStallRaisesAlarm(t *testing.T) {
	for name, silent := range map[string]bool{"polled stall": false, "silent stall": true} {
		t.Run(name, func(t *testing.T) {
			synctest.Test(t, func(t *testing.T) {
				var run cameraRun
				if silent {
					run = runCameraHold(t, 4*time.Second, time.Second)
				} else {
					run = runCamera(t, 4*time.Second, patternDetector{},
						capturetest.Frames(45, capturetest.MJPEG320),
						capturetest.Stall(time.Second),
						capturetest.Frames(60, capturetest.MJPEG320))
				}
				o := findOutage(t, run.got)
				if d := o.alarm.t.Sub(o.lastGood.t); d > stallAfter+watchdog+time.Second/30 {
					t.Errorf("alarm %v after the last good frame, want within %v", d, stallAfter+watchdog+time.Second/30)
				}
				if run.st.Faults == 0 || run.sup.Stalls != 1 {
					t.Errorf("faults %d, camera stalls %d: want the stall reported (once)", run.st.Faults, run.sup.Stalls)
				}
				if n := len(run.events.Of(v4l2.EventStalled)); n != 1 {
					t.Errorf("%d stall events, want 1 (no storm)", n)
				}
				if n := len(run.events.Of(v4l2.EventResumed)); n != 1 {
					t.Errorf("%d resumed events, want 1", n)
				}
				// A 1 s stall at 250 ms each: a handful of reports, not thousands.
				if run.st.Faults > 8 {
					t.Errorf("%d faults for one 1 s stall: a storm", run.st.Faults)
				}
				checkReacquired(t, run, o)
			})
		})
	}
}

// runCameraHold is runCamera with a silent stall: the fake's read blocks
// for hold (released from inside the bubble) instead of polling.
func runCameraHold(t *testing.T, span, hold time.Duration) cameraRun {
	t.Helper()
	return runCameraWith(t, span, patternDetector{}, func(f *capturetest.FakeCamera) {
		go func() {
			f.WaitHolding()
			time.Sleep(hold)
			f.Release()
		}()
	}, nil, capturetest.Frames(45, capturetest.MJPEG320), capturetest.Hold(), capturetest.Frames(60, capturetest.MJPEG320))
}

// TestCameraVanishReopensWithBackoff: the camera is unplugged and the
// first three reopen attempts fail. The alarm is on at once; the
// Supervisor logs each failed attempt with a doubling wait (100, 200,
// 400 ms) and the successful fourth; tracking resumes only after the line
// has been reacquired.
func TestCameraVanishReopensWithBackoff(t *testing.T) {
	synctest.Test(t, func(t *testing.T) {
		run := runCamera(t, 4*time.Second, patternDetector{},
			capturetest.Frames(45, capturetest.MJPEG320),
			capturetest.Vanish(3),
			capturetest.Frames(60, capturetest.MJPEG320))
		o := findOutage(t, run.got)
		// The loss is reported at once: the next watchdog tick carries it.
		if d := o.alarm.t.Sub(o.lastGood.t); d > watchdog+time.Second/30 {
			t.Errorf("alarm %v after the last good frame, want within %v", d, watchdog+time.Second/30)
		}
		if n := len(run.events.Of(v4l2.EventGone)); n != 1 {
			t.Errorf("%d gone events, want 1", n)
		}
		failed := run.events.Of(v4l2.EventOpenFailed)
		want := []time.Duration{100 * time.Millisecond, 200 * time.Millisecond, 400 * time.Millisecond}
		if len(failed) != len(want) {
			t.Fatalf("%d failed reopen attempts logged, want %d", len(failed), len(want))
		}
		for i, e := range failed {
			if e.Attempt != i+1 || e.Backoff != want[i] {
				t.Errorf("failed attempt %d: attempt %d backoff %v, want %d and %v", i, e.Attempt, e.Backoff, i+1, want[i])
			}
			if i > 0 {
				if gap := e.At.Sub(failed[i-1].At); gap != want[i-1] {
					t.Errorf("attempt %d came %v after the one before, want its backoff %v", i+1, gap, want[i-1])
				}
			}
		}
		opened := run.events.Of(v4l2.EventOpened)
		if len(opened) != 2 || opened[1].Attempt != 4 {
			t.Fatalf("opened events %+v, want the start and a reopen at attempt 4", opened)
		}
		if gap := opened[1].At.Sub(failed[2].At); gap != want[2] {
			t.Errorf("reopened %v after the last failure, want its backoff %v", gap, want[2])
		}
		if run.sup.Losses != 1 || run.sup.Reopens != 1 {
			t.Errorf("camera losses %d reopens %d, want 1 and 1", run.sup.Losses, run.sup.Reopens)
		}
		for _, a := range run.got {
			if a.t.After(o.alarm.t) && !a.t.After(opened[1].At) && !a.r.Est.Alarm {
				t.Errorf("no alarm at %v while the camera was gone", a.t.Sub(run.start))
			}
		}
		checkReacquired(t, run, o)
		if o.resumed.t.Before(opened[1].At) {
			t.Errorf("a frame came before the camera was reopened")
		}
	})
}

// TestCameraLatencyAndDrops: the detector takes 7 ms, then 50 ms, per
// frame of a 30 fps camera. Each frame's read-to-decision latency is its
// detection time (and a frame never waits behind another); when the
// detector is slower than the camera, stale frames are dropped and
// counted, and every frame the camera served is accounted for as
// processed or dropped (by the pipeline or by the Supervisor).
func TestCameraLatencyAndDrops(t *testing.T) {
	for name, work := range map[string]time.Duration{"fast detector": 7 * time.Millisecond, "slow detector": 50 * time.Millisecond} {
		t.Run(name, func(t *testing.T) {
			synctest.Test(t, func(t *testing.T) {
				run := runCamera(t, 3*time.Second, patternDetector{work: work}, capturetest.Frames(75, capturetest.MJPEG320))
				frames, lastDrops := 0, 0
				for _, a := range run.got {
					if a.r.Drops < lastDrops {
						t.Fatalf("drop count went down from %d to %d", lastDrops, a.r.Drops)
					}
					lastDrops = a.r.Drops
					if a.r.Tick {
						continue
					}
					frames++
					// A frame read while the detector is busy waits for it
					// (until a fresher one replaces it): at most two frame
					// intervals more.
					d := a.r.Decided.Sub(a.r.Captured)
					if d < work || (work < time.Second/30 && d != work) || d > work+2*time.Second/30 {
						t.Errorf("frame %d: latency %v, want the detection time %v (plus at most 2 frame intervals when slower than the camera)", a.r.Info.Index, d, work)
					}
				}
				if frames != run.st.Frames || lastDrops > run.st.Drops {
					t.Errorf("sinks saw %d frames (drops %d), stats say %d (drops %d)", frames, lastDrops, run.st.Frames, run.st.Drops)
				}
				total := run.st.Frames + run.st.Drops + int(run.sup.Drops)
				if run.served != 75 || total != 75 {
					t.Errorf("camera served %d; processed %d + dropped %d (pipeline) + %d (camera) = %d, want 75",
						run.served, run.st.Frames, run.st.Drops, run.sup.Drops, total)
				}
				if work > time.Second/30 && run.st.Drops+int(run.sup.Drops) == 0 {
					t.Error("a detector slower than the camera dropped nothing")
				}
				if work < time.Second/30 && run.st.Drops+int(run.sup.Drops) != 0 {
					t.Errorf("a detector faster than the camera dropped %d+%d frames", run.st.Drops, run.sup.Drops)
				}
				t.Logf("%d processed, %d dropped by the pipeline, %d by the camera", run.st.Frames, run.st.Drops, run.sup.Drops)
			})
		})
	}
}

// TestCameraRecordingReplaysDecisions: a live run over the fake camera,
// with a detector slower than the camera (so frames are dropped), a 1 s
// stall and a 200 ms one, records what guidance saw (pipeline.RecordSink).
// Replaying the recording with the sidecar's times and tracker events, as
// hewline replay does, gives every recorded frame the same decision as the
// live run: state, trust, alarm and offset. The 200 ms stall is longer than
// the tracker's MaxFrameGap (150 ms) but shorter than the camera's stall
// limit: only the live watchdog's ticks see it, and they put the track to
// coasting, so the replay repeats the live decisions only by repeating
// those ticks. Recorded frames are matched to live ones through the
// sidecar's src field, so frames the recorder itself dropped cannot shift
// the comparison.
func TestCameraRecordingReplaysDecisions(t *testing.T) {
	synctest.Test(t, func(t *testing.T) {
		dir := t.TempDir()
		r, err := record.New(record.Options{Dir: dir, FPS: 30})
		if err != nil {
			t.Fatal(err)
		}
		bg := record.NewBackground(r, 8)
		det := patternDetector{work: 50 * time.Millisecond}
		run := runCameraWith(t, 6*time.Second, det, nil, []pipeline.Sink{&pipeline.RecordSink{B: bg}},
			capturetest.Frames(60, capturetest.MJPEG320),
			capturetest.Stall(time.Second),
			capturetest.Frames(60, capturetest.MJPEG320),
			capturetest.Stall(200*time.Millisecond),
			capturetest.Frames(30, capturetest.MJPEG320))
		if err := bg.Close(); err != nil {
			t.Fatal(err)
		}
		if run.st.Drops == 0 {
			t.Fatal("the live run dropped no frame: the test would not cover drops")
		}
		var live []pipeline.Result
		for _, a := range run.got {
			if !a.r.Tick {
				live = append(live, a.r)
			}
		}
		files := bg.Recorder().Files()
		if len(files) != 1 {
			t.Fatalf("recorded %v, want one clip", files)
		}
		_, side, err := record.ReadSidecarFull(record.SidecarPath(files[0]))
		if err != nil {
			t.Fatal(err)
		}
		ts := record.Times(side)
		src, err := capture.Open(files[0])
		if err != nil {
			t.Fatal(err)
		}
		defer src.Close()
		src.(*capture.VideoFile).UseTimestamps(ts)
		src.(*capture.VideoFile).UseEvents(record.Events(side))
		tr, err := guidance.NewTracker(run.tcfg)
		if err != nil {
			t.Fatal(err)
		}
		replay := &clockSink{}
		if _, err := pipeline.Run(context.Background(), src, pipeline.Config{Detector: patternDetector{}, Tracker: tr, Sinks: []pipeline.Sink{replay}}); err != nil {
			t.Fatal(err)
		}
		if len(replay.got) != len(side) || len(side) != int(bg.Recorded()) || len(side)+int(bg.Drops()) != len(live) {
			t.Fatalf("live %d frames, recorded %d (+%d dropped by the recorder), sidecar %d, replayed %d",
				len(live), bg.Recorded(), bg.Drops(), len(side), len(replay.got))
		}
		states := map[guidance.State]bool{}
		for i, b := range replay.got {
			a := live[side[i].Src]
			states[a.Est.State] = true
			if a.Est.State != b.r.Est.State || a.Est.Tracking != b.r.Est.Tracking || a.Est.Alarm != b.r.Est.Alarm ||
				a.Est.OffsetPx != b.r.Est.OffsetPx || a.Cue != b.r.Cue {
				t.Errorf("recorded frame %d (live %d): live %s tracking=%v alarm=%v offset %.3f, replay %s tracking=%v alarm=%v offset %.3f",
					i, side[i].Src, a.Est.State, a.Est.Tracking, a.Est.Alarm, a.Est.OffsetPx, b.r.Est.State, b.r.Est.Tracking, b.r.Est.Alarm, b.r.Est.OffsetPx)
			}
		}
		if !states[guidance.Holding] || !states[guidance.Regaining] {
			t.Errorf("states seen %v: want holding and, after the stall, regaining", states)
		}
		t.Logf("%d live frames (%d dropped before detection), %d recorded, all decided alike", len(live), run.st.Drops, len(side))
	})
}
