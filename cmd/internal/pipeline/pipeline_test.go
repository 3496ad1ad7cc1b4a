package pipeline_test

import (
	"context"
	"errors"
	"image"
	"io"
	"testing"
	"time"

	"gocv.io/x/gocv"

	"github.com/hewline/hewline/capture"
	"github.com/hewline/hewline/capture/matcheck"
	"github.com/hewline/hewline/cmd/internal/pipeline"
	"github.com/hewline/hewline/guidance"
	"github.com/hewline/hewline/vision"
)

func TestMain(m *testing.M) { matcheck.Main(m) }

// fakeSource yields n frames at 30 fps, each filled with its index, and
// then err (io.EOF by default). Frames from sizeChangeAt on are smaller.
type fakeSource struct {
	n, i, sizeChangeAt int
	err                error
	delay              time.Duration
}

func (s *fakeSource) Read(dst *gocv.Mat) (capture.FrameInfo, error) {
	if s.i >= s.n {
		if s.err != nil {
			return capture.FrameInfo{}, s.err
		}
		return capture.FrameInfo{}, io.EOF
	}
	if s.delay > 0 {
		time.Sleep(s.delay)
	}
	w, h := 64, 48
	if s.sizeChangeAt > 0 && s.i >= s.sizeChangeAt {
		w, h = 32, 24
	}
	if dst.Cols() != w || dst.Rows() != h {
		dst.Close()
		*dst = gocv.NewMatWithSize(h, w, gocv.MatTypeCV8UC3)
	}
	dst.SetTo(gocv.NewScalar(float64(s.i%256), 0, 0, 0))
	fi := capture.FrameInfo{Index: s.i, T: time.Duration(s.i) * time.Second / 30, Size: image.Pt(w, h)}
	s.i++
	return fi, nil
}

// fakeDetector sees the line except in frames [gapFrom, gapTo). It reads
// the frame's pixel to prove the frame it got is the one it was given.
type fakeDetector struct{ gapFrom, gapTo int }

func (d fakeDetector) Detect(img gocv.Mat, _ vision.Hint) vision.Detection {
	i := int(img.GetVecbAt(0, 0)[0])
	if i >= d.gapFrom && i < d.gapTo {
		return vision.Detection{Method: "fake", Reason: "gap"}
	}
	// A steady line with a jitter of up to 6 px at 640 px wide, in
	// proportion to the frame (the tracker scales its noise so).
	jitter := float64(i%7) * float64(img.Cols()) / 640
	return vision.Detection{Found: true, OffsetPx: jitter, Confidence: 0.9, Method: "fake",
		Points: []vision.Point{{X: 32, Y: 47}, {X: 32, Y: 0}}, RefRow: 38}
}

type recordSink struct {
	got   []pipeline.Result
	pix   []int
	delay time.Duration
	err   error
	errAt int
	first chan struct{} // closed at the first frame, when set
}

func (s *recordSink) Frame(r *pipeline.Result, img gocv.Mat) error {
	if s.err != nil && len(s.got) == s.errAt {
		return s.err
	}
	if s.delay > 0 {
		time.Sleep(s.delay)
	}
	if s.first != nil && len(s.got) == 0 {
		close(s.first)
	}
	s.got = append(s.got, *r)
	s.pix = append(s.pix, int(img.GetVecbAt(0, 0)[0]))
	return nil
}

func newTracker(t *testing.T) *guidance.Tracker {
	t.Helper()
	tr, err := guidance.NewTracker(guidance.DefaultConfig())
	if err != nil {
		t.Fatal(err)
	}
	return tr
}

func TestReplayProcessesEveryFrameInOrder(t *testing.T) {
	src := &fakeSource{n: 120}
	sink := &recordSink{}
	st, err := pipeline.Run(context.Background(), src, pipeline.Config{
		Detector: fakeDetector{gapFrom: 60, gapTo: 80}, Tracker: newTracker(t), Sinks: []pipeline.Sink{sink},
	})
	if err != nil {
		t.Fatal(err)
	}
	if st.Frames != 120 || st.Drops != 0 || len(sink.got) != 120 {
		t.Fatalf("stats %+v, sink got %d", st, len(sink.got))
	}
	alarmAt := -1
	for i, r := range sink.got {
		if r.Info.Index != i || sink.pix[i] != i {
			t.Fatalf("frame %d: index %d, pixel %d: out of order or wrong Mat", i, r.Info.Index, sink.pix[i])
		}
		if r.Est.Alarm && alarmAt < 0 && i >= 60 {
			alarmAt = i
		}
		if r.Cue.Guide && !r.Est.Tracking {
			t.Fatalf("frame %d: cue guides on an untrusted estimate", i)
		}
	}
	// The gap starts at frame 60 (t = 2.0 s); the default fail-safe time is
	// 0.3 s, so the alarm must be on by frame 60 + 9.
	if alarmAt < 60 || alarmAt > 69 {
		t.Errorf("alarm first on at frame %d, want within 60..69", alarmAt)
	}
	if !sink.got[119].Est.Tracking {
		t.Errorf("not tracking again at the end: %+v", sink.got[119].Est)
	}
}

func TestSourceErrorAfterFramesDelivered(t *testing.T) {
	bad := errors.New("boom")
	src := &fakeSource{n: 10, err: bad}
	sink := &recordSink{}
	st, err := pipeline.Run(context.Background(), src, pipeline.Config{Detector: fakeDetector{}, Tracker: newTracker(t), Sinks: []pipeline.Sink{sink}})
	if !errors.Is(err, bad) || st.Frames != 10 || len(sink.got) != 10 {
		t.Fatalf("err %v, frames %d/%d", err, st.Frames, len(sink.got))
	}
}

func TestSinkErrorStopsRun(t *testing.T) {
	bad := errors.New("disk full")
	sink := &recordSink{err: bad, errAt: 5}
	_, err := pipeline.Run(context.Background(), &fakeSource{n: 100}, pipeline.Config{Detector: fakeDetector{}, Tracker: newTracker(t), Sinks: []pipeline.Sink{sink}})
	if !errors.Is(err, bad) || len(sink.got) != 5 {
		t.Fatalf("err %v after %d frames", err, len(sink.got))
	}
}

func TestSizeChangeRaisesAlarm(t *testing.T) {
	sink := &recordSink{}
	st, err := pipeline.Run(context.Background(), &fakeSource{n: 60, sizeChangeAt: 30}, pipeline.Config{Detector: fakeDetector{}, Tracker: newTracker(t), Sinks: []pipeline.Sink{sink}})
	if err != nil {
		t.Fatal(err)
	}
	if st.SizeChanges != 1 {
		t.Errorf("size changes %d, want 1", st.SizeChanges)
	}
	if !sink.got[29].Est.Tracking || !sink.got[30].Est.Alarm {
		t.Errorf("frame 29 tracking %v, frame 30 alarm %v: want tracking then alarm at the size change", sink.got[29].Est.Tracking, sink.got[30].Est.Alarm)
	}
}

func TestLiveDropsStaleFrames(t *testing.T) {
	// A sink much slower than the source: live mode must drop, and count,
	// the frames it could not process, and deliver fresh ones in order.
	src := &fakeSource{n: 60, delay: time.Millisecond}
	sink := &recordSink{delay: 8 * time.Millisecond}
	st, err := pipeline.Run(context.Background(), src, pipeline.Config{Detector: fakeDetector{}, Tracker: newTracker(t), Sinks: []pipeline.Sink{sink}, Live: true})
	if err != nil {
		t.Fatal(err)
	}
	if st.Drops == 0 || st.Frames+st.Drops != 60 {
		t.Fatalf("frames %d + drops %d, want drops > 0 adding up to 60", st.Frames, st.Drops)
	}
	for i := 1; i < len(sink.got); i++ {
		if sink.got[i].Info.Index <= sink.got[i-1].Info.Index {
			t.Fatalf("frames out of order: %d after %d", sink.got[i].Info.Index, sink.got[i-1].Info.Index)
		}
	}
}

func TestCancel(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	sink := &recordSink{first: make(chan struct{})}
	src := &fakeSource{n: 1 << 30}
	go func() {
		<-sink.first
		cancel()
	}()
	_, err := pipeline.Run(ctx, src, pipeline.Config{Detector: fakeDetector{}, Tracker: newTracker(t), Sinks: []pipeline.Sink{sink}})
	if !errors.Is(err, context.Canceled) {
		t.Fatalf("err %v, want context.Canceled", err)
	}
}
