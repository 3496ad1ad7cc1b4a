package guidance_test

import (
	"fmt"
	"strings"
	"time"

	"github.com/hewline/hewline/guidance"
	"github.com/hewline/hewline/guidance/guidancetest"
)

// A stripe seen at 30 fps, lost for half a second, then seen again.
func ExampleTracker() {
	tr, err := guidance.NewTracker(guidance.DefaultConfig())
	if err != nil {
		panic(err)
	}
	prev := guidance.State(-1)
	for i := 0; i < 45; i++ {
		now := time.Duration(i) * 33 * time.Millisecond
		m := guidance.Measurement{Valid: true, OffsetPx: 12, HeadingDeg: -2, Confidence: 0.9}
		if now >= 500*time.Millisecond && now < time.Second {
			m = guidance.Measurement{} // nothing found
		}
		e := tr.Update(now, m)
		if e.State != prev {
			line := fmt.Sprintf("%4d ms %-9s alarm=%-5v %s", now.Milliseconds(), e.State, e.Alarm, e.Reason)
			fmt.Println(strings.TrimRight(line, " "))
			prev = e.State
		}
	}
	// Output:
	//    0 ms seeking   alarm=false acquiring: line seen for 0.00 s of 0.20 s
	//  231 ms holding   alarm=false
	//  528 ms coasting  alarm=false coasting: no line in frame
	//  825 ms lost      alarm=true  no trusted measurement for 0.33 s (no line in frame)
	// 1023 ms regaining alarm=true  regaining: line seen for 0.00 s of 0.20 s after no trusted measurement for 0.33 s (no line in frame)
	// 1254 ms holding   alarm=false
}

// In live operation a watchdog ticks the tracker so a stalled camera raises
// the alarm even though no frame arrives.
func ExampleLive() {
	clock := guidancetest.NewFakeClock(time.Date(2026, 1, 5, 6, 0, 0, 0, time.UTC))
	tr, _ := guidance.NewTracker(guidance.DefaultConfig())
	live := guidance.NewLive(tr, clock)
	for i := 0; i < 10; i++ {
		live.Update(guidance.Measurement{Valid: true, Confidence: 0.9})
		clock.Advance(33 * time.Millisecond)
	}
	for i := 0; i < 20; i++ { // the camera stalls; the watchdog ticks
		if e := live.Tick(); e.Alarm {
			fmt.Println(live.Since(), e.State, e.Reason)
			break
		}
		clock.Advance(20 * time.Millisecond)
	}
	// Output:
	// 610ms lost camera stalled: no frame for 0.31 s
}
