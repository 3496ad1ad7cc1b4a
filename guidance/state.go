package guidance

import "fmt"

// State is where the tracker stands. Only Holding and Coasting are trusted
// for guidance; Lost and Regaining sound the fail-safe alarm.
//
//	Seeking   ──line seen steadily for ReacquireFor──▶ Holding (steadily: in 4 frames of 5, never 2 missing in a row)
//	Seeking   ──no trusted line for FailSafeAfter since start──▶ Lost
//	Seeking   ──no lock within ReacquireFor+FailSafeAfter of the start──▶ Lost
//	Holding   ──frame without a usable measurement──▶ Coasting
//	Coasting  ──2 trusted measurements in a row──▶ Holding
//	Coasting  ──no trusted measurement for FailSafeAfter──▶ Lost
//	Holding, Coasting ──the line seen running out at the reference row──▶ Lost (see Tracker, "Seeing the line end")
//	any       ──Fault, or time going backwards──▶ Lost
//	Lost      ──trusted measurement──▶ Regaining
//	Regaining ──two unusable frames in a row──▶ Regaining, count restarted
//	Regaining ──line not seen for MaxFrameGap──▶ Lost
//	Regaining ──line seen steadily for ReacquireFor──▶ Holding
type State int

const (
	// Seeking: no lock yet since start (or Reset). Not trusted; the
	// alarm is off until FailSafeAfter has passed without a trusted
	// measurement, or ReacquireFor+FailSafeAfter without a lock.
	Seeking State = iota
	// Holding: locked, and this frame's measurement was used.
	Holding
	// Coasting: locked, but this frame brought no usable measurement
	// (or no frame came); the estimate is a prediction and stays trusted
	// until FailSafeAfter after the last trusted measurement.
	Coasting
	// Lost: the fail-safe is on. Not trusted; alarm on.
	Lost
	// Regaining: the line is seen again but not yet for ReacquireFor;
	// not trusted, alarm still on.
	Regaining
)

var stateNames = [...]string{"seeking", "holding", "coasting", "lost", "regaining"}

// String returns the state's lower-case name.
func (s State) String() string {
	if s >= 0 && int(s) < len(stateNames) {
		return stateNames[s]
	}
	return fmt.Sprintf("state(%d)", int(s))
}

// Trusted reports whether estimates in this state may drive guidance.
func (s State) Trusted() bool { return s == Holding || s == Coasting }

// Alarmed reports whether the fail-safe alarm is on in this state.
func (s State) Alarmed() bool { return s == Lost || s == Regaining }
