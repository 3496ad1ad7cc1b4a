package ctlstream

import (
	"errors"
	"math"
)

// ErrNoGoal: no point of the line lies at the look-ahead distance.
var ErrNoGoal = errors.New("ctlstream: no goal point at the look-ahead distance")

// PurePursuitCurvature is the curvature (1/m) of the circle that leaves the
// vehicle's reference point along its heading and passes through a goal
// point at forwardM ahead and lateralM to the right (vehicle frame, metres):
//
//	κ = 2·y / L², L² = x² + y²
//
// (pure pursuit: Coulter, "Implementation of the Pure Pursuit Path Tracking
// Algorithm", CMU-RI-TR-92-01, 1992). Positive κ turns right. The goal must
// be ahead of the vehicle (forwardM > 0).
func PurePursuitCurvature(forwardM, lateralM float64) (float64, error) {
	if !(forwardM > 0) || !finite(lateralM) || math.IsInf(forwardM, 0) {
		return 0, ErrNoGoal
	}
	l2 := forwardM*forwardM + lateralM*lateralM
	return 2 * lateralM / l2, nil
}

// LineGoal finds the goal point for pure pursuit on a straight line. The
// line is given in the vehicle frame (x forward, y right, metres, origin at
// the steering reference point, for pure pursuit the rear axle's centre)
// by one point, aheadM forward and offsetM to the right (where the camera
// measured it), and its heading headingRad from the forward axis
// (positive = the line turns right). It returns the point of the line
// ahead of the vehicle at distance lookAheadM from the origin.
func LineGoal(aheadM, offsetM, headingRad, lookAheadM float64) (forwardM, lateralM float64, err error) {
	if !finite(aheadM) || !finite(offsetM) || !finite(headingRad) || !(lookAheadM > 0) || math.IsInf(lookAheadM, 0) {
		return 0, 0, ErrNoGoal
	}
	// Points of the line: (D + s·cos θ, d + s·sin θ). |p| = L gives
	// s² + 2·b·s + c = 0 with b = D·cos θ + d·sin θ, c = D² + d² − L²;
	// take the root further along the line.
	sin, cos := math.Sincos(headingRad)
	b := aheadM*cos + offsetM*sin
	c := aheadM*aheadM + offsetM*offsetM - lookAheadM*lookAheadM
	disc := b*b - c
	if disc < 0 {
		return 0, 0, ErrNoGoal
	}
	s := -b + math.Sqrt(disc)
	forwardM, lateralM = aheadM+s*cos, offsetM+s*sin
	if !(forwardM > 0) {
		return 0, 0, ErrNoGoal
	}
	return forwardM, lateralM, nil
}

// LineCurvature is PurePursuitCurvature of LineGoal: the steering hint for
// a line through (aheadM, offsetM) at headingRad with look-ahead
// lookAheadM.
func LineCurvature(aheadM, offsetM, headingRad, lookAheadM float64) (float64, error) {
	x, y, err := LineGoal(aheadM, offsetM, headingRad, lookAheadM)
	if err != nil {
		return 0, err
	}
	return PurePursuitCurvature(x, y)
}
