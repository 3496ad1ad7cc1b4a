package guidance

// CueDecision is what the outputs (vehicle controller, operator cues) may
// do with one Estimate.
type CueDecision struct {
	// Guide is true when the offset and heading may be used to steer or
	// to cue the operator.
	Guide bool
	// Alarm is true when the fail-safe alarm must sound.
	Alarm bool
	// Offset and Heading are the estimate's signed offset and heading
	// (same units as the Estimate), or 0 when Guide is false.
	Offset, Heading float64
}

// Decide turns an Estimate into a CueDecision. Only a Tracking estimate
// without an alarm guides; an untrusted estimate never leaks its numbers
// into the outputs. The hysteresis between states lives in the Tracker
// (confidence thresholds MinConfidence/HoldConfidence, FailSafeAfter and
// ReacquireFor), so Decide itself needs no memory.
func Decide(e Estimate) CueDecision {
	d := CueDecision{Alarm: e.Alarm}
	if e.Tracking && !e.Alarm && finite(e.OffsetPx) && finite(e.HeadingDeg) {
		d.Guide = true
		d.Offset, d.Heading = e.OffsetPx, e.HeadingDeg
	}
	return d
}

// Side is which way the operator should steer.
type Side int

const (
	// Centred: within the dead band, no steering cue.
	Centred Side = 0
	// SteerLeft: the stripe is left of centre (negative offset).
	SteerLeft Side = -1
	// SteerRight: the stripe is right of centre (positive offset).
	SteerRight Side = 1
)

// String returns "left", "centred" or "right".
func (s Side) String() string {
	switch s {
	case SteerLeft:
		return "left"
	case SteerRight:
		return "right"
	default:
		return "centred"
	}
}

// SideBand turns a signed offset into a steering Side with hysteresis, so
// an offset hovering at the edge of the dead band does not flip the cue
// every frame: a side is entered when |offset| > Enter and left only when
// |offset| < Leave (Leave ≤ Enter). A decision without Guide gives Centred
// and clears the memory.
type SideBand struct {
	Enter, Leave float64
	side         Side
}

// Apply returns the Side for d, remembering it for the next call.
func (b *SideBand) Apply(d CueDecision) Side {
	if !d.Guide {
		b.side = Centred
		return b.side
	}
	x := d.Offset
	switch {
	case x > b.Enter:
		b.side = SteerRight
	case x < -b.Enter:
		b.side = SteerLeft
	case b.side == SteerRight && x < b.Leave:
		b.side = Centred
	case b.side == SteerLeft && x > -b.Leave:
		b.side = Centred
	}
	return b.side
}
