package guidance_test

import (
	"math"
	"testing"
	"time"

	"github.com/hewline/hewline/guidance"
	"github.com/hewline/hewline/guidance/guidancetest"
)

func TestDecideUsesOnlyTrackingEstimates(t *testing.T) {
	tests := map[string]struct {
		e    guidance.Estimate
		want guidance.CueDecision
	}{
		"holding": {
			guidance.Estimate{State: guidance.Holding, Tracking: true, OffsetPx: -12, HeadingDeg: 3},
			guidance.CueDecision{Guide: true, Offset: -12, Heading: 3},
		},
		"coasting": {
			guidance.Estimate{State: guidance.Coasting, Tracking: true, OffsetPx: 7, HeadingDeg: -1},
			guidance.CueDecision{Guide: true, Offset: 7, Heading: -1},
		},
		"seeking hides numbers": {
			guidance.Estimate{State: guidance.Seeking, OffsetPx: 40, HeadingDeg: 9},
			guidance.CueDecision{},
		},
		"regaining alarms and hides numbers": {
			guidance.Estimate{State: guidance.Regaining, Alarm: true, OffsetPx: 40},
			guidance.CueDecision{Alarm: true},
		},
		"lost alarms": {
			guidance.Estimate{State: guidance.Lost, Alarm: true},
			guidance.CueDecision{Alarm: true},
		},
		"inconsistent tracking+alarm does not guide": {
			guidance.Estimate{Tracking: true, Alarm: true, OffsetPx: 5},
			guidance.CueDecision{Alarm: true},
		},
		"NaN offset does not guide": {
			guidance.Estimate{Tracking: true, OffsetPx: math.NaN()},
			guidance.CueDecision{},
		},
	}
	for name, tc := range tests {
		t.Run(name, func(t *testing.T) {
			if got := guidance.Decide(tc.e); got != tc.want {
				t.Errorf("Decide = %+v, want %+v", got, tc.want)
			}
		})
	}
}

func TestSideBandHysteresis(t *testing.T) {
	b := guidance.SideBand{Enter: 10, Leave: 6}
	guide := func(x float64) guidance.CueDecision { return guidance.CueDecision{Guide: true, Offset: x} }
	// An offset wobbling between 8 and 12 px enters "right" once and
	// stays there; it takes |offset| < 6 to centre again.
	steps := []struct {
		d    guidance.CueDecision
		want guidance.Side
	}{
		{guide(0), guidance.Centred},
		{guide(9), guidance.Centred},
		{guide(11), guidance.SteerRight},
		{guide(8), guidance.SteerRight},
		{guide(12), guidance.SteerRight},
		{guide(8), guidance.SteerRight},
		{guide(5), guidance.Centred},
		{guide(-9), guidance.Centred},
		{guide(-10.5), guidance.SteerLeft},
		{guide(-7), guidance.SteerLeft},
		{guide(15), guidance.SteerRight},
		{guidance.CueDecision{Alarm: true, Offset: 15}, guidance.Centred},
		{guide(8), guidance.Centred},
	}
	for i, s := range steps {
		if got := b.Apply(s.d); got != s.want {
			t.Errorf("step %d (%+v): %v, want %v", i, s.d, got, s.want)
		}
	}
	// Count flips on a noisy signal around the band edge.
	b = guidance.SideBand{Enter: 10, Leave: 6}
	flips, prev := 0, guidance.Centred
	for i := 0; i < 200; i++ {
		x := 10 + 2*math.Sin(float64(i)) // 8..12
		if s := b.Apply(guide(x)); s != prev {
			flips++
			prev = s
		}
	}
	if flips != 1 {
		t.Errorf("%d side changes on an offset wobbling 8..12 px, want 1", flips)
	}
	if guidance.SteerLeft.String() != "left" || guidance.Centred.String() != "centred" || guidance.SteerRight.String() != "right" {
		t.Error("Side names")
	}
}

func TestLiveSharedByFrameLoopAndWatchdog(t *testing.T) {
	// Run with -race: the watchdog goroutine and the frame loop share a
	// Live. The frame loop stops; the watchdog must raise the alarm.
	clock := guidancetest.NewFakeClock(time.Unix(0, 0))
	tr, err := guidance.NewTracker(guidance.DefaultConfig())
	if err != nil {
		t.Fatal(err)
	}
	live := guidance.NewLive(tr, clock)
	done := make(chan guidance.Estimate)
	go func() {
		for {
			e := live.Tick()
			if e.Alarm {
				done <- e
				return
			}
			clock.Advance(time.Millisecond)
		}
	}()
	for i := 0; i < 30; i++ {
		live.Update(guidance.Measurement{Valid: true, Confidence: 0.9})
	}
	e := <-done
	if e.Tracking || e.State != guidance.Lost {
		t.Errorf("watchdog estimate %+v", e)
	}
}
