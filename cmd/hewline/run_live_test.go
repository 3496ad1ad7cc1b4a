package main

import (
	"bytes"
	"context"
	"errors"
	"image"
	"io"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
	"testing/synctest"
	"time"

	"gocv.io/x/gocv"

	"github.com/hewline/hewline/capture"
	"github.com/hewline/hewline/capture/capturetest"
	"github.com/hewline/hewline/capture/record"
	"github.com/hewline/hewline/capture/v4l2"
	"github.com/hewline/hewline/cmd/internal/pipeline"
	"github.com/hewline/hewline/cmd/internal/status"
	"github.com/hewline/hewline/guidance"
	"github.com/hewline/hewline/vision"
)

// syncBuffer is a bytes.Buffer safe for the Supervisor's goroutines.
type syncBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (s *syncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *syncBuffer) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}

// healthLog records SetHealth calls in order.
type healthLog struct {
	mu  sync.Mutex
	got []string
}

func (h *healthLog) SetHealth(name string, ok bool, detail string) {
	h.mu.Lock()
	defer h.mu.Unlock()
	st := "ok"
	if !ok {
		st = "FAULT"
	}
	h.got = append(h.got, name+" "+st+" "+detail)
}

// TestRunLogsCameraLoss: run's camera event handler over the supervised
// fake camera, unplugged with two failed reopen attempts. Every event is
// logged in order, the loss and each failed attempt marked FAIL-SAFE with
// the backoff before the next, and the camera's health on the status page
// goes to FAULT and back to ok. In a synctest bubble, so the backoff waits
// take no real time.
func TestRunLogsCameraLoss(t *testing.T) {
	synctest.Test(t, func(t *testing.T) {
		fake := capturetest.NewFakeCamera(
			capturetest.Frames(10, capturetest.MJPEG320),
			capturetest.Vanish(2),
			capturetest.Frames(10, capturetest.MJPEG320))
		fake.Clock = capturetest.Sleeper{}
		log, health := &syncBuffer{}, &healthLog{}
		sup := v4l2.NewSupervisor(fake, v4l2.Options{Name: "/dev/video9", OnEvent: cameraEvents(log, health, "/dev/video9")})
		if err := sup.Start(); err != nil {
			t.Fatal(err)
		}
		defer sup.Close()
		dst := gocv.NewMat()
		defer dst.Close()
		for frames, reads := 0, 0; frames < 20; reads++ {
			if reads > 1000 {
				t.Fatalf("20 frames not delivered in 1000 reads; log:\n%s", log.String())
			}
			_, err := sup.Read(&dst)
			switch {
			case err == nil:
				frames++
			case errors.Is(err, v4l2.ErrStalled) || errors.Is(err, v4l2.ErrGone):
			default:
				t.Fatal(err)
			}
		}
		sup.Close()
		want := []string{
			"hewline run: camera opened",
			"hewline run: camera gone: ",
			": FAIL-SAFE",
			"hewline run: camera open-failed attempt 1: ",
			"(retry in 100ms): FAIL-SAFE",
			"hewline run: camera open-failed attempt 2: ",
			"(retry in 200ms): FAIL-SAFE",
			"hewline run: camera opened attempt 3",
			"hewline run: camera resumed",
		}
		text, at := log.String(), 0
		for _, w := range want {
			i := strings.Index(text[at:], w)
			if i < 0 {
				t.Fatalf("log lacks %q after offset %d:\n%s", w, at, text)
			}
			at += i + len(w)
		}
		health.mu.Lock()
		defer health.mu.Unlock()
		var faults int
		for _, h := range health.got {
			if strings.HasPrefix(h, "camera FAULT /dev/video9: ") {
				faults++
			}
		}
		if faults != 3 || len(health.got) == 0 || !strings.HasPrefix(health.got[len(health.got)-1], "camera ok /dev/video9: resumed") {
			t.Errorf("camera health %q: want three faults (loss, two failed attempts) and ok again at the end", health.got)
		}
	})
}

// frameSource yields n 64×48 BGR frames at 30 fps, sleeping a frame
// interval before each (simulated time inside a synctest bubble).
type frameSource struct{ n, i int }

func (s *frameSource) Read(dst *gocv.Mat) (capture.FrameInfo, error) {
	if s.i >= s.n {
		return capture.FrameInfo{}, io.EOF
	}
	time.Sleep(time.Second / 30)
	if dst.Cols() != 64 || dst.Rows() != 48 {
		dst.Close()
		*dst = gocv.NewMatWithSize(48, 64, gocv.MatTypeCV8UC3)
	}
	dst.SetTo(gocv.NewScalar(float64(s.i%200), 80, 80, 0))
	fi := capture.FrameInfo{Index: s.i, T: time.Duration(s.i) * time.Second / 30, Size: image.Pt(64, 48)}
	s.i++
	return fi, nil
}

// alwaysLine finds the line in the middle of every frame.
type alwaysLine struct{}

func (alwaysLine) Detect(img gocv.Mat, _ vision.Hint) vision.Detection {
	return vision.Detection{Found: true, Confidence: 0.9, Method: "fake", WidthPx: 6, RefRow: 38,
		Points: []vision.Point{{X: 32, Y: 47}, {X: 32, Y: 0}}}
}

type countSink struct{ frames, guiding int }

func (c *countSink) Frame(r *pipeline.Result, _ gocv.Mat) error {
	if !r.Tick {
		c.frames++
		if r.Cue.Guide {
			c.guiding++
		}
	}
	return nil
}

// TestRunDiskFullStopsRecordingNotGuidance: the free-space probe reports
// plenty for the first checks, then less than the recorder's minimum. The
// recording stops, finalised, and run says so at once on its log and on
// the status page; every frame still goes through guidance. In a synctest
// bubble: the source's frame interval is simulated time, so the recorder's
// goroutine keeps up exactly as on an idle machine (no frame lost to load).
func TestRunDiskFullStopsRecordingNotGuidance(t *testing.T) {
	synctest.Test(t, testDiskFull)
}

func testDiskFull(t *testing.T) {
	var checks atomic.Int32
	probe := func(string) (uint64, error) {
		if checks.Add(1) <= 3 {
			return 10 << 30, nil
		}
		return 512 << 10, nil // 0.5 MiB, under the 1 MiB asked below
	}
	rec, err := record.New(record.Options{Dir: t.TempDir(), FPS: 30, MinFree: 1 << 20, CheckEvery: 10, FreeSpace: probe})
	if err != nil {
		t.Fatal(err)
	}
	bg := record.NewBackground(rec, 8)
	srv, err := status.New(status.Options{Addr: "127.0.0.1:0"})
	if err != nil {
		t.Fatal(err)
	}
	defer srv.Close()
	var log bytes.Buffer
	count := &countSink{}
	watch := &outputWatch{Log: &log, Health: srv, Rec: bg, SourceDrops: func() uint64 { return 5 }}
	tr, err := guidance.NewTracker(guidance.DefaultConfig())
	if err != nil {
		t.Fatal(err)
	}
	const n = 150
	st, err := pipeline.Run(context.Background(), &frameSource{n: n}, pipeline.Config{
		Detector: alwaysLine{}, Tracker: tr,
		Sinks: []pipeline.Sink{count, &pipeline.RecordSink{B: bg}, srv, watch},
	})
	if err != nil {
		t.Fatalf("the run failed: %v", err)
	}
	if err := bg.Close(); !errors.Is(err, record.ErrDiskFull) {
		t.Fatalf("recording ended with %v, want it stopped for a full disk (%d recorded, %d dropped, %d space checks)", err, bg.Recorded(), bg.Drops(), checks.Load())
	}
	if st.Frames != n || count.frames != n || count.guiding < n-20 {
		t.Errorf("guidance saw %d of %d frames (%d guiding): want all, guiding after the first few", count.frames, n, count.guiding)
	}
	recorded := int(bg.Recorded())
	// Checks: at New, at the clip's start, after 10 frames (plenty), after
	// 20 (full): exactly 20 frames recorded, none dropped.
	if recorded != 20 || bg.Drops() != 0 {
		t.Errorf("%d frames recorded, %d dropped; want 20 (until the fourth space check) and none dropped", recorded, bg.Drops())
	}
	if msg := log.String(); !strings.Contains(msg, "RECORDING STOPPED") || !strings.Contains(msg, "guidance goes on") || !strings.Contains(msg, "not enough free disk space") {
		t.Errorf("log does not say the recording stopped and why:\n%s", msg)
	}
	// The clip written before the stop is finalised and matches its sidecar.
	files := bg.Recorder().Files()
	if len(files) != 1 {
		t.Fatalf("clips %v, want one", files)
	}
	ts, err := record.ReadSidecar(record.SidecarPath(files[0]))
	if err != nil || len(ts) != recorded {
		t.Errorf("sidecar: %d frames, err %v; want %d", len(ts), err, recorded)
	}
	clip, err := capture.Open(files[0])
	if err != nil {
		t.Fatalf("the clip left by the stop does not open: %v", err)
	}
	clip.Close()
	var m strings.Builder
	srv.WriteMetrics(&m)
	if !strings.Contains(m.String(), `hewline_health{part="recording"} 0`) || !strings.Contains(m.String(), "hewline_source_drops_total 5") {
		t.Errorf("status page does not show the recording's fault or the camera reader's drops:\n%s", m.String())
	}
}

// slowLine is alwaysLine taking work per frame (simulated time in a bubble).
type slowLine struct{ work time.Duration }

func (d slowLine) Detect(img gocv.Mat, h vision.Hint) vision.Detection {
	time.Sleep(d.work)
	return alwaysLine{}.Detect(img, h)
}

// TestRunPacedFileSource: run's live loop over a recording (-source):
// the paced source hands each frame over at its timestamp, and the
// latency sink records every frame's read-to-decision time, prints a
// summary each period and counts frames over the budget. A detector
// faster than the frame rate drops nothing and misses no budget; one
// slower than it drops frames (counted on each result) and misses the
// budget on every frame. In a synctest bubble: pacing, detection time and
// the watchdog share simulated time.
func TestRunPacedFileSource(t *testing.T) {
	clip := shortClip(t, 60) // 2 s at 30 fps
	for name, work := range map[string]time.Duration{"fast": 5 * time.Millisecond, "slow": 50 * time.Millisecond} {
		t.Run(name, func(t *testing.T) {
			synctest.Test(t, func(t *testing.T) {
				f, err := capture.Open(clip)
				if err != nil {
					t.Fatal(err)
				}
				defer f.Close()
				start := time.Now()
				src := newPaced(f, time.Now)
				var out bytes.Buffer
				lat := &latencySink{out: &out, budget: frameBudget(f.Info().FPS), every: 500 * time.Millisecond}
				count := &countSink{}
				tr, err := guidance.NewTracker(guidance.DefaultConfig())
				if err != nil {
					t.Fatal(err)
				}
				var paced []time.Duration // when each frame was read, after start
				var ts []time.Duration    // its timestamp
				var lastDrops int
				probe := sinkFunc(func(r *pipeline.Result) {
					lastDrops = r.Drops
					if !r.Tick {
						paced = append(paced, r.Captured.Sub(start))
						ts = append(ts, r.Info.T)
					}
				})
				st, err := pipeline.Run(context.Background(), src, pipeline.Config{
					Detector: slowLine{work}, Tracker: tr, Sinks: []pipeline.Sink{count, lat, probe},
					Live: true, Watchdog: 20 * time.Millisecond,
				})
				if err != nil {
					t.Fatal(err)
				}
				if st.Frames+st.Drops != 60 || lastDrops != st.Drops || len(lat.all) != st.Frames {
					t.Fatalf("frames %d + drops %d (last result said %d), %d latencies: want 60 frames in all, each one timed", st.Frames, st.Drops, lastDrops, len(lat.all))
				}
				// Frame k is read at k/30 s after the first (the source's pacing).
				for i := range paced {
					if d := paced[i] - paced[0] - (ts[i] - ts[0]); d < 0 || d > time.Millisecond {
						t.Errorf("frame at %v read %v after the first, want %v", ts[i], paced[i]-paced[0], ts[i]-ts[0])
					}
				}
				summaries := strings.Count(out.String(), "decision latency p50")
				if summaries < 2 {
					t.Errorf("%d latency summaries in 2 s at one per 0.5 s:\n%s", summaries, out.String())
				}
				switch name {
				case "fast":
					if st.Drops != 0 || lat.missed != 0 || count.frames != 60 {
						t.Errorf("fast detector: %d drops, %d over budget; want none", st.Drops, lat.missed)
					}
					if p := lat.percentiles(); p["decision_ms_p50"] != 5 || p["decision_ms_max"] != 5 {
						t.Errorf("latency percentiles %v, want 5 ms (the detection time)", p)
					}
				case "slow":
					if st.Drops == 0 || lat.missed != st.Frames || !strings.Contains(out.String(), "over the 33.3 ms frame budget") {
						t.Errorf("slow detector: %d drops, %d of %d over budget; want drops and every frame over:\n%s", st.Drops, lat.missed, st.Frames, out.String())
					}
				}
			})
		})
	}
}

// sinkFunc adapts a function to pipeline.Sink.
type sinkFunc func(r *pipeline.Result)

func (f sinkFunc) Frame(r *pipeline.Result, _ gocv.Mat) error {
	f(r)
	return nil
}
