package status

import (
	"context"
	"encoding/json"
	"fmt"
	"image"
	"image/jpeg"
	"io"
	"mime"
	"mime/multipart"
	"net/http"
	"strings"
	"testing"
	"time"

	"gocv.io/x/gocv"

	"github.com/hewline/hewline/cmd/internal/pipeline"
	"github.com/hewline/hewline/guidance"
)

// start runs s on a free loopback port until the test ends.
func start(t *testing.T, s *Server) string {
	t.Helper()
	ctx, cancel := context.WithCancel(context.Background())
	t.Cleanup(cancel)
	if err := s.Start(ctx); err != nil {
		t.Fatal(err)
	}
	return "http://" + s.Addr()
}

func getState(t *testing.T, h http.Handler) State {
	t.Helper()
	req, _ := http.NewRequest("GET", "/state.json", nil)
	rec := &recorder{header: http.Header{}}
	h.ServeHTTP(rec, req)
	var st State
	if err := json.Unmarshal([]byte(rec.body.String()), &st); err != nil {
		t.Fatalf("state.json: %v\n%s", err, rec.body.String())
	}
	return st
}

type recorder struct {
	header http.Header
	body   strings.Builder
	code   int
}

func (r *recorder) Header() http.Header         { return r.header }
func (r *recorder) Write(b []byte) (int, error) { return r.body.WriteString(string(b)) }
func (r *recorder) WriteHeader(c int)           { r.code = c }

func TestStateJSONShowsAlarmAndHistory(t *testing.T) {
	clk := newFakeClock()
	s := newServer(t, Options{Now: clk.Now, History: time.Minute, Samples: 600})
	h := s.Handler()
	if st := getState(t, h); !st.Stale || st.Alarm || st.Reason == "" {
		t.Fatalf("before any result: %+v; want stale with a reason", st)
	}
	empty := gocv.NewMat()
	defer empty.Close()
	for i := 0; i < 20; i++ {
		s.Frame(result(i, guidance.Holding, float64(i), clk.Now(), 5*time.Millisecond), empty)
		clk.Add(100 * time.Millisecond)
	}
	st := getState(t, h)
	if st.Alarm || !st.Tracking || st.State != "holding" || st.OffsetPx == nil || *st.OffsetPx != 19 || st.Stale {
		t.Fatalf("tracking: %+v", st)
	}
	s.Frame(result(20, guidance.Lost, 0, clk.Now(), 5*time.Millisecond), empty)
	st = getState(t, h)
	if !st.Alarm || st.State != "lost" || st.Tracking || st.OffsetPx != nil || !strings.Contains(st.Reason, "no trusted") || st.Alarms != 1 {
		t.Fatalf("after loss: %+v; want the alarm, no offset, the reason", st)
	}
	// The history holds one point per 100 ms (History/Samples) and the
	// state change; untracked points carry no offset.
	hs := st.History
	if len(hs.T) != 21 || hs.Offset[20] != nil || *hs.Offset[19] != 19 || !hs.Alarm[20] || hs.Alarm[19] {
		t.Fatalf("history %+v", hs)
	}
	if hs.T[20] != 0 || hs.T[0] > -1.9 {
		t.Errorf("history times %v..%v; want about -2 s .. 0", hs.T[0], hs.T[20])
	}
	// Silence makes the view stale; old points fall out of the window.
	clk.Add(90 * time.Second)
	st = getState(t, h)
	if !st.Stale || len(st.History.T) != 0 {
		t.Fatalf("after 90 s of silence: stale %v, %d points; want stale, none", st.Stale, len(st.History.T))
	}
}

func TestHistoryIsBounded(t *testing.T) {
	clk := newFakeClock()
	s := newServer(t, Options{Now: clk.Now, History: time.Second, Samples: 10})
	empty := gocv.NewMat()
	defer empty.Close()
	for i := 0; i < 1000; i++ {
		st := guidance.Holding
		if i%2 == 1 {
			st = guidance.Coasting // every frame a change: every frame a point
		}
		s.Frame(result(i, st, 1, clk.Now(), 0), empty)
		clk.Add(time.Millisecond)
	}
	if n := s.hist.n; n != 10 {
		t.Fatalf("ring holds %d samples; want its capacity 10", n)
	}
	if got := getState(t, s.Handler()).History.T; len(got) != 10 {
		t.Fatalf("state.json has %d points; want 10", len(got))
	}
}

// testFrame is a mid-grey 320x240 BGR frame.
func testFrame() gocv.Mat {
	m := gocv.NewMatWithSize(240, 320, gocv.MatTypeCV8UC3)
	m.SetTo(gocv.NewScalar(128, 128, 128, 0))
	return m
}

func TestStreamSendsDecodableJPEGs(t *testing.T) {
	s := newServer(t, Options{Addr: "127.0.0.1:0", MaxFPS: 50})
	base := start(t, s)
	img := testFrame()
	defer img.Close()

	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	defer cancel()
	req, _ := http.NewRequestWithContext(ctx, "GET", base+"/stream.mjpg", nil)
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	mt, params, err := mime.ParseMediaType(resp.Header.Get("Content-Type"))
	if err != nil || mt != "multipart/x-mixed-replace" {
		t.Fatalf("Content-Type %q (%v)", resp.Header.Get("Content-Type"), err)
	}

	// Feed alarm frames until the stream has sent two parts.
	stop := make(chan struct{})
	fed := make(chan struct{})
	go func() {
		defer close(fed)
		for i := 0; ; i++ {
			select {
			case <-stop:
				return
			case <-time.After(25 * time.Millisecond):
			}
			s.Frame(result(i, guidance.Lost, 0, time.Now(), time.Millisecond), img)
		}
	}()
	defer func() { close(stop); <-fed }()

	mr := multipart.NewReader(resp.Body, params["boundary"])
	for part := 0; part < 2; part++ {
		p, err := mr.NextPart()
		if err != nil {
			t.Fatalf("part %d: %v", part, err)
		}
		if ct := p.Header.Get("Content-Type"); ct != "image/jpeg" {
			t.Fatalf("part %d Content-Type %q", part, ct)
		}
		// Decoded by the Go standard library's JPEG decoder, not ours.
		pic, err := jpeg.Decode(p)
		if err != nil {
			t.Fatalf("part %d: jpeg: %v", part, err)
		}
		if b := pic.Bounds(); b != image.Rect(0, 0, 320, 240) {
			t.Fatalf("part %d is %v; want 320x240", part, b)
		}
		// Annotate draws the alarm border in red; the middle stays grey.
		r, g, bl, _ := pic.At(2, 120).RGBA()
		if r>>8 < 200 || g>>8 > 60 || bl>>8 > 60 {
			t.Errorf("border pixel %d,%d,%d; want the red alarm border", r>>8, g>>8, bl>>8)
		}
		r, g, bl, _ = pic.At(160, 200).RGBA()
		if d := func(v uint32) int { return int(v>>8) - 128 }; abs(d(r)) > 8 || abs(d(g)) > 8 || abs(d(bl)) > 8 {
			t.Errorf("inner pixel %d,%d,%d; want grey 128", r>>8, g>>8, bl>>8)
		}
	}

	// /frame.jpg serves the latest one.
	fr, err := http.Get(base + "/frame.jpg")
	if err != nil {
		t.Fatal(err)
	}
	defer fr.Body.Close()
	if _, err := jpeg.Decode(fr.Body); err != nil || fr.Header.Get("X-Frame-Index") == "" {
		t.Fatalf("/frame.jpg: %v, index %q", err, fr.Header.Get("X-Frame-Index"))
	}
}

func abs(v int) int {
	if v < 0 {
		return -v
	}
	return v
}

func TestNoEncodingWithoutWatchers(t *testing.T) {
	s := newServer(t, Options{})
	img := testFrame()
	defer img.Close()
	for i := 0; i < 5; i++ {
		s.Frame(result(i, guidance.Holding, 3, time.Now(), 0), img)
	}
	if b, _, _, _ := s.latestJPEG(); b != nil {
		t.Fatalf("encoded %d bytes with nobody watching", len(b))
	}
	rec := &recorder{header: http.Header{}}
	req, _ := http.NewRequest("GET", "/frame.jpg", nil)
	s.Handler().ServeHTTP(rec, req)
	if rec.code != http.StatusServiceUnavailable {
		t.Fatalf("/frame.jpg without a frame: %d; want 503", rec.code)
	}
}

func TestSlowClientDoesNotBlockFrame(t *testing.T) {
	s := newServer(t, Options{Addr: "127.0.0.1:0", MaxFPS: 60})
	base := start(t, s)
	resp, err := http.Get(base + "/stream.mjpg") // never read
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	img := gocv.NewMatWithSize(480, 640, gocv.MatTypeCV8UC3) // ~30 kB JPEGs
	defer img.Close()
	gocv.RandU(&img, gocv.NewScalar(0, 0, 0, 0), gocv.NewScalar(255, 255, 255, 0)) // noise compresses badly: fills socket buffers fast
	done := make(chan int)
	go func() {
		n := 0
		for i := 0; i < 200; i++ {
			s.Frame(result(i, guidance.Holding, 0, time.Now(), 0), img)
			time.Sleep(2 * time.Millisecond)
			n++
		}
		done <- n
	}()
	select {
	case n := <-done:
		if n != 200 {
			t.Fatalf("fed %d frames", n)
		}
	case <-time.After(20 * time.Second):
		t.Fatal("Frame blocked behind a client that does not read")
	}
}

func TestBindErrorNamesAddress(t *testing.T) {
	a := newServer(t, Options{Addr: "127.0.0.1:0"})
	start(t, a)
	b := newServer(t, Options{Addr: a.Addr()})
	err := b.Start(context.Background())
	if err == nil || !strings.Contains(err.Error(), "listen "+a.Addr()) {
		t.Fatalf("second bind to %s: %v; want a listen error naming it", a.Addr(), err)
	}
}

func TestCloseEndsStreams(t *testing.T) {
	s, err := New(Options{Addr: "127.0.0.1:0"})
	if err != nil {
		t.Fatal(err)
	}
	base := "http://"
	if err := s.Start(context.Background()); err != nil {
		t.Fatal(err)
	}
	base += s.Addr()
	resp, err := http.Get(base + "/stream.mjpg")
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	closed := make(chan struct{})
	go func() { s.Close(); close(closed) }()
	select {
	case <-closed:
	case <-time.After(5 * time.Second):
		t.Fatal("Close did not return with a stream open")
	}
	if _, err := io.ReadAll(resp.Body); err != nil && !strings.Contains(err.Error(), "EOF") {
		t.Logf("stream ended with %v", err)
	}
	if _, err := http.Get(base + "/metrics"); err == nil {
		t.Fatal("server still answers after Close")
	}
}

func ExampleServer_WriteMetrics() {
	at := time.Date(2026, 1, 5, 8, 0, 0, 0, time.UTC)
	s, _ := New(Options{Now: func() time.Time { return at }})
	defer s.Close()
	empty := gocv.NewMat()
	defer empty.Close()
	est := guidance.Estimate{State: guidance.Lost, Alarm: true, Reason: "no trusted measurement for 0.40 s"}
	s.Frame(&pipeline.Result{Est: est, Captured: at, Decided: at.Add(12 * time.Millisecond)}, empty)
	var b strings.Builder
	s.WriteMetrics(&b)
	for _, line := range strings.Split(b.String(), "\n") {
		if strings.HasPrefix(line, "hewline_alarm") || strings.HasPrefix(line, "hewline_frames_total") ||
			strings.HasPrefix(line, "hewline_decision_latency_seconds_bucket{le=\"0.02\"}") {
			fmt.Println(line)
		}
	}
	// Output:
	// hewline_frames_total 1
	// hewline_alarms_total 1
	// hewline_alarm 1
	// hewline_decision_latency_seconds_bucket{le="0.02"} 1
}
