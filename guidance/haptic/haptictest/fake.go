// Package haptictest has a fake haptic.Driver that records every level it
// is given, with times from an injected clock.
package haptictest

import (
	"sync"
	"time"

	"github.com/hewline/hewline/guidance/haptic"
)

// Record is one call to the Fake.
type Record struct {
	At          time.Time
	Left, Right haptic.Level
	// Halt is true for a Halt call (levels zero).
	Halt bool
}

// Fake implements haptic.Driver in memory. Set Now before use (nil means
// time.Now) and Err to make Set fail. Safe for concurrent use.
type Fake struct {
	Now func() time.Time
	// Err, when non-nil, is returned by Set (nothing is recorded).
	Err error

	mu      sync.Mutex
	records []Record
	halted  bool
	closed  bool
}

func (f *Fake) now() time.Time {
	if f.Now == nil {
		return time.Now()
	}
	return f.Now()
}

// Set records the levels. After Halt it records nothing and returns
// haptic.ErrHalted, like a real driver.
func (f *Fake) Set(left, right haptic.Level) error {
	f.mu.Lock()
	defer f.mu.Unlock()
	if f.halted {
		return haptic.ErrHalted
	}
	if f.Err != nil {
		return f.Err
	}
	f.records = append(f.records, Record{At: f.now(), Left: left, Right: right})
	return nil
}

// Halt records a halt: both levels zero.
func (f *Fake) Halt() error {
	f.mu.Lock()
	defer f.mu.Unlock()
	f.halted = true
	f.records = append(f.records, Record{At: f.now(), Halt: true})
	return nil
}

// Close halts and marks the fake closed.
func (f *Fake) Close() error {
	f.Halt()
	f.mu.Lock()
	f.closed = true
	f.mu.Unlock()
	return nil
}

// Records returns a copy of everything recorded so far.
func (f *Fake) Records() []Record {
	f.mu.Lock()
	defer f.mu.Unlock()
	return append([]Record(nil), f.records...)
}

// Levels returns the last levels the motors were given (zero after Halt).
func (f *Fake) Levels() (left, right haptic.Level) {
	f.mu.Lock()
	defer f.mu.Unlock()
	if len(f.records) == 0 {
		return 0, 0
	}
	r := f.records[len(f.records)-1]
	return r.Left, r.Right
}

// Halted reports whether Halt was called; Closed whether Close was.
func (f *Fake) Halted() bool { f.mu.Lock(); defer f.mu.Unlock(); return f.halted }

// Closed reports whether Close was called.
func (f *Fake) Closed() bool { f.mu.Lock(); defer f.mu.Unlock(); return f.closed }
