package haptic

import (
	"context"
	"errors"
	"sync"
	"time"
)

// DefaultRefresh is how often the Vibrator repeats unchanged levels to the
// driver, so that a motor driver with a watchdog knows the host is alive.
const DefaultRefresh = 200 * time.Millisecond

// DefaultTick is a suitable tick interval for Run: fine enough for the
// shortest pulse (62.5 ms at 8 pulses/s) to keep its length within 10 ms.
const DefaultTick = 10 * time.Millisecond

// motor plays one pattern, keeping its pulse phase across pattern changes
// so that a rate change does not cut a pulse short or restart the train.
type motor struct {
	pat   Pattern
	alarm bool
	start time.Time // start of the current pulse slot
	idx   int       // pulse index within the burst
}

// set changes the pattern. Starting from silence, or switching between
// guidance and alarm, restarts with a pulse at once.
func (m *motor) set(p Pattern, alarm bool, now time.Time) {
	restart := m.pat.Silent() || alarm != m.alarm
	m.pat, m.alarm = p, alarm
	if restart {
		m.start, m.idx = now, 0
	}
}

func (m *motor) level(now time.Time) Level {
	p := m.pat
	if p.Silent() {
		return 0
	}
	if p.Off <= 0 && p.Gap <= 0 {
		return p.Level
	}
	if m.idx >= p.burst() {
		m.idx = 0
	}
	if now.Sub(m.start) > 10*p.Period() { // ticks stopped for long: resync
		m.start, m.idx = now, 0
	}
	for now.Sub(m.start) >= p.slot(m.idx) {
		m.start = m.start.Add(p.slot(m.idx))
		m.idx = (m.idx + 1) % p.burst()
	}
	if now.Sub(m.start) < p.On {
		return p.Level
	}
	return 0
}

// Vibrator plays the Mapper's patterns on a Driver. Call Cue for every
// frame's cue and Tick (or Run) every few milliseconds; both use the
// injected clock. Safe for concurrent use.
type Vibrator struct {
	// RefreshEvery: repeat unchanged levels this often; 0 means
	// DefaultRefresh. Set before first use.
	RefreshEvery time.Duration

	mu           sync.Mutex
	d            Driver
	m            *Mapper
	now          func() time.Time
	left, right  motor
	sentL, sentR Level
	sentAt       time.Time
	sentAny      bool
	halted       bool
}

// NewVibrator plays m's patterns on d using the clock now (nil means
// time.Now). The Vibrator owns d: Close closes it.
func NewVibrator(d Driver, m *Mapper, now func() time.Time) *Vibrator {
	if m == nil {
		m = NewMapper()
	}
	if now == nil {
		now = time.Now
	}
	return &Vibrator{d: d, m: m, now: now}
}

// Cue takes a new cue and applies it at once.
func (v *Vibrator) Cue(c Cue) error {
	v.mu.Lock()
	defer v.mu.Unlock()
	if v.halted {
		return ErrHalted
	}
	now := v.now()
	l, r := v.m.Map(c)
	alarm := c.Alarm || !(l.Silent() || r.Silent()) // both motors: the alarm
	v.left.set(l, alarm, now)
	v.right.set(r, alarm, now)
	return v.tick(now)
}

// Tick updates the motors to the patterns' levels now.
func (v *Vibrator) Tick() error {
	v.mu.Lock()
	defer v.mu.Unlock()
	if v.halted {
		return ErrHalted
	}
	return v.tick(v.now())
}

func (v *Vibrator) tick(now time.Time) error {
	l, r := v.left.level(now), v.right.level(now)
	refresh := v.RefreshEvery
	if refresh <= 0 {
		refresh = DefaultRefresh
	}
	if v.sentAny && l == v.sentL && r == v.sentR && now.Sub(v.sentAt) < refresh {
		return nil
	}
	if err := v.d.Set(l, r); err != nil {
		return err
	}
	v.sentL, v.sentR, v.sentAt, v.sentAny = l, r, now, true
	return nil
}

// Run calls Tick on every tick until ctx is done or the Vibrator is
// halted. Driver errors go to onErr (which may be nil) and Run goes on.
func (v *Vibrator) Run(ctx context.Context, ticks <-chan time.Time, onErr func(error)) error {
	for {
		select {
		case <-ctx.Done():
			return ctx.Err()
		case <-ticks:
			if err := v.Tick(); err != nil {
				if errors.Is(err, ErrHalted) {
					return nil
				}
				if onErr != nil {
					onErr(err)
				}
			}
		}
	}
}

// Halt switches both motors off at once, through the driver's Halt, and
// makes the Vibrator inert: later Cue and Tick calls return ErrHalted.
func (v *Vibrator) Halt() error {
	v.mu.Lock()
	defer v.mu.Unlock()
	if v.halted {
		return nil
	}
	v.halted = true
	return v.d.Halt()
}

// Close halts and closes the driver.
func (v *Vibrator) Close() error {
	herr := v.Halt()
	v.mu.Lock()
	defer v.mu.Unlock()
	if err := v.d.Close(); err != nil && !errors.Is(err, ErrHalted) {
		return err
	}
	return herr
}
