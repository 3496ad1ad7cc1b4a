package v4l2

import (
	"errors"
	"fmt"
	"io"
	"sync"
	"sync/atomic"
	"time"

	"github.com/hewline/hewline/capture"
	"gocv.io/x/gocv"
)

// Sentinel errors. Errors returned by the Supervisor and by RawCamera
// implementations wrap them; test with errors.Is.
var (
	// ErrStalled: no frame came for longer than Options.StallAfter. The
	// camera is still being watched (and reopened if the stall lasts);
	// tracking cannot be trusted until frames come back.
	ErrStalled = errors.New("camera stalled")
	// ErrGone: the device vanished (unplugged, driver reset) or failed. The
	// Supervisor keeps reopening it with backoff.
	ErrGone = errors.New("camera gone")
	// ErrTimeout is returned by RawCamera.ReadRaw when no frame came within
	// the device's poll interval while the device itself is still there.
	ErrTimeout = errors.New("no frame within poll interval")
	// ErrClosed: the camera or supervisor was closed.
	ErrClosed = errors.New("camera closed")
)

// RawCamera is the hardware (or a fake) as the Supervisor needs it.
//
// The Supervisor calls Open, ReadRaw and Close from one goroutine only.
// Open starts streaming; it is called again after Close to reopen.
// ReadRaw blocks until one frame arrives and copies it into buf, which the
// caller owns (ReadRaw must not retain it). It returns the number of bytes,
// the frame's capture time on a monotonic clock of any origin, and the
// frame's format. When buf is too small it returns the needed size with
// io.ErrShortBuffer (the frame is lost). It returns an error wrapping
// ErrTimeout when no frame came within its poll interval (it should not
// block much longer than a second), and one wrapping ErrGone when the device
// has vanished; any other error is treated like ErrGone.
type RawCamera interface {
	Open() error
	ReadRaw(buf []byte) (n int, ts time.Duration, format Format, err error)
	Close() error
}

// interrupter is implemented by raw cameras whose blocked ReadRaw can be
// woken from another goroutine (fakes); Supervisor.Close calls it.
type interrupter interface{ Interrupt() }

// Clock is the time source of the Supervisor; inject a fake in tests.
type Clock interface {
	Now() time.Time
	After(d time.Duration) <-chan time.Time
}

type systemClock struct{}

func (systemClock) Now() time.Time                         { return time.Now() }
func (systemClock) After(d time.Duration) <-chan time.Time { return time.After(d) }

// SystemClock is the wall/monotonic clock of the process.
func SystemClock() Clock { return systemClock{} }

// EventKind says what happened to the camera.
type EventKind int

const (
	// EventOpened: the camera (re)opened; Attempt > 0 after a reopen.
	EventOpened EventKind = iota
	// EventOpenFailed: a reopen attempt failed; Backoff is the wait before
	// the next one.
	EventOpenFailed
	// EventStalled: no frame for StallAfter. Raise the fail-safe.
	EventStalled
	// EventGone: the device vanished or failed. Raise the fail-safe.
	EventGone
	// EventResumed: the first frame after a stall or loss was delivered.
	// Guidance must still reacquire the line before it is trusted again.
	EventResumed
	// EventFormatChanged: frames now come in a different format or size.
	EventFormatChanged
	// EventCorrupt: a frame could not be decoded and was skipped.
	EventCorrupt
)

var eventNames = [...]string{"opened", "open-failed", "stalled", "gone", "resumed", "format-changed", "corrupt-frame"}

func (k EventKind) String() string {
	if k >= 0 && int(k) < len(eventNames) {
		return eventNames[k]
	}
	return fmt.Sprintf("event(%d)", int(k))
}

// Faulty reports whether the event means tracking cannot be trusted now
// (the caller must raise the fail-safe at once).
func (k EventKind) Faulty() bool {
	return k == EventStalled || k == EventGone || k == EventOpenFailed
}

// Event is one thing that happened to the camera.
type Event struct {
	Kind EventKind
	// At is the Supervisor clock's time of the event.
	At time.Time
	// Err is the cause for faulty events.
	Err error
	// Format is the new format (EventFormatChanged, EventOpened when known).
	Format Format
	// Attempt counts reopen attempts since the loss (EventOpened,
	// EventOpenFailed).
	Attempt int
	// Backoff is the wait before the next attempt (EventOpenFailed).
	Backoff time.Duration
}

func (e Event) String() string {
	s := "camera " + e.Kind.String()
	if e.Attempt > 0 {
		s += fmt.Sprintf(" attempt %d", e.Attempt)
	}
	if e.Format != (Format{}) {
		s += " " + e.Format.String()
	}
	if e.Err != nil {
		s += ": " + e.Err.Error()
	}
	if e.Backoff > 0 {
		s += fmt.Sprintf(" (retry in %v)", e.Backoff)
	}
	return s
}

// Options configure a Supervisor. Zero values take the defaults shown.
type Options struct {
	// Name is reported by Info (the device path).
	Name string
	// FPS is the nominal rate reported by Info.
	FPS float64
	// EveryFrame, when true, makes the reader wait for the consumer so no
	// frame is dropped (for recording). The default (false) is live mode:
	// only the freshest frame is kept and each stale one is dropped and
	// counted.
	EveryFrame bool
	// StallAfter: Read reports ErrStalled when no frame came for this long.
	// Default 250 ms (about 7 frames at 30 fps).
	StallAfter time.Duration
	// FirstFrameWait: allowed wait for the first frame after Start, since
	// many cameras take a moment to begin streaming. Default 2 s.
	FirstFrameWait time.Duration
	// ReopenAfter: a stall this long makes the reader close and reopen the
	// device. Default 2 s.
	ReopenAfter time.Duration
	// BackoffMin and BackoffMax bound the exponential wait between failed
	// reopen attempts. Defaults 100 ms and 5 s.
	BackoffMin, BackoffMax time.Duration
	// BufferBytes is the initial size of each raw buffer; buffers grow when
	// a frame does not fit. Default 640·480·2.
	BufferBytes int
	// Clock defaults to SystemClock().
	Clock Clock
	// OnEvent, when set, is called for every event, from the Supervisor's
	// goroutines: it must be quick and safe for concurrent use. Faulty
	// events are reported the moment they are detected.
	OnEvent func(Event)
}

func (o *Options) defaults() {
	if o.StallAfter <= 0 {
		o.StallAfter = 250 * time.Millisecond
	}
	if o.FirstFrameWait <= 0 {
		o.FirstFrameWait = 2 * time.Second
	}
	if o.FirstFrameWait < o.StallAfter {
		o.FirstFrameWait = o.StallAfter
	}
	if o.ReopenAfter <= 0 {
		o.ReopenAfter = 2 * time.Second
	}
	if o.BackoffMin <= 0 {
		o.BackoffMin = 100 * time.Millisecond
	}
	if o.BackoffMax < o.BackoffMin {
		o.BackoffMax = 5 * time.Second
		if o.BackoffMax < o.BackoffMin {
			o.BackoffMax = o.BackoffMin
		}
	}
	if o.BufferBytes <= 0 {
		o.BufferBytes = 640 * 480 * 2
	}
	if o.Clock == nil {
		o.Clock = SystemClock()
	}
}

// Stats are the Supervisor's counters since Start.
type Stats struct {
	// Frames delivered by Read.
	Frames uint64
	// Drops: frames read from the camera but never delivered (a fresher
	// one replaced them, or a buffer was too small).
	Drops uint64
	// Stalls: stall episodes (each reported once by EventStalled).
	Stalls uint64
	// Losses: times the device vanished or failed.
	Losses uint64
	// Reopens: successful reopens.
	Reopens uint64
	// Corrupt: frames that could not be decoded.
	Corrupt uint64
}

type rawFrame struct {
	buf    []byte
	n      int
	ts     time.Duration
	format Format
	at     time.Time
	// gap is the time since the previous frame came from the camera.
	gap time.Duration
	// gen counts the openings of the device (0 for the first).
	gen int
}

type camState int

const (
	stateOK camState = iota
	stateStalled
	stateGone
)

// Supervisor turns a RawCamera into a frame source that never blocks the
// pipeline for longer than StallAfter and reports trouble at once. Read is
// meant for one consumer goroutine; Stats, Info and Close may be called from
// any goroutine.
type Supervisor struct {
	raw RawCamera
	opt Options

	slot    chan rawFrame
	free    chan []byte
	wake    chan struct{}
	stop    chan struct{}
	done    chan struct{}
	started bool
	closing sync.Once

	mu      sync.Mutex
	pending error
	format  Format

	frames, drops, stalls, losses, reopens, corrupt atomic.Uint64

	// consumer-side state (Read's goroutine only)
	state    camState
	deadline time.Time
	index    int
	gen      int       // newest device opening seen by Read
	held     *rawFrame // a frame waiting behind a loss report
}

// NewSupervisor wraps raw. It does not open it: call Start.
func NewSupervisor(raw RawCamera, opt Options) *Supervisor {
	opt.defaults()
	s := &Supervisor{
		raw:  raw,
		opt:  opt,
		slot: make(chan rawFrame, 1),
		free: make(chan []byte, 3),
		wake: make(chan struct{}, 1),
		stop: make(chan struct{}),
		done: make(chan struct{}),
	}
	for i := 0; i < 3; i++ {
		s.free <- make([]byte, opt.BufferBytes)
	}
	return s
}

// Start opens the camera and starts the reader goroutine. A camera that
// cannot be opened at start is an error (said plainly to the user), not
// something to retry silently.
func (s *Supervisor) Start() error {
	if s.started {
		return fmt.Errorf("v4l2: supervisor already started")
	}
	if err := s.raw.Open(); err != nil {
		return err
	}
	s.started = true
	s.deadline = s.opt.Clock.Now().Add(s.opt.FirstFrameWait)
	s.emit(Event{Kind: EventOpened})
	go s.loop()
	return nil
}

func (s *Supervisor) emit(e Event) {
	if e.At.IsZero() {
		e.At = s.opt.Clock.Now()
	}
	if s.opt.OnEvent != nil {
		s.opt.OnEvent(e)
	}
}

func (s *Supervisor) stopped() bool {
	select {
	case <-s.stop:
		return true
	default:
		return false
	}
}

// wait sleeps for d on the injected clock; false when stopping.
func (s *Supervisor) wait(d time.Duration) bool {
	select {
	case <-s.opt.Clock.After(d):
		return true
	case <-s.stop:
		return false
	}
}

// lost records that the device failed and wakes Read.
func (s *Supervisor) lost(err error) {
	if !errors.Is(err, ErrGone) {
		err = fmt.Errorf("%w: %w", ErrGone, err)
	}
	s.losses.Add(1)
	s.mu.Lock()
	s.pending = err
	s.mu.Unlock()
	select {
	case s.wake <- struct{}{}:
	default:
	}
	s.emit(Event{Kind: EventGone, Err: err})
}

// loop is the reader goroutine: it owns raw.
func (s *Supervisor) loop() {
	defer close(s.done)
	open := true
	defer func() {
		if open {
			_ = s.raw.Close()
		}
	}()
	backoff := s.opt.BackoffMin
	attempt := 0
	clk := s.opt.Clock
	lastFrame := clk.Now()
	var lastFormat Format
	var t0 time.Duration
	haveT0 := false
	var buf []byte
	need := 0 // size a frame is known to need
	gen := 0
	select {
	case buf = <-s.free:
	case <-s.stop:
		return
	}
	for !s.stopped() {
		if !open {
			attempt++
			if err := s.raw.Open(); err != nil {
				s.emit(Event{Kind: EventOpenFailed, Err: err, Attempt: attempt, Backoff: backoff})
				if !s.wait(backoff) {
					return
				}
				backoff = min(2*backoff, s.opt.BackoffMax)
				continue
			}
			open = true
			s.reopens.Add(1)
			gen++
			s.emit(Event{Kind: EventOpened, Attempt: attempt})
			attempt, backoff = 0, s.opt.BackoffMin
			lastFrame = clk.Now()
		}
		n, ts, f, err := s.raw.ReadRaw(buf)
		if s.stopped() {
			return
		}
		switch {
		case err == nil && n <= len(buf) && n >= 0:
		case errors.Is(err, io.ErrShortBuffer) || (err == nil && n > len(buf)):
			s.drops.Add(1)
			if n > len(buf) {
				need = n + n/4
				buf = make([]byte, need)
			}
			continue
		case errors.Is(err, ErrTimeout):
			if d := clk.Now().Sub(lastFrame); d >= s.opt.ReopenAfter {
				s.lost(fmt.Errorf("%w: no frame for %v, reopening", ErrStalled, d.Round(time.Millisecond)))
				_ = s.raw.Close()
				open = false
			}
			continue
		default:
			if err == nil {
				err = fmt.Errorf("negative frame length %d", n)
			}
			s.lost(err)
			_ = s.raw.Close()
			open = false
			continue
		}
		now := clk.Now()
		gap := now.Sub(lastFrame)
		lastFrame = now
		if f != lastFormat {
			if lastFormat != (Format{}) {
				s.emit(Event{Kind: EventFormatChanged, Format: f})
			}
			lastFormat = f
			s.mu.Lock()
			s.format = f
			s.mu.Unlock()
		}
		if !haveT0 {
			t0, haveT0 = ts, true
		}
		fr := rawFrame{buf: buf, n: n, ts: ts - t0, format: f, at: now, gap: gap, gen: gen}
		if s.opt.EveryFrame {
			select {
			case s.slot <- fr:
			case <-s.stop:
				return
			}
		} else {
			select {
			case s.slot <- fr:
			default:
				// The consumer has not taken the previous frame: it is
				// stale now. Only this goroutine sends, so after the drain
				// the slot is empty and the send below cannot block.
				select {
				case old := <-s.slot:
					s.drops.Add(1)
					s.free <- old.buf
				default:
				}
				s.slot <- fr
			}
		}
		select {
		case buf = <-s.free:
		case <-s.stop:
			return
		}
		if len(buf) < need {
			buf = make([]byte, need)
		}
	}
}

// Read delivers the next (in live mode: the freshest) frame as BGR into
// dst, which the caller owns. It never waits longer than StallAfter past the
// last frame: then it returns an error wrapping ErrStalled, or ErrGone while
// the device is lost and being reopened. Both are transient — raise the
// fail-safe and call Read again. Undecodable frames are skipped and counted.
// After Close, Read returns io.EOF.
func (s *Supervisor) Read(dst *gocv.Mat) (capture.FrameInfo, error) {
	if !s.started {
		return capture.FrameInfo{}, fmt.Errorf("v4l2: read before Start: %w", ErrClosed)
	}
	clk := s.opt.Clock
	for {
		if s.stopped() {
			return capture.FrameInfo{}, io.EOF
		}
		// Order: frames taken before a loss, then the loss, then frames
		// from after the reopen; a stall verdict only when nothing waits.
		if s.held != nil {
			fr := *s.held
			s.held = nil
			if info, ok := s.deliver(fr, dst); ok {
				return info, nil
			}
			continue
		}
		select {
		case fr := <-s.slot:
			if info, ok, err := s.handle(fr, dst); err != nil || ok {
				return info, err
			}
			continue
		default:
		}
		if err := s.takePending(); err != nil {
			return capture.FrameInfo{}, err
		}
		wait := s.deadline.Sub(clk.Now())
		if wait <= 0 {
			return capture.FrameInfo{}, s.stallNow()
		}
		select {
		case fr := <-s.slot:
			if info, ok, err := s.handle(fr, dst); err != nil || ok {
				return info, err
			}
		case <-s.wake:
			// Back to the top: a frame sent before the loss goes first.
		case <-clk.After(wait):
			if s.deadline.After(clk.Now()) {
				continue
			}
			return capture.FrameInfo{}, s.stallNow()
		case <-s.stop:
			return capture.FrameInfo{}, io.EOF
		}
	}
}

// handle delivers fr unless it comes from a newer opening of the device
// than the last frame and a loss is still unreported: then the loss is
// returned first and fr is held for the next Read.
func (s *Supervisor) handle(fr rawFrame, dst *gocv.Mat) (capture.FrameInfo, bool, error) {
	if fr.gen > s.gen {
		s.gen = fr.gen
		if err := s.takePending(); err != nil {
			s.held = &fr
			return capture.FrameInfo{}, false, err
		}
	}
	info, ok := s.deliver(fr, dst)
	return info, ok, nil
}

// takePending returns the loss reported by the reader, if any.
func (s *Supervisor) takePending() error {
	s.mu.Lock()
	err := s.pending
	s.pending = nil
	s.mu.Unlock()
	if err == nil {
		return nil
	}
	s.state = stateGone
	s.deadline = s.opt.Clock.Now().Add(s.opt.StallAfter)
	return fmt.Errorf("v4l2: %s: %w", s.opt.Name, err)
}

func (s *Supervisor) stallNow() error {
	now := s.opt.Clock.Now()
	s.deadline = now.Add(s.opt.StallAfter)
	switch s.state {
	case stateGone:
		return fmt.Errorf("v4l2: %s: %w, reopening", s.opt.Name, ErrGone)
	case stateOK:
		s.state = stateStalled
		s.stalls.Add(1)
		s.emit(Event{Kind: EventStalled, At: now, Err: fmt.Errorf("%w: no frame for %v", ErrStalled, s.opt.StallAfter)})
	}
	return fmt.Errorf("v4l2: %s: %w: no frame for %v or more", s.opt.Name, ErrStalled, s.opt.StallAfter)
}

// deliver decodes fr into dst and recycles its buffer.
func (s *Supervisor) deliver(fr rawFrame, dst *gocv.Mat) (capture.FrameInfo, bool) {
	err := Decode(fr.buf[:fr.n], fr.format, dst)
	s.free <- fr.buf
	if err != nil {
		s.corrupt.Add(1)
		s.emit(Event{Kind: EventCorrupt, Err: err, Format: fr.format})
		return capture.FrameInfo{}, false
	}
	s.deadline = fr.at.Add(s.opt.StallAfter)
	if s.state == stateOK && s.index > 0 && fr.gap > s.opt.StallAfter {
		// The camera paused, and its next frame beat Read's timer: that
		// is still a stall, reported late rather than never.
		s.stalls.Add(1)
		s.state = stateStalled
		s.emit(Event{Kind: EventStalled, At: fr.at, Err: fmt.Errorf("%w: no frame for %v", ErrStalled, fr.gap)})
	}
	if s.state != stateOK {
		s.state = stateOK
		s.emit(Event{Kind: EventResumed, Format: fr.format})
	}
	info := capture.FrameInfo{Index: s.index, T: fr.ts, Size: fr.format.Size}
	if dst.Cols() > 0 {
		info.Size.X, info.Size.Y = dst.Cols(), dst.Rows()
	}
	s.index++
	s.frames.Add(1)
	return info, true
}

// Stats returns the counters.
func (s *Supervisor) Stats() Stats {
	return Stats{
		Frames:  s.frames.Load(),
		Drops:   s.drops.Load(),
		Stalls:  s.stalls.Load(),
		Losses:  s.losses.Load(),
		Reopens: s.reopens.Load(),
		Corrupt: s.corrupt.Load(),
	}
}

// Info describes the source; Size is the latest frame format's size.
func (s *Supervisor) Info() capture.SourceInfo {
	s.mu.Lock()
	f := s.format
	s.mu.Unlock()
	return capture.SourceInfo{Name: s.opt.Name, Kind: "camera", Size: f.Size, FPS: s.opt.FPS, Frames: -1}
}

// Close stops the reader goroutine and closes the camera. It waits for a
// pending ReadRaw to return (at most the device's poll interval). Safe to
// call more than once and from any goroutine.
func (s *Supervisor) Close() error {
	s.closing.Do(func() {
		close(s.stop)
		if in, ok := s.raw.(interrupter); ok {
			in.Interrupt()
		}
		if s.started {
			<-s.done
		} else {
			close(s.done)
		}
	})
	return nil
}
