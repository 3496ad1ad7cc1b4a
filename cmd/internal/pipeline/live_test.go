package pipeline_test

import (
	"context"
	"errors"
	"image"
	"io"
	"sync"
	"testing"
	"testing/synctest"
	"time"

	"gocv.io/x/gocv"

	"github.com/hewline/hewline/capture"
	"github.com/hewline/hewline/cmd/internal/pipeline"
)

var errStalled = errors.New("camera stalled")

// stallingSource delivers frames every 10 ms, then blocks for stall (like
// a camera that stops sending), optionally reporting transient errors
// while stalled, then delivers again.
type stallingSource struct {
	n, i, stallAt int
	stall         time.Duration
	report        bool // return errStalled every 50 ms while stalled
	until         time.Time
}

func (s *stallingSource) Read(dst *gocv.Mat) (capture.FrameInfo, error) {
	if s.i >= s.n {
		return capture.FrameInfo{}, io.EOF
	}
	if s.i == s.stallAt && s.until.IsZero() {
		s.until = time.Now().Add(s.stall)
	}
	if !s.until.IsZero() && time.Now().Before(s.until) {
		if s.report {
			time.Sleep(50 * time.Millisecond)
			return capture.FrameInfo{}, errStalled
		}
		time.Sleep(time.Until(s.until))
	}
	time.Sleep(10 * time.Millisecond)
	if dst.Empty() {
		dst.Close()
		*dst = gocv.NewMatWithSize(48, 64, gocv.MatTypeCV8UC3)
	}
	dst.SetTo(gocv.NewScalar(float64(s.i%256), 0, 0, 0))
	fi := capture.FrameInfo{Index: s.i, T: time.Duration(s.i) * 10 * time.Millisecond, Size: image.Pt(64, 48)}
	s.i++
	return fi, nil
}

type timedSink struct {
	mu  sync.Mutex
	got []pipeline.Result
	at  []time.Time
}

func (s *timedSink) Frame(r *pipeline.Result, _ gocv.Mat) error {
	s.mu.Lock()
	s.got = append(s.got, *r)
	s.at = append(s.at, time.Now())
	s.mu.Unlock()
	return nil
}

// TestWatchdogRaisesAlarmDuringStall: the source stops for 1 s; the
// watchdog must put an alarm into the sinks while it is stalled — not
// before the fail-safe time, and well before the stall ends. It runs in a
// testing/synctest bubble: the source's sleeps, the watchdog's ticker and
// the sink's time stamps share the bubble's clock, so the windows below
// hold whatever the machine's load.
func TestWatchdogRaisesAlarmDuringStall(t *testing.T) {
	for name, report := range map[string]bool{"silent stall": false, "reported stall": true} {
		t.Run(name, func(t *testing.T) {
			synctest.Test(t, func(t *testing.T) {
				src := &stallingSource{n: 90, stallAt: 40, stall: time.Second, report: report}
				sink := &timedSink{}
				st, err := pipeline.Run(context.Background(), src, pipeline.Config{
					Detector: fakeDetector{}, Tracker: newTracker(t), Sinks: []pipeline.Sink{sink},
					Live: true, Watchdog: 20 * time.Millisecond,
					Transient: func(err error) bool { return errors.Is(err, errStalled) },
				})
				if err != nil {
					t.Fatal(err)
				}
				if st.Ticks == 0 {
					t.Fatal("no watchdog ticks during a 1 s stall")
				}
				if report && st.Faults == 0 {
					t.Error("reported stalls were not counted as faults")
				}
				var lastFrame, alarm time.Time
				for i, r := range sink.got {
					if !r.Tick && r.Info.Index == 39 {
						lastFrame = sink.at[i]
					}
					if r.Tick && r.Est.Alarm && alarm.IsZero() {
						alarm = sink.at[i]
					}
				}
				if alarm.IsZero() {
					t.Fatal("no alarm reached the sinks during the stall")
				}
				d := alarm.Sub(lastFrame)
				// With a reported stall the fault raises the alarm at the first
				// report (50 ms); a silent one waits for the fail-safe time.
				min := 300 * time.Millisecond
				if report {
					min = 40 * time.Millisecond
				}
				if d < min || d > 800*time.Millisecond {
					t.Errorf("alarm %v after the last frame, want between %v and 0.8 s", d, min)
				}
				if last := sink.got[len(sink.got)-1]; !last.Est.Tracking {
					t.Errorf("not tracking again after the stall: %+v", last.Est)
				}
			})
		})
	}
}
