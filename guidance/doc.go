// Package guidance turns per-frame detections into a smoothed, trusted
// estimate of the stripe's offset and heading, with explicit tracking states
// and a fail-safe alarm.
//
// Time is always passed in (frame timestamps in replay, an injected clock in
// live operation) so that every decision is deterministic under test.
package guidance
