package capturetest

import (
	"fmt"
	"io"
	"sync"
	"time"

	"github.com/hewline/hewline/capture"
	"github.com/hewline/hewline/capture/v4l2"
)

type stepKind int

const (
	stepFrames stepKind = iota
	stepBytes
	stepCorrupt
	stepStall
	stepHold
	stepVanish
	stepSkip
)

// Step is one part of a FakeCamera's script. Make steps with Frames,
// Bytes, Corrupt, Stall, Hold, Vanish and Skip.
type Step struct {
	kind   stepKind
	n      int
	format v4l2.Format
	data   [][]byte
	d      time.Duration
}

// Frames serves n Pattern frames in format f. Frame numbers (FrameNumber)
// count every frame the camera has served, across steps.
func Frames(n int, f v4l2.Format) Step { return Step{kind: stepFrames, n: n, format: f} }

// Bytes serves the given raw frames, claiming format f. The fake copies
// each into the caller's buffer; it does not modify them.
func Bytes(f v4l2.Format, frames ...[]byte) Step {
	return Step{kind: stepBytes, n: len(frames), format: f, data: frames}
}

// Corrupt serves n frames that cannot be decoded: for MJPEG a JPEG start
// marker followed by noise, for YUYV a buffer one pixel pair short.
func Corrupt(n int, f v4l2.Format) Step { return Step{kind: stepCorrupt, n: n, format: f} }

// Stall serves no frame for d: ReadRaw returns v4l2.ErrTimeout once per
// Poll of simulated time. Only with Clock set does the Supervisor notice
// (the fake advances the clock); without, timestamps still jump by d.
func Stall(d time.Duration) Step { return Step{kind: stepStall, d: d} }

// Hold blocks ReadRaw until Release is called (a stall of unknown length,
// for tests that move the clock themselves). WaitHolding tells when the
// fake has reached it.
func Hold() Step { return Step{kind: stepHold} }

// Vanish makes ReadRaw fail with v4l2.ErrGone (the cable was pulled) and
// the next failedOpens calls to Open fail with capture.ErrNotFound; the
// Open after that succeeds and the script goes on.
func Vanish(failedOpens int) Step { return Step{kind: stepVanish, n: failedOpens} }

// Skip makes the driver lose n frames: nothing is served, but time and
// timestamps move on by n·Interval.
func Skip(n int) Step { return Step{kind: stepSkip, n: n} }

// FakeCamera is a scripted v4l2.RawCamera. After the last step it behaves
// as a final Hold that is never released. Safe for concurrent use; the
// blocking calls end when Interrupt is called (Supervisor.Close does).
type FakeCamera struct {
	// Clock, when set, is advanced by the fake as simulated time passes:
	// Interval per served or skipped frame, Poll per stall poll. A *Clock
	// moves a manual clock; Sleeper sleeps instead, which inside a
	// testing/synctest bubble moves the bubble's clock (see Sleeper).
	Clock Timeline
	// Interval between frames; default 1/30 s.
	Interval time.Duration
	// Poll is how often a stalled ReadRaw returns v4l2.ErrTimeout; default
	// 100 ms.
	Poll time.Duration

	mu          sync.Mutex
	cond        *sync.Cond
	steps       []Step
	pos         int
	inStep      int
	stalled     time.Duration
	ts          time.Duration
	open        bool
	failOpens   int
	holding     bool
	releases    int
	interrupted bool
	last        v4l2.Format
	opens       int
	closes      int
	served      int
}

// NewFakeCamera returns a closed fake that will play the steps in order.
func NewFakeCamera(steps ...Step) *FakeCamera {
	c := &FakeCamera{steps: steps}
	c.cond = sync.NewCond(&c.mu)
	return c
}

func (c *FakeCamera) interval() time.Duration {
	if c.Interval > 0 {
		return c.Interval
	}
	return time.Second / 30
}

func (c *FakeCamera) poll() time.Duration {
	if c.Poll > 0 {
		return c.Poll
	}
	return 100 * time.Millisecond
}

// advance moves the fake's timestamps and its Clock by d. It releases
// c.mu while the Clock moves: a Sleeper blocks, and Interrupt, Release and
// Counts must not wait behind it.
func (c *FakeCamera) advance(d time.Duration) {
	c.ts += d
	if c.Clock != nil {
		c.mu.Unlock()
		c.Clock.Advance(d)
		c.mu.Lock()
	}
}

func (c *FakeCamera) next() { c.pos, c.inStep, c.stalled = c.pos+1, 0, 0 }

// Open starts the fake streaming, or fails after a Vanish step.
func (c *FakeCamera) Open() error {
	c.mu.Lock()
	defer c.mu.Unlock()
	if c.interrupted {
		return fmt.Errorf("fake camera: %w", v4l2.ErrClosed)
	}
	if c.failOpens > 0 {
		c.failOpens--
		return fmt.Errorf("fake camera: open: no such device: %w", capture.ErrNotFound)
	}
	c.open = true
	c.opens++
	return nil
}

// Close stops the fake streaming; Open may follow.
func (c *FakeCamera) Close() error {
	c.mu.Lock()
	defer c.mu.Unlock()
	c.open = false
	c.closes++
	return nil
}

// ReadRaw plays the script: it copies the next frame into buf (not
// retained), or reports a stall poll, a loss, or blocks on a Hold.
func (c *FakeCamera) ReadRaw(buf []byte) (int, time.Duration, v4l2.Format, error) {
	c.mu.Lock()
	defer c.mu.Unlock()
	for {
		if c.interrupted {
			return 0, 0, c.last, fmt.Errorf("fake camera: %w", v4l2.ErrClosed)
		}
		if !c.open {
			return 0, 0, c.last, fmt.Errorf("fake camera: read while closed: %w", v4l2.ErrClosed)
		}
		if c.pos >= len(c.steps) {
			c.holding = true
			c.cond.Broadcast()
			c.cond.Wait()
			continue
		}
		st := c.steps[c.pos]
		switch st.kind {
		case stepFrames, stepBytes, stepCorrupt:
			var data []byte
			switch st.kind {
			case stepFrames:
				data = PatternBytes(st.format, c.served)
			case stepBytes:
				data = st.data[c.inStep]
			default:
				data = corruptBytes(st.format, c.served)
			}
			ts := c.ts
			c.advance(c.interval())
			c.inStep++
			if c.inStep >= st.n {
				c.next()
			}
			c.last = st.format
			c.served++
			if len(data) > len(buf) {
				return len(data), ts, st.format, io.ErrShortBuffer
			}
			return copy(buf, data), ts, st.format, nil
		case stepStall:
			d := min(c.poll(), st.d-c.stalled)
			c.stalled += d
			c.advance(d)
			if c.stalled >= st.d {
				c.next()
			}
			return 0, 0, c.last, fmt.Errorf("fake camera: %w", v4l2.ErrTimeout)
		case stepHold:
			if c.releases > 0 {
				c.releases--
				c.holding = false
				c.next()
				continue
			}
			c.holding = true
			c.cond.Broadcast()
			c.cond.Wait()
		case stepVanish:
			c.failOpens = st.n
			c.next()
			return 0, 0, c.last, fmt.Errorf("fake camera: %w (unplugged)", v4l2.ErrGone)
		case stepSkip:
			c.advance(time.Duration(st.n) * c.interval())
			c.next()
		}
	}
}

func corruptBytes(f v4l2.Format, k int) []byte {
	if f.Pixel == v4l2.YUYV {
		return make([]byte, f.Size.X*f.Size.Y*2-4)
	}
	b := make([]byte, 4096)
	b[0], b[1] = 0xFF, 0xD8
	x := uint32(k*2654435761 + 1)
	for i := 2; i < len(b); i++ {
		x ^= x << 13
		x ^= x >> 17
		x ^= x << 5
		b[i] = byte(x)
	}
	return b
}

// FailNextOpens makes the next n calls to Open fail with
// capture.ErrNotFound, like a camera that is not plugged in at start.
func (c *FakeCamera) FailNextOpens(n int) {
	c.mu.Lock()
	defer c.mu.Unlock()
	c.failOpens = n
}

// Release ends the current (or next) Hold step.
func (c *FakeCamera) Release() {
	c.mu.Lock()
	defer c.mu.Unlock()
	c.releases++
	c.holding = false
	c.cond.Broadcast()
}

// WaitHolding blocks until ReadRaw is blocked on a Hold step or at the end
// of the script: everything before it has been served.
func (c *FakeCamera) WaitHolding() {
	c.mu.Lock()
	defer c.mu.Unlock()
	for !c.holding && !c.interrupted {
		c.cond.Wait()
	}
}

// Interrupt wakes a blocked ReadRaw, which returns v4l2.ErrClosed from then
// on. Supervisor.Close calls it.
func (c *FakeCamera) Interrupt() {
	c.mu.Lock()
	defer c.mu.Unlock()
	c.interrupted = true
	c.cond.Broadcast()
}

// Counts returns how many times Open succeeded, Close was called, and how
// many frames (good, given or corrupt) were served.
func (c *FakeCamera) Counts() (opens, closes, served int) {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.opens, c.closes, c.served
}

var _ v4l2.RawCamera = (*FakeCamera)(nil)
