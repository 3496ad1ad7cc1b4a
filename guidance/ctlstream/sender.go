package ctlstream

import (
	"context"
	"crypto/rand"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"sync"
	"syscall"
	"time"
)

// Defaults for Options.
const (
	// DefaultHeartbeat is how long the sender waits without sending before
	// it sends a heartbeat.
	DefaultHeartbeat = 100 * time.Millisecond
	// DefaultStaleAfter is the age at which guidance is to be treated as
	// lost (about three frames at 30 fps; 0.3 s at 2 m/s is 0.6 m of travel).
	DefaultStaleAfter = 300 * time.Millisecond
)

// ErrHalted: the sender was halted or closed and sends nothing more.
var ErrHalted = errors.New("ctlstream: sender halted")

// ErrRefused: the message was sent, but the receiver had refused an
// earlier one (nothing listening at the UDP destination).
var ErrRefused = errors.New("ctlstream: receiver refused an earlier message (is the controller listening?)")

// Options configure a Sender. The zero value gives the defaults.
type Options struct {
	// Heartbeat: send a heartbeat when nothing was sent for this long.
	// 0 means DefaultHeartbeat.
	Heartbeat time.Duration
	// StaleAfter is written into every message. 0 means DefaultStaleAfter.
	StaleAfter time.Duration
	// AllowBroadcast lets NewUDP send to a broadcast or multicast address.
	// Off by default: guidance goes to one explicit receiver.
	AllowBroadcast bool
	// Gate, when set, must also trust an estimate before it goes out with
	// Tracking set. Leave it nil when the caller's Tracking flag already
	// comes from a tracker with its own confidence hysteresis (the
	// guidance.Tracker does): a second gate would only cut coasting short.
	// Set it (for example NewGate(DefaultEnter, DefaultLeave,
	// DefaultConfirm)) when sending raw detections.
	Gate *Gate
	// Now is the clock used to stamp messages and to time heartbeats.
	// nil means time.Now.
	Now func() time.Time
	// Session identifies this run; 0 means a random non-zero value.
	Session uint64
}

// Sender writes controller-stream messages, one Write per message, to a
// datagram socket, a serial line or any io.Writer. It is safe for
// concurrent use (Send from the frame loop, Beat from a ticker).
type Sender struct {
	mu      sync.Mutex
	w       io.Writer
	c       io.Closer // may be nil
	opt     Options
	seq     uint64
	buf     []byte
	sentAny bool
	last    time.Time // when anything was last sent
	lastG   time.Time // when guidance was last sent
	haveG   bool
	frame   int
	captT   time.Duration
	alarm   bool
	halted  bool
	closed  bool
}

// NewWriter returns a Sender that writes to w, one message per Write call.
// If w is also an io.Closer, Close closes it. The Sender owns w from now on.
func NewWriter(w io.Writer, opt Options) *Sender {
	if opt.Heartbeat <= 0 {
		opt.Heartbeat = DefaultHeartbeat
	}
	if opt.StaleAfter <= 0 {
		opt.StaleAfter = DefaultStaleAfter
	}
	if opt.Now == nil {
		opt.Now = time.Now
	}
	for opt.Session == 0 {
		var b [8]byte
		_, _ = rand.Read(b[:]) // crypto/rand.Read never fails on Linux
		opt.Session = binary.LittleEndian.Uint64(b[:]) >> 1
	}
	s := &Sender{w: w, opt: opt, frame: -1, buf: make([]byte, 0, 512)}
	if c, ok := w.(io.Closer); ok {
		s.c = c
	}
	return s
}

// Session returns the session number written into every message.
func (s *Sender) Session() uint64 { return s.opt.Session }

// Send sends one frame's estimate. The sender fills in Type (guidance),
// Session, Seq, Sent, StaleAfter and, when m.CapturedAt is set,
// LatencyMS. The estimate goes out with Tracking set only when m.Tracking
// is set, m.Alarm is not, the gate (if any) trusts m.Confidence, and the
// frame is not older than StaleAfter; otherwise the offsets are withheld.
//
// If m holds a value that cannot be sent (a non-finite offset, a
// confidence outside [0, 1]) Send still sends a message, with tracking off
// and the alarm on, and returns an error wrapping ErrInvalid: the receiver
// always hears that guidance is lost rather than nothing.
func (s *Sender) Send(m Message) error {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.halted {
		return ErrHalted
	}
	m.Type = TypeGuidance
	trusted := m.Tracking && !m.Alarm
	if s.opt.Gate != nil {
		trusted = s.opt.Gate.Update(trusted, m.Confidence)
	}
	if m.Tracking && !trusted {
		m.Tracking = false
		if m.Reason == "" {
			m.Reason = "confidence not trusted"
		}
	}
	m.LatencyMS = nil
	if !m.CapturedAt.IsZero() {
		lat := s.opt.Now().Sub(m.CapturedAt)
		ms := float64(lat) / float64(time.Millisecond)
		m.LatencyMS = &ms
		if m.Tracking && lat > s.opt.StaleAfter {
			m.Tracking = false
			m.Reason = fmt.Sprintf("frame %d ms old when sent", lat.Milliseconds())
		}
	}
	var bad error
	if err := m.Validate(); err != nil {
		bad = err
		if s.opt.Gate != nil {
			s.opt.Gate.Reset()
		}
		m = Message{Type: TypeGuidance, Frame: m.Frame, CaptureT: m.CaptureT, State: m.State,
			LatencyMS: m.LatencyMS, Alarm: true, Reason: "invalid estimate withheld"}
	}
	if !m.Tracking {
		m.OffsetPx, m.HeadingDeg = 0, 0
		m.OffsetMM, m.HeadingFloorDeg, m.CurvaturePerM = nil, nil, nil
	}
	err := s.write(&m)
	s.lastG, s.haveG = s.last, true
	s.frame, s.captT, s.alarm = m.Frame, m.CaptureT, m.Alarm
	if bad != nil {
		return fmt.Errorf("ctlstream: frame %d: %w", m.Frame, bad)
	}
	return err
}

// write stamps and sends m. The caller holds s.mu.
func (s *Sender) write(m *Message) error {
	s.seq++
	m.Session, m.Seq = s.opt.Session, s.seq
	m.Sent = s.opt.Now()
	m.StaleAfter = s.opt.StaleAfter
	b, err := m.AppendJSON(s.buf[:0])
	if err != nil {
		return err
	}
	s.buf = b
	s.last, s.sentAny = m.Sent, true
	_, err = s.w.Write(b)
	if errors.Is(err, syscall.ECONNREFUSED) {
		// On a connected UDP socket this is the ICMP answer to an earlier
		// datagram, reported on this write, which was not sent: send it
		// again, and report that the receiver was not listening.
		if _, err = s.w.Write(b); err == nil {
			return fmt.Errorf("ctlstream: send %s %d: %w", m.Type, m.Seq, ErrRefused)
		}
	}
	if err != nil {
		return fmt.Errorf("ctlstream: send %s %d: %w", m.Type, m.Seq, err)
	}
	return nil
}

// Beat sends a heartbeat if nothing was sent for the heartbeat interval
// (or nothing at all yet) and reports whether it did. The heartbeat has
// tracking off; its alarm is on when the last guidance is older than
// StaleAfter, when none was ever sent, or when the last guidance had the
// alarm on.
func (s *Sender) Beat() (bool, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.halted {
		return false, ErrHalted
	}
	now := s.opt.Now()
	if s.sentAny && now.Sub(s.last) < s.opt.Heartbeat {
		return false, nil
	}
	m := Message{Type: TypeHeartbeat, Frame: s.frame, CaptureT: s.captT, State: "no-frame"}
	switch {
	case !s.haveG:
		m.Alarm, m.Reason = true, "no frame yet"
	case now.Sub(s.lastG) >= s.opt.StaleAfter:
		m.Alarm, m.State = true, "stale"
		m.Reason = fmt.Sprintf("no frame for %d ms", now.Sub(s.lastG).Milliseconds())
	default:
		m.Alarm = s.alarm
		m.Reason = fmt.Sprintf("no frame for %d ms", now.Sub(s.lastG).Milliseconds())
	}
	return true, s.write(&m)
}

// Run calls Beat on every tick until ctx is done or the sender is halted.
// Errors from Beat (an unreachable receiver) go to onErr, which may be nil;
// Run keeps going, because the next beat may get through.
func (s *Sender) Run(ctx context.Context, ticks <-chan time.Time, onErr func(error)) error {
	for {
		select {
		case <-ctx.Done():
			return ctx.Err()
		case <-ticks:
			if _, err := s.Beat(); err != nil {
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

// Halt sends a final halt message (tracking off, alarm on, with reason)
// and makes the sender inert: later Send and Beat calls return ErrHalted.
// It does not close the transport. Halting twice is harmless.
func (s *Sender) Halt(reason string) error {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.halted {
		return nil
	}
	s.halted = true
	if reason == "" {
		reason = "sender halted"
	}
	m := Message{Type: TypeHalt, Frame: s.frame, CaptureT: s.captT, State: "halted", Alarm: true, Reason: reason}
	return s.write(&m)
}

// Close halts the sender (sending the halt message if Halt was not called)
// and closes the transport.
func (s *Sender) Close() error {
	herr := s.Halt("sender closed")
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.closed {
		return nil
	}
	s.closed = true
	if s.c != nil {
		if err := s.c.Close(); err != nil {
			return fmt.Errorf("ctlstream: close: %w", err)
		}
	}
	return herr
}
