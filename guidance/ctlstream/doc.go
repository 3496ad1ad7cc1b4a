// Package ctlstream sends hewline's guidance to a drive controller: one
// message per frame, a heartbeat when no frame comes, and a final halt
// message. It also has a Receiver for controller authors and tests, a
// confidence Gate with hysteresis, and the pure-pursuit steering hint.
//
// hewline is not a certified safety function. The stream is advice to a
// controller that must keep its own safety functions (emergency stop,
// speed limits, brakes on loss of guidance).
//
// # Transport
//
// Each message is one JSON object on one line (NDJSON), ending in "\n".
// Over UDP each datagram holds exactly one message; over a serial line the
// newline separates messages. UDP goes by default to 127.0.0.1:47211
// (DefaultAddr), never to a network unless an address is given. Broadcast,
// multicast and unspecified destinations are refused unless the caller sets
// Options.AllowBroadcast.
//
// # Wire format, version 1
//
// Every message has every field, in this order:
//
//	field              type     unit / meaning
//	v                  int      format version, 1; reject any other
//	type               string   "guidance" | "heartbeat" | "halt"
//	session            uint64   changes whenever the sender restarts
//	seq                uint64   1, 2, 3... per session, heartbeats included
//	frame              int      frame index of the estimate (heartbeat/halt: last frame, -1 before any)
//	t_capture_s        float    frame's capture time, seconds from the start of the source
//	sent_unix_ns       int      sender's wall clock when sent, ns since 1970 (clocks may differ)
//	latency_ms         float    capture to sending, ms, by the sender's clock; null when unknown
//	tracking           bool     true only when the offsets below may be used to steer
//	alarm              bool     fail-safe alarm raised; never true together with tracking
//	state              string   tracker state name, for display and logs
//	offset_px          float    lateral offset of the line, image pixels; null unless tracking
//	offset_mm          float    the same on the floor, mm; null unless tracking and calibrated
//	heading_deg        float    line angle from image vertical, degrees; null unless tracking
//	heading_floor_deg  float    the same on the floor, degrees; null unless tracking and calibrated
//	confidence         float    0..1
//	curvature_per_m    float    pure-pursuit hint, 1/m; null unless tracking and computed
//	stale_after_ms     int      age after which guidance must be treated as lost
//	reason             string   why tracking is off or the alarm is on; may be empty
//
// Signs: offset positive = the line lies right of the vehicle's reference
// (steer right); heading positive = the line's far end leans right;
// curvature positive = turn right.
//
// Example (tracking, uncalibrated), then a heartbeat after frames stopped:
//
//	{"v":1,"type":"guidance","session":77,"seq":12,"frame":11,"t_capture_s":0.366667,"sent_unix_ns":1764650000000000000,"latency_ms":41.0,"tracking":true,"alarm":false,"state":"holding","offset_px":-14.2500,"offset_mm":null,"heading_deg":3.1000,"heading_floor_deg":null,"confidence":0.9100,"curvature_per_m":null,"stale_after_ms":300,"reason":""}
//	{"v":1,"type":"heartbeat","session":77,"seq":13,"frame":11,"t_capture_s":0.366667,"sent_unix_ns":1764650000120000000,"latency_ms":null,"tracking":false,"alarm":false,"state":"no-frame","offset_px":null,"offset_mm":null,"heading_deg":null,"heading_floor_deg":null,"confidence":0.0000,"curvature_per_m":null,"stale_after_ms":300,"reason":"no frame for 120 ms"}
//
// testdata/stream.ndjson holds a longer recorded sequence (start, gating,
// a loss, heartbeats, halt) for testing a receiver.
//
// The curvature hint is pure pursuit (Coulter, "Implementation of the Pure
// Pursuit Path Tracking Algorithm", CMU-RI-TR-92-01, 1992): for a goal point
// on the line at look-ahead distance L and lateral offset y in the vehicle
// frame, κ = 2·y/L².
//
// # The receiver's duties
//
// A controller that receives this stream must treat guidance as lost, and
// stop or hold the vehicle safely, when any of these holds:
//
//   - no message for stale_after_ms (by its own clock), or the last
//     guidance message's frame is older than that (time since arrival plus
//     latency_ms; heartbeats keep the link alive but carry no guidance);
//   - a seq number is skipped (a message was lost), or the session changes;
//   - tracking is false, alarm is true, or the type is "halt";
//   - the message does not parse, or v is not 1.
//
// It must never steer by offset_px, heading_deg or curvature_per_m of a
// message with tracking false (they are null there). Receiver implements
// these rules; after a loss it trusts guidance again only after
// DefaultRegain consecutive in-order tracking messages. Automatic restart
// of motion after a loss is the controller's decision and its
// responsibility (ISO 3691-4 asks for no automatic restart after an
// emergency stop).
//
// # Gating
//
// Send never sets tracking on its own: the caller's Tracking flag (from
// the guidance.Tracker, which has its own confidence hysteresis) must be
// set, and the alarm off. For callers without a tracker, Options.Gate adds
// a Gate: DefaultConfirm estimates in a row at or above DefaultEnter
// confidence to gain trust, one below DefaultLeave (or not found) to lose
// it. The gap between the thresholds stops chatter when confidence hovers
// near one.
package ctlstream
