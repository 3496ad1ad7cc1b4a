package ctlstream_test

import (
	"bytes"
	"fmt"
	"time"

	"github.com/hewline/hewline/guidance/ctlstream"
)

// A sender writing to a buffer, and a receiver following it: guidance is
// usable by the receiver after three tracking messages in a row, and lost
// once it grows stale.
func Example() {
	var wire bytes.Buffer
	t0 := time.Unix(1_764_650_000, 0)
	now := t0
	s := ctlstream.NewWriter(&wire, ctlstream.Options{Session: 42, Now: func() time.Time { return now }})
	var r ctlstream.Receiver
	for i := 0; i < 4; i++ {
		now = t0.Add(time.Duration(i) * 33 * time.Millisecond)
		_ = s.Send(ctlstream.Message{Frame: i, Tracking: true, State: "tracking",
			OffsetPx: -12, HeadingDeg: 2, Confidence: 0.9})
		m, _ := r.Accept(wire.Bytes(), now)
		wire.Reset()
		_, err := r.Guidance(now)
		fmt.Printf("seq %d tracking %v usable %v\n", m.Seq, m.Tracking, err == nil)
	}
	now = now.Add(400 * time.Millisecond)
	_, err := r.Guidance(now)
	fmt.Println(err)
	// Output:
	// seq 1 tracking true usable false
	// seq 2 tracking true usable false
	// seq 3 tracking true usable true
	// seq 4 tracking true usable true
	// ctlstream: guidance lost: last guidance 400 ms old (limit 300 ms)
}

// The wire form of one tracking message, calibrated, with the pure-pursuit
// hint for a look-ahead of 1.5 m (line seen 0.9 m ahead of the axle, 36 mm
// left, turning 2.4° right: the goal point is 10.9 mm left, so a gentle
// left turn, κ = 2·(−0.0109)/1.5² ≈ −0.0096 1/m).
func ExampleMessage_AppendJSON() {
	m := ctlstream.Message{Type: ctlstream.TypeGuidance, Session: 77, Seq: 12, Frame: 11,
		CaptureT: 366667 * time.Microsecond, Sent: time.Unix(1_764_650_000, 0),
		Tracking: true, State: "holding", OffsetPx: -14.25, HeadingDeg: 3.1, Confidence: 0.91,
		StaleAfter: 300 * time.Millisecond}
	_ = m.SetFloor(ctlstream.Floor{OffsetMM: -36, HeadingDeg: 2.4, AheadMM: 900, LookAheadMM: 1500})
	b, err := m.AppendJSON(nil)
	fmt.Print(string(b), err)
	// Output:
	// {"v":1,"type":"guidance","session":77,"seq":12,"frame":11,"t_capture_s":0.366667,"sent_unix_ns":1764650000000000000,"latency_ms":null,"tracking":true,"alarm":false,"state":"holding","offset_px":-14.2500,"offset_mm":-36.0000,"heading_deg":3.1000,"heading_floor_deg":2.4000,"confidence":0.9100,"curvature_per_m":-0.009648,"stale_after_ms":300,"reason":""}
	// <nil>
}
