package guidance

import "time"

// Clock tells the time in live operation. The Tracker itself takes
// durations; a live loop converts with clock.Now().Sub(start). Tests use
// guidancetest.FakeClock.
type Clock interface {
	Now() time.Time
}

// SystemClock is the real clock.
type SystemClock struct{}

// Now returns time.Now(), which carries a monotonic reading, so Sub between
// two readings is immune to wall-clock steps.
func (SystemClock) Now() time.Time { return time.Now() }
