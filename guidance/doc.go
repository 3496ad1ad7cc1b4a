// Package guidance turns per-frame detections into a smoothed, trusted
// estimate of the stripe's offset and heading, with explicit tracking states
// and a fail-safe alarm.
//
// Time is always passed in (frame timestamps in replay, an injected clock in
// live operation) so that every decision is deterministic under test.
//
// # Estimator
//
// Offset (px) and heading (deg) each have a constant-velocity Kalman filter
// (KalmanCV) with the discrete white-noise acceleration process noise; the
// prediction interval is the time between the frames' timestamps, so
// variable frame rates and dropped frames need nothing special. The two
// channels are gated together: a measurement whose normalised innovation
// squared exceeds the chi-square quantile of GateProbability with 2 degrees
// of freedom (9.21 at 0.99) is rejected and the track coasts on its
// prediction. StepConfirmFrames rejected measurements in a row that agree
// with each other (one unusable frame may fall between two of them, as in
// an acquisition run) mean the line really moved, and the track jumps to
// them.
//
// Three copies of the filters run side by side with the process noise
// scaled ×1, ×4 and ×16 (models.go); the one whose recent measurements are
// most likely is in use, so the gate widens during a manoeuvre and narrows
// again on a smooth run. While the track coasts, a line is taken back when
// the smooth-running model's gate passes it, or the model in use's
// prediction does at no more than the width of the gate that took the last
// measurement: coasting never widens the gate.
//
// SteadyStateGains exposes the filter's converged gains as an alpha-beta
// pair, which the tests compare with Kalata's tracking-index relation.
//
// # States and the fail-safe
//
// The states are Seeking, Holding, Coasting, Lost and Regaining (see
// State). Only Holding and Coasting are trusted (Estimate.Tracking); Lost
// and Regaining sound the alarm (Estimate.Alarm). The alarm turns on when no
// trusted measurement has arrived for FailSafeAfter (default 0.3 s): a
// frame or a Tick at or after that moment reports Lost, so the alarm comes
// at most one frame (or one watchdog tick) late. It turns off only after
// the line has been seen continuously, at MinConfidence or above and
// consistently with itself, for ReacquireFor (default 0.2 s). Fault and
// time going backwards turn it on at once. FailSafeAfter must be longer
// than the frame interval, or every normal gap between frames counts as a
// loss.
//
// Hysteresis, so states do not chatter: a locked track keeps using
// measurements down to HoldConfidence (below MinConfidence); Coasting needs
// two good frames in a row to return to Holding; Regaining restarts its count
// on a bad frame but falls back to Lost only when the line has not been
// seen for MaxFrameGap. The alarm itself is bounded by FailSafeAfter and
// ReacquireFor, so it cannot flicker faster than those times.
//
// # Outputs
//
// Decide maps an Estimate to a CueDecision: only a trusted estimate guides;
// an untrusted one never passes its numbers on. SideBand adds a dead band
// with hysteresis for left/centred/right cues.
//
// # Live operation
//
// Live wraps a Tracker with a Clock and a mutex so the frame loop and a
// watchdog goroutine (calling Tick every few tens of milliseconds) can
// share it; a stalled camera then raises the alarm FailSafeAfter after its
// last frame. Package guidancetest has a FakeClock and synthetic scenes.
//
// A Tracker is not certified as a safety function; it makes loss of
// tracking loud and explicit so that the systems around it can stop.
package guidance
