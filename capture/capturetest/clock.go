package capturetest

import (
	"sort"
	"sync"
	"time"
)

// Timeline is what a FakeCamera moves forward as simulated time passes.
type Timeline interface {
	Advance(d time.Duration)
}

// Sleeper is a Timeline on the process clock: Advance sleeps for d. Use it
// inside a testing/synctest bubble, where the Supervisor and the pipeline
// run on the process clock (v4l2.SystemClock, time.Ticker) and sleeping
// costs no real time: the bubble's clock jumps to the next timer only when
// every goroutine in it is blocked. Time then cannot run ahead of the code
// under test, so a stall of d is seen as exactly d — no storm of stall
// reports from a clock pumped faster than the goroutines run (Pump's risk),
// and backoff waits after a Vanish step need nobody to move the clock.
type Sleeper struct{}

// Advance sleeps for d.
func (Sleeper) Advance(d time.Duration) { time.Sleep(d) }

// Clock is a manual clock implementing v4l2.Clock. Time moves only when
// Advance is called (by a test or by a FakeCamera). Safe for concurrent use.
type Clock struct {
	mu      sync.Mutex
	now     time.Time
	waiters []waiter
}

type waiter struct {
	at time.Time
	ch chan time.Time
}

// NewClock returns a clock reading start.
func NewClock(start time.Time) *Clock { return &Clock{now: start} }

// Now returns the clock's time.
func (c *Clock) Now() time.Time {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.now
}

// After returns a channel that receives the time once the clock has been
// advanced by d (at once when d <= 0).
func (c *Clock) After(d time.Duration) <-chan time.Time {
	c.mu.Lock()
	defer c.mu.Unlock()
	ch := make(chan time.Time, 1)
	if d <= 0 {
		ch <- c.now
		return ch
	}
	c.waiters = append(c.waiters, waiter{at: c.now.Add(d), ch: ch})
	return ch
}

// Advance moves the clock forward by d and fires every due After channel.
func (c *Clock) Advance(d time.Duration) {
	c.mu.Lock()
	defer c.mu.Unlock()
	c.now = c.now.Add(d)
	sort.SliceStable(c.waiters, func(i, j int) bool { return c.waiters[i].at.Before(c.waiters[j].at) })
	keep := c.waiters[:0]
	for _, w := range c.waiters {
		if !w.at.After(c.now) {
			w.ch <- c.now
		} else {
			keep = append(keep, w)
		}
	}
	c.waiters = keep
}

// Pending is the number of After channels not yet fired (including ones
// whose receiver gave up waiting).
func (c *Clock) Pending() int {
	c.mu.Lock()
	defer c.mu.Unlock()
	return len(c.waiters)
}

// Pump advances the clock by step every real interval until the returned
// stop function is called. Use it when the code under test waits on the
// clock with nobody else moving it (backoff after a Vanish step). Pumped
// time runs ahead of the goroutines under load, so timeouts fire in bursts
// (stall storms): for timing checks prefer a synctest bubble with Sleeper.
func (c *Clock) Pump(step, interval time.Duration) (stop func()) {
	done := make(chan struct{})
	finished := make(chan struct{})
	go func() {
		defer close(finished)
		t := time.NewTicker(interval)
		defer t.Stop()
		for {
			select {
			case <-done:
				return
			case <-t.C:
				c.Advance(step)
			}
		}
	}()
	var once sync.Once
	return func() { once.Do(func() { close(done); <-finished }) }
}
