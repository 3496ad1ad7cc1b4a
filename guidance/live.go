package guidance

import (
	"sync"
	"time"
)

// Live wraps a Tracker for live operation. It reads every time from one
// Clock (times are measured from the moment NewLive was called) and
// serialises calls, so the frame loop and a watchdog goroutine may share
// it. Using the clock for frames and ticks alike keeps a single time base:
// mixing camera timestamps with clock readings could make time appear to
// go backwards, which the Tracker treats as a fault.
type Live struct {
	mu    sync.Mutex
	tr    *Tracker
	clock Clock
	start time.Time
}

// NewLive returns a Live using tr and clock. Live owns tr from now on: the
// caller must not use tr directly any more.
func NewLive(tr *Tracker, clock Clock) *Live {
	return &Live{tr: tr, clock: clock, start: clock.Now()}
}

// Since returns the Live's current time: the clock's reading minus the
// start.
func (l *Live) Since() time.Duration { return l.clock.Now().Sub(l.start) }

// Update passes one frame's measurement, stamped with the clock's time.
func (l *Live) Update(m Measurement) Estimate {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.tr.Update(l.Since(), m)
}

// Tick lets the fail-safe fire when no frame comes; call it from a
// watchdog at a steady rate well below FailSafeAfter (e.g. every 20 ms).
func (l *Live) Tick() Estimate {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.tr.Tick(l.Since())
}

// Fault reports an outside fault (camera gone...): alarm at once.
func (l *Live) Fault(reason string) Estimate {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.tr.Fault(l.Since(), reason)
}

// Predict returns the Tracker's prediction for now (see Tracker.Predict).
func (l *Live) Predict() (offset, heading, offsetSigma, headingSigma float64, ok bool) {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.tr.Predict(l.Since())
}
