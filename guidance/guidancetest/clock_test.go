package guidancetest_test

import (
	"testing"
	"time"

	"github.com/hewline/hewline/guidance/guidancetest"
)

func TestFakeClock(t *testing.T) {
	start := time.Date(2026, 3, 1, 7, 0, 0, 0, time.UTC)
	c := guidancetest.NewFakeClock(start)
	if !c.Now().Equal(start) {
		t.Fatalf("Now = %v, want %v", c.Now(), start)
	}
	c.Advance(250 * time.Millisecond)
	if got := c.Now().Sub(start); got != 250*time.Millisecond {
		t.Errorf("after Advance: %v", got)
	}
	c.Set(start.Add(time.Hour))
	if got := c.Now().Sub(start); got != time.Hour {
		t.Errorf("after Set: %v", got)
	}
}

func TestSceneFrames(t *testing.T) {
	s := guidancetest.Scene{
		FPS: 10, Length: time.Second, Seed: 1,
		Offset:  func(t time.Duration) float64 { return 100 * t.Seconds() },
		Missing: []guidancetest.Span{{From: 200 * time.Millisecond, To: 400 * time.Millisecond}},
		Dropped: []guidancetest.Span{{From: 700 * time.Millisecond, To: 800 * time.Millisecond}},
	}
	frames := s.Frames()
	if len(frames) != 9 {
		t.Fatalf("%d frames, want 9 (10 minus one dropped)", len(frames))
	}
	for _, f := range frames {
		missing := f.T >= 200*time.Millisecond && f.T < 400*time.Millisecond
		if f.M.Valid == missing {
			t.Errorf("frame at %v: valid %v", f.T, f.M.Valid)
		}
		if f.M.Valid && (f.M.OffsetPx != 100*f.T.Seconds() || f.M.Confidence != 0.9) {
			t.Errorf("frame at %v: %+v", f.T, f.M)
		}
		if f.T == 700*time.Millisecond {
			t.Error("dropped frame present")
		}
	}
}
