package ctlstream

import (
	"errors"
	"fmt"
	"net"
	"time"
)

// ErrLost: the receiver has no fresh, trusted guidance. The wrapping error
// says why (stale, sequence gap, not tracking, alarm, halted, none yet).
var ErrLost = errors.New("ctlstream: guidance lost")

// DefaultRegain is how many consecutive in-order tracking messages a
// Receiver needs after a loss before it trusts guidance again.
const DefaultRegain = 3

// Receiver follows a controller stream and says whether its guidance may be
// used, for controller authors and tests. It declares guidance lost when
// the last tracking message's frame is older than the stale limit (its
// age since arrival by the receiver's own clock, plus the sender's
// latency_ms from capture to sending), when a sequence number is skipped, when a message
// says tracking off or alarm on, or after a halt; after a loss it needs
// Regain consecutive in-order tracking messages before trusting again.
//
// The zero Receiver is ready to use with the defaults. Not safe for
// concurrent use.
type Receiver struct {
	// StaleAfter is the receiver's own limit. The effective limit is the
	// shorter of this and the sender's stale_after_ms; 0 means use the
	// sender's, or DefaultStaleAfter when the sender gave none.
	StaleAfter time.Duration
	// Regain: 0 means DefaultRegain.
	Regain int

	started  bool
	session  uint64
	seq      uint64
	last     Message   // last guidance message accepted
	lastAt   time.Time // when it arrived
	streak   int       // consecutive in-order tracking messages
	lostWhy  string    // non-empty while lost for a latched reason
	halted   bool
	received int
}

// Accept takes one received datagram or line, arriving at now. It returns
// the decoded message; an error means the bytes were dropped (malformed,
// wrong version, or an old, repeated sequence number).
func (r *Receiver) Accept(data []byte, now time.Time) (Message, error) {
	m, err := Decode(data)
	if err != nil {
		return Message{}, err
	}
	if !r.started || m.Session != r.session {
		// A new sender run: start from "lost" and need a full regain.
		r.started, r.session, r.seq = true, m.Session, m.Seq
		r.halted, r.streak = false, 0
		r.last, r.lastAt = Message{}, time.Time{}
		if r.received > 0 {
			r.lostWhy = "sender restarted"
		} else {
			r.lostWhy = "none yet"
		}
	} else {
		if m.Seq <= r.seq {
			return m, fmt.Errorf("%w: sequence %d after %d dropped", ErrMalformed, m.Seq, r.seq)
		}
		if m.Seq != r.seq+1 {
			r.streak = 0
			r.lostWhy = fmt.Sprintf("sequence gap: %d after %d", m.Seq, r.seq)
		}
		r.seq = m.Seq
	}
	r.received++
	switch m.Type {
	case TypeHalt:
		r.halted, r.streak = true, 0
		r.lostWhy = "sender halted: " + m.Reason
	case TypeHeartbeat:
		if m.Alarm {
			r.streak = 0
			r.lostWhy = "alarm: " + m.Reason
		}
	case TypeGuidance:
		r.last, r.lastAt = m, now
		switch {
		case m.Alarm:
			r.streak, r.lostWhy = 0, "alarm: "+m.Reason
		case !m.Tracking:
			r.streak, r.lostWhy = 0, "not tracking: "+m.Reason
		default:
			r.streak++
			if r.lostWhy != "" && r.streak >= r.regain() {
				r.lostWhy = ""
			}
		}
	}
	return m, nil
}

func (r *Receiver) regain() int {
	if r.Regain > 0 {
		return r.Regain
	}
	return DefaultRegain
}

func (r *Receiver) staleAfter() time.Duration {
	lim := r.last.StaleAfter
	if lim <= 0 {
		lim = DefaultStaleAfter
	}
	if r.StaleAfter > 0 && r.StaleAfter < lim {
		lim = r.StaleAfter
	}
	return lim
}

// Guidance returns the last guidance message if it may be used at now,
// else an error wrapping ErrLost with the reason. Only a nil error allows
// steering by the returned offsets.
func (r *Receiver) Guidance(now time.Time) (Message, error) {
	switch {
	case !r.started:
		return Message{}, fmt.Errorf("%w: no message yet", ErrLost)
	case r.halted:
		return Message{}, fmt.Errorf("%w: %s", ErrLost, r.lostWhy)
	case r.lostWhy != "":
		return Message{}, fmt.Errorf("%w: %s", ErrLost, r.lostWhy)
	}
	age := now.Sub(r.lastAt)
	if age < 0 {
		return Message{}, fmt.Errorf("%w: clock went backwards", ErrLost)
	}
	if r.last.LatencyMS != nil && *r.last.LatencyMS > 0 {
		age += time.Duration(*r.last.LatencyMS * float64(time.Millisecond))
	}
	if age > r.staleAfter() {
		return Message{}, fmt.Errorf("%w: last guidance %d ms old (limit %d ms)", ErrLost, age.Milliseconds(), r.staleAfter().Milliseconds())
	}
	return r.last, nil
}

// Fresh reports whether guidance may be used at now.
func (r *Receiver) Fresh(now time.Time) bool {
	_, err := r.Guidance(now)
	return err == nil
}

// Receive reads one datagram from conn (waiting until deadline) and
// Accepts it at now(). A nil now means time.Now. The buffer is 2 KiB.
func (r *Receiver) Receive(conn net.PacketConn, deadline time.Time, now func() time.Time) (Message, error) {
	if now == nil {
		now = time.Now
	}
	if err := conn.SetReadDeadline(deadline); err != nil {
		return Message{}, fmt.Errorf("ctlstream: receive: %w", err)
	}
	var buf [2048]byte
	n, _, err := conn.ReadFrom(buf[:])
	if err != nil {
		return Message{}, fmt.Errorf("ctlstream: receive: %w", err)
	}
	return r.Accept(buf[:n], now())
}
