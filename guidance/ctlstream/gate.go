package ctlstream

import "math"

// Gate decides whether estimates may be trusted, with hysteresis so that a
// confidence hovering near one threshold does not make the output chatter
// between trusted and untrusted. It is slow to trust and quick to distrust:
// trust needs Confirm consecutive estimates at or above Enter, and is lost
// at once on one estimate below Leave (or not found, or non-finite).
//
// The zero Gate is not usable; use NewGate. A Gate is not safe for
// concurrent use.
type Gate struct {
	enter, leave float64
	confirm      int
	run          int
	trusted      bool
}

// Default gate thresholds (our own choice, to be tuned on recordings).
const (
	DefaultEnter   = 0.6
	DefaultLeave   = 0.4
	DefaultConfirm = 3
)

// NewGate returns a gate. Leave is clamped to at most enter, confirm to at
// least 1.
func NewGate(enter, leave float64, confirm int) *Gate {
	if leave > enter {
		leave = enter
	}
	if confirm < 1 {
		confirm = 1
	}
	return &Gate{enter: enter, leave: leave, confirm: confirm}
}

// Update feeds one estimate and returns whether it may be trusted.
func (g *Gate) Update(found bool, confidence float64) bool {
	if !found || math.IsNaN(confidence) || confidence < g.leave {
		g.trusted, g.run = false, 0
		return false
	}
	if g.trusted {
		return true
	}
	if confidence >= g.enter {
		g.run++
	} else {
		g.run = 0
	}
	if g.run >= g.confirm {
		g.trusted = true
	}
	return g.trusted
}

// Trusted reports the gate's current decision.
func (g *Gate) Trusted() bool { return g.trusted }

// Reset makes the gate untrusted, as after a restart.
func (g *Gate) Reset() { g.trusted, g.run = false, 0 }
