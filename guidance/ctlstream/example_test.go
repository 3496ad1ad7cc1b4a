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
