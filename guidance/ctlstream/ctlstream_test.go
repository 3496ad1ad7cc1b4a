package ctlstream_test

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"math"
	"net"
	"os/exec"
	"runtime"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/hewline/hewline/guidance"
	"github.com/hewline/hewline/guidance/ctlstream"
)

// fakeClock is a settable clock for deterministic heartbeat tests.
type fakeClock struct {
	mu sync.Mutex
	t  time.Time
}

func newClock() *fakeClock { return &fakeClock{t: time.Unix(1_764_650_000, 0)} }

func (c *fakeClock) Now() time.Time {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.t
}

func (c *fakeClock) Add(d time.Duration) {
	c.mu.Lock()
	c.t = c.t.Add(d)
	c.mu.Unlock()
}

// lines records each Write as one message.
type lines struct {
	mu  sync.Mutex
	msg [][]byte
}

func (l *lines) Write(p []byte) (int, error) {
	l.mu.Lock()
	defer l.mu.Unlock()
	l.msg = append(l.msg, append([]byte(nil), p...))
	return len(p), nil
}

// waitFor waits (bounded) until n messages were written.
func (l *lines) waitFor(t *testing.T, n int) {
	t.Helper()
	for end := time.Now().Add(5 * time.Second); time.Now().Before(end); time.Sleep(time.Millisecond) {
		l.mu.Lock()
		got := len(l.msg)
		l.mu.Unlock()
		if got >= n {
			return
		}
	}
	t.Fatalf("waited 5 s for %d messages", n)
}

func (l *lines) decoded(t *testing.T) []ctlstream.Message {
	t.Helper()
	l.mu.Lock()
	defer l.mu.Unlock()
	var out []ctlstream.Message
	for _, b := range l.msg {
		m, err := ctlstream.Decode(b)
		if err != nil {
			t.Fatalf("decode %q: %v", b, err)
		}
		out = append(out, m)
	}
	return out
}

func ptr(f float64) *float64 { return &f }

func tracked(frame int, off, conf float64) ctlstream.Message {
	return ctlstream.Message{Frame: frame, CaptureT: time.Duration(frame) * time.Second / 30,
		Tracking: true, State: "tracking", OffsetPx: off, HeadingDeg: 2, Confidence: conf}
}

// trustedSender returns a sender with a gate that trusts at once.
func trustedSender(w *lines, c *fakeClock) *ctlstream.Sender {
	return ctlstream.NewWriter(w, ctlstream.Options{Now: c.Now, Session: 7, Gate: ctlstream.NewGate(0.5, 0.3, 1)})
}

func TestRoundTrip(t *testing.T) {
	tests := map[string]struct {
		in   ctlstream.Message
		want ctlstream.Message // fields compared after decoding
	}{
		"tracking calibrated": {
			in: ctlstream.Message{Type: ctlstream.TypeGuidance, Seq: 4, Frame: 3, CaptureT: 100 * time.Millisecond,
				Tracking: true, State: "tracking", OffsetPx: -12.5, OffsetMM: ptr(-31.25), HeadingDeg: 4,
				HeadingFloorDeg: ptr(2.5), Confidence: 0.875, CurvaturePerM: ptr(0.25), StaleAfter: 300 * time.Millisecond},
			want: ctlstream.Message{Type: ctlstream.TypeGuidance, Seq: 4, Frame: 3, CaptureT: 100 * time.Millisecond,
				Tracking: true, State: "tracking", OffsetPx: -12.5, OffsetMM: ptr(-31.25), HeadingDeg: 4,
				HeadingFloorDeg: ptr(2.5), Confidence: 0.875, CurvaturePerM: ptr(0.25), StaleAfter: 300 * time.Millisecond},
		},
		"not tracking drops offsets": {
			in: ctlstream.Message{Type: ctlstream.TypeGuidance, Seq: 5, Frame: 4, Alarm: true, State: "lost",
				OffsetPx: 40, OffsetMM: ptr(99), HeadingDeg: 7, CurvaturePerM: ptr(1), Confidence: 0.1, Reason: `glare "bay 3"`},
			want: ctlstream.Message{Type: ctlstream.TypeGuidance, Seq: 5, Frame: 4, Alarm: true, State: "lost",
				Confidence: 0.1, Reason: `glare "bay 3"`},
		},
		"heartbeat": {
			in:   ctlstream.Message{Type: ctlstream.TypeHeartbeat, Seq: 9, Frame: -1, State: "no-frame", Reason: "no frame yet", Alarm: true},
			want: ctlstream.Message{Type: ctlstream.TypeHeartbeat, Seq: 9, Frame: -1, State: "no-frame", Reason: "no frame yet", Alarm: true},
		},
	}
	for name, tc := range tests {
		t.Run(name, func(t *testing.T) {
			b, err := tc.in.AppendJSON(nil)
			if err != nil {
				t.Fatal(err)
			}
			if !bytes.HasSuffix(b, []byte("}\n")) || bytes.Count(b, []byte("\n")) != 1 {
				t.Fatalf("not one NDJSON line: %q", b)
			}
			got, err := ctlstream.Decode(b)
			if err != nil {
				t.Fatal(err)
			}
			got.Sent = time.Time{}
			if !sameMessage(got, tc.want) {
				t.Errorf("decoded %+v\nwant    %+v", got, tc.want)
			}
			if !tc.in.Tracking {
				// The wire itself must not carry a usable offset.
				var raw map[string]any
				if err := json.Unmarshal(b, &raw); err != nil {
					t.Fatal(err)
				}
				for _, k := range []string{"offset_px", "offset_mm", "heading_deg", "heading_floor_deg", "curvature_per_m"} {
					if v, ok := raw[k]; !ok || v != nil {
						t.Errorf("%s = %v on a non-tracking message, want null", k, v)
					}
				}
			}
		})
	}
}

func sameMessage(a, b ctlstream.Message) bool {
	eq := func(p, q *float64) bool { return (p == nil) == (q == nil) && (p == nil || *p == *q) }
	return a.Type == b.Type && a.Seq == b.Seq && a.Frame == b.Frame && a.CaptureT == b.CaptureT &&
		a.Tracking == b.Tracking && a.Alarm == b.Alarm && a.State == b.State && a.OffsetPx == b.OffsetPx &&
		eq(a.OffsetMM, b.OffsetMM) && a.HeadingDeg == b.HeadingDeg && eq(a.HeadingFloorDeg, b.HeadingFloorDeg) &&
		a.Confidence == b.Confidence && eq(a.CurvaturePerM, b.CurvaturePerM) && a.StaleAfter == b.StaleAfter &&
		a.Reason == b.Reason
}

func TestValidate(t *testing.T) {
	tests := map[string]struct {
		m  ctlstream.Message
		ok bool
	}{
		"good":               {tracked(1, 3, 0.9), true},
		"NaN offset":         {tracked(1, math.NaN(), 0.9), false},
		"Inf heading":        {func() ctlstream.Message { m := tracked(1, 0, 0.9); m.HeadingDeg = math.Inf(1); return m }(), false},
		"NaN mm":             {func() ctlstream.Message { m := tracked(1, 0, 0.9); m.OffsetMM = ptr(math.NaN()); return m }(), false},
		"confidence 1.5":     {tracked(1, 0, 1.5), false},
		"confidence NaN":     {tracked(1, 0, math.NaN()), false},
		"tracking and alarm": {func() ctlstream.Message { m := tracked(1, 0, 0.9); m.Alarm = true; return m }(), false},
		"NaN offset ignored when not tracking": {func() ctlstream.Message {
			m := tracked(1, math.NaN(), 0.2)
			m.Tracking = false
			return m
		}(), true},
	}
	for name, tc := range tests {
		t.Run(name, func(t *testing.T) {
			if tc.m.Type == "" {
				tc.m.Type = ctlstream.TypeGuidance
			}
			err := tc.m.Validate()
			if (err == nil) != tc.ok {
				t.Fatalf("Validate = %v, want ok=%v", err, tc.ok)
			}
			if err != nil && !errors.Is(err, ctlstream.ErrInvalid) {
				t.Errorf("error %v does not wrap ErrInvalid", err)
			}
		})
	}
}

func TestDecodeRejects(t *testing.T) {
	tests := map[string]struct {
		in   string
		want error
	}{
		"not json":                {`hello`, ctlstream.ErrMalformed},
		"no version":              {`{"type":"guidance","seq":1,"tracking":false,"alarm":true}`, ctlstream.ErrMalformed},
		"version 2":               {`{"v":2,"type":"guidance","seq":1,"tracking":false,"alarm":true}`, ctlstream.ErrVersion},
		"unknown type":            {`{"v":1,"type":"steer","seq":1,"tracking":false,"alarm":true}`, ctlstream.ErrMalformed},
		"tracking without offset": {`{"v":1,"type":"guidance","seq":1,"tracking":true,"alarm":false,"heading_deg":1}`, ctlstream.ErrMalformed},
		"tracking with alarm":     {`{"v":1,"type":"guidance","seq":1,"tracking":true,"alarm":true,"offset_px":1,"heading_deg":1}`, ctlstream.ErrMalformed},
		"tracking heartbeat":      {`{"v":1,"type":"heartbeat","seq":1,"tracking":true,"alarm":false,"offset_px":1,"heading_deg":1}`, ctlstream.ErrMalformed},
		"missing alarm":           {`{"v":1,"type":"guidance","seq":1,"tracking":false}`, ctlstream.ErrMalformed},
	}
	for name, tc := range tests {
		t.Run(name, func(t *testing.T) {
			if _, err := ctlstream.Decode([]byte(tc.in)); !errors.Is(err, tc.want) {
				t.Errorf("Decode = %v, want %v", err, tc.want)
			}
		})
	}
}

// TestDecodeIgnoresOffsetsWhenNotTracking: a hand-made message that sends
// numbers in the offset fields with tracking false must not yield them.
func TestDecodeIgnoresOffsetsWhenNotTracking(t *testing.T) {
	m, err := ctlstream.Decode([]byte(`{"v":1,"type":"guidance","seq":1,"tracking":false,"alarm":false,"offset_px":55,"offset_mm":120,"heading_deg":9,"curvature_per_m":2}`))
	if err != nil {
		t.Fatal(err)
	}
	if m.OffsetPx != 0 || m.HeadingDeg != 0 || m.OffsetMM != nil || m.CurvaturePerM != nil {
		t.Errorf("non-tracking message kept offsets: %+v", m)
	}
}

// TestWireParsesWithPython checks the wire bytes against an outside JSON
// parser (Python's json module, Debian python3), as RFC 8259 JSON.
func TestWireParsesWithPython(t *testing.T) {
	py, err := exec.LookPath("python3")
	if err != nil {
		t.Skip("SKIPPED LOUDLY: python3 not installed; the outside JSON check did not run")
	}
	m := tracked(3, -14.25, 0.91)
	m.Type, m.Seq, m.Reason = ctlstream.TypeGuidance, 12, "worn tape, é"
	m.OffsetMM = ptr(-35.5)
	b, err := m.AppendJSON(nil)
	if err != nil {
		t.Fatal(err)
	}
	cmd := exec.Command(py, "-c", `import json,sys
d=json.loads(sys.stdin.read())
print(d["v"], d["seq"], d["offset_px"], d["offset_mm"], d["heading_floor_deg"], d["reason"], sep="|")`)
	cmd.Stdin = bytes.NewReader(b)
	out, err := cmd.CombinedOutput()
	if err != nil {
		t.Fatalf("python3 rejects %q: %v\n%s", b, err, out)
	}
	if got, want := strings.TrimSpace(string(out)), "1|12|-14.25|-35.5|None|worn tape, é"; got != want {
		t.Errorf("python3 read %q, want %q", got, want)
	}
}

func TestGateHysteresis(t *testing.T) {
	tests := map[string]struct {
		conf []float64 // NaN means not found
		want []bool
	}{
		"needs three to trust": {
			conf: []float64{0.9, 0.9, 0.9, 0.9},
			want: []bool{false, false, true, true},
		},
		"hovering between thresholds keeps trust": {
			conf: []float64{0.7, 0.7, 0.7, 0.55, 0.45, 0.59, 0.41},
			want: []bool{false, false, true, true, true, true, true},
		},
		"hovering never gains trust": {
			conf: []float64{0.55, 0.59, 0.45, 0.58, 0.5},
			want: []bool{false, false, false, false, false},
		},
		"one low frame drops trust at once": {
			conf: []float64{0.8, 0.8, 0.8, 0.39, 0.8, 0.8, 0.8},
			want: []bool{false, false, true, false, false, false, true},
		},
		"not found drops trust": {
			conf: []float64{0.8, 0.8, 0.8, math.NaN(), 0.8},
			want: []bool{false, false, true, false, false},
		},
		"run broken below enter restarts count": {
			conf: []float64{0.8, 0.8, 0.5, 0.8, 0.8, 0.8},
			want: []bool{false, false, false, false, false, true},
		},
	}
	for name, tc := range tests {
		t.Run(name, func(t *testing.T) {
			g := ctlstream.NewGate(ctlstream.DefaultEnter, ctlstream.DefaultLeave, ctlstream.DefaultConfirm)
			for i, c := range tc.conf {
				if got := g.Update(!math.IsNaN(c), c); got != tc.want[i] {
					t.Fatalf("step %d conf %v: trusted %v, want %v", i, c, got, tc.want[i])
				}
			}
		})
	}
}

func TestSendGatesUntrusted(t *testing.T) {
	var w lines
	c := newClock()
	s := ctlstream.NewWriter(&w, ctlstream.Options{Now: c.Now, Session: 1,
		Gate: ctlstream.NewGate(ctlstream.DefaultEnter, ctlstream.DefaultLeave, ctlstream.DefaultConfirm)})
	for i := 0; i < 4; i++ {
		if err := s.Send(tracked(i, 10, 0.9)); err != nil {
			t.Fatal(err)
		}
	}
	got := w.decoded(t)
	for i, want := range []bool{false, false, true, true} {
		if got[i].Tracking != want {
			t.Errorf("message %d tracking %v, want %v (gate needs %d)", i, got[i].Tracking, want, ctlstream.DefaultConfirm)
		}
		if !got[i].Tracking && (got[i].OffsetPx != 0 || got[i].Reason == "") {
			t.Errorf("message %d untrusted but offset %v reason %q", i, got[i].OffsetPx, got[i].Reason)
		}
	}
}

func TestSendWithoutGate(t *testing.T) {
	var w lines
	s := ctlstream.NewWriter(&w, ctlstream.Options{Now: newClock().Now, Session: 1})
	low := tracked(0, 10, 0.1) // a coasting estimate: trusted by the tracker, low confidence
	alarmed := tracked(1, 10, 0.9)
	alarmed.Alarm = true
	lost := tracked(2, 10, 0.9)
	lost.Tracking = false
	for _, m := range []ctlstream.Message{low, alarmed, lost} {
		if err := s.Send(m); err != nil {
			t.Fatal(err)
		}
	}
	got := w.decoded(t)
	if !got[0].Tracking || got[0].OffsetPx != 10 {
		t.Errorf("tracker-trusted estimate withheld: %+v", got[0])
	}
	for _, m := range got[1:] {
		if m.Tracking || m.OffsetPx != 0 {
			t.Errorf("frame %d sent with usable offset: %+v", m.Frame, m)
		}
	}
}

func TestSendInvalidStillWarns(t *testing.T) {
	var w lines
	s := trustedSender(&w, newClock())
	err := s.Send(tracked(5, math.NaN(), 0.9))
	if !errors.Is(err, ctlstream.ErrInvalid) {
		t.Fatalf("Send(NaN) = %v, want ErrInvalid", err)
	}
	got := w.decoded(t)
	if len(got) != 1 || got[0].Tracking || !got[0].Alarm || got[0].Frame != 5 {
		t.Fatalf("sent %+v, want one alarm message for frame 5", got)
	}
}

func TestHeartbeat(t *testing.T) {
	var w lines
	c := newClock()
	s := ctlstream.NewWriter(&w, ctlstream.Options{Now: c.Now, Session: 3, Gate: ctlstream.NewGate(0.5, 0.3, 1),
		Heartbeat: 100 * time.Millisecond, StaleAfter: 250 * time.Millisecond})
	beat := func() bool {
		sent, err := s.Beat()
		if err != nil {
			t.Fatal(err)
		}
		return sent
	}
	if !beat() {
		t.Fatal("no heartbeat before the first frame")
	}
	for i := 0; i < 3; i++ { // 30 fps: frames keep heartbeats away
		c.Add(33 * time.Millisecond)
		if err := s.Send(tracked(i, 1, 0.9)); err != nil {
			t.Fatal(err)
		}
		if beat() {
			t.Fatalf("heartbeat right after frame %d", i)
		}
	}
	// Frames stop. Tick every 10 ms for 400 ms.
	var at []time.Duration
	for ms := 10; ms <= 400; ms += 10 {
		c.Add(10 * time.Millisecond)
		if beat() {
			at = append(at, time.Duration(ms)*time.Millisecond)
		}
	}
	if want := []time.Duration{100, 200, 300, 400}; len(at) != len(want) {
		t.Fatalf("heartbeats at %v, want every 100 ms", at)
	} else {
		for i := range want {
			if at[i] != want[i]*time.Millisecond {
				t.Fatalf("heartbeats at %v, want %v ms", at, want)
			}
		}
	}
	msgs := w.decoded(t)
	hb := msgs[len(msgs)-4:]
	for i, m := range hb {
		if m.Type != ctlstream.TypeHeartbeat || m.Tracking || m.Frame != 2 {
			t.Errorf("heartbeat %d = %+v", i, m)
		}
		// 100, 200 ms after the last frame: still fresh; 300, 400: stale.
		if wantAlarm := i >= 2; m.Alarm != wantAlarm {
			t.Errorf("heartbeat %d (%d ms after the frame) alarm %v, want %v", i, (i+1)*100, m.Alarm, wantAlarm)
		}
	}
	for i := 1; i < len(msgs); i++ {
		if msgs[i].Seq != msgs[i-1].Seq+1 {
			t.Fatalf("seq %d after %d", msgs[i].Seq, msgs[i-1].Seq)
		}
	}
}

func TestRunStopsOnHalt(t *testing.T) {
	var w lines
	c := newClock()
	s := trustedSender(&w, c)
	ticks := make(chan time.Time)
	done := make(chan error, 1)
	go func() { done <- s.Run(context.Background(), ticks, func(err error) { t.Error(err) }) }()
	for i := 0; i < 3; i++ {
		c.Add(200 * time.Millisecond)
		ticks <- c.Now()
		w.waitFor(t, i+1)
	}
	if err := s.Halt("operator stop"); err != nil {
		t.Fatal(err)
	}
	select {
	case ticks <- c.Now():
	case <-time.After(5 * time.Second):
		t.Fatal("Run did not take the tick after Halt")
	}
	select {
	case err := <-done:
		if err != nil {
			t.Fatalf("Run = %v", err)
		}
	case <-time.After(5 * time.Second):
		t.Fatal("Run did not stop after Halt")
	}
	got := w.decoded(t)
	if len(got) != 4 {
		t.Fatalf("got %d messages, want 3 heartbeats and a halt", len(got))
	}
	last := got[3]
	if last.Type != ctlstream.TypeHalt || !last.Alarm || last.Tracking || last.Reason != "operator stop" {
		t.Errorf("last message %+v, want halt", last)
	}
	if err := s.Send(tracked(9, 0, 0.9)); !errors.Is(err, ctlstream.ErrHalted) {
		t.Errorf("Send after Halt = %v, want ErrHalted", err)
	}
	if len(w.decoded(t)) != 4 {
		t.Error("halted sender still writes")
	}
}

func listen(t *testing.T) net.PacketConn {
	t.Helper()
	pc, err := net.ListenPacket("udp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { pc.Close() })
	return pc
}

// TestUDPLoopback sends over a real socket on 127.0.0.1 and follows the
// stream with a Receiver.
func TestUDPLoopback(t *testing.T) {
	pc := listen(t)
	c := newClock()
	s, err := ctlstream.NewUDP(pc.LocalAddr().String(), ctlstream.Options{Now: c.Now, Gate: ctlstream.NewGate(0.5, 0.3, 1)})
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	var r ctlstream.Receiver
	recv := func() ctlstream.Message {
		t.Helper()
		m, err := r.Receive(pc, time.Now().Add(5*time.Second), c.Now)
		if err != nil {
			t.Fatal(err)
		}
		return m
	}
	for i := 0; i < 5; i++ {
		c.Add(33 * time.Millisecond)
		if err := s.Send(tracked(i, float64(i), 0.9)); err != nil {
			t.Fatal(err)
		}
		m := recv()
		if m.Seq != uint64(i+1) || m.Frame != i || m.OffsetPx != float64(i) || m.Session != s.Session() {
			t.Fatalf("message %d: %+v", i, m)
		}
		wantFresh := i+1 >= ctlstream.DefaultRegain
		if r.Fresh(c.Now()) != wantFresh {
			t.Fatalf("after %d messages fresh=%v, want %v", i+1, !wantFresh, wantFresh)
		}
	}
	// Frames stop: the heartbeat keeps the link, guidance goes stale.
	c.Add(150 * time.Millisecond)
	if sent, err := s.Beat(); !sent || err != nil {
		t.Fatalf("Beat = %v, %v", sent, err)
	}
	if m := recv(); m.Type != ctlstream.TypeHeartbeat {
		t.Fatalf("got %+v, want heartbeat", m)
	}
	if !r.Fresh(c.Now()) {
		t.Fatal("150 ms old guidance declared lost (limit 300 ms)")
	}
	c.Add(200 * time.Millisecond)
	if _, err := r.Guidance(c.Now()); !errors.Is(err, ctlstream.ErrLost) || !strings.Contains(err.Error(), "old") {
		t.Fatalf("350 ms old guidance: %v, want lost as stale", err)
	}
	if err := s.Halt("shutdown"); err != nil {
		t.Fatal(err)
	}
	if m := recv(); m.Type != ctlstream.TypeHalt || !m.Alarm || m.Tracking {
		t.Fatalf("got %+v, want halt", m)
	}
}

func TestReceiverLoss(t *testing.T) {
	enc := func(m ctlstream.Message) []byte {
		if m.Type == "" {
			m.Type = ctlstream.TypeGuidance
		}
		m.StaleAfter = 300 * time.Millisecond
		b, err := m.AppendJSON(nil)
		if err != nil {
			t.Fatal(err)
		}
		return b
	}
	g := func(session, seq uint64) ctlstream.Message {
		m := tracked(int(seq), 1, 0.9)
		m.Session, m.Seq = session, seq
		return m
	}
	t0 := time.Unix(100, 0)
	type step struct {
		m     ctlstream.Message
		after time.Duration // arrival time from t0
		fresh bool          // Fresh at arrival
	}
	tests := map[string][]step{
		"regain after three": {
			{g(1, 1), 0, false}, {g(1, 2), 30, false}, {g(1, 3), 60, true}, {g(1, 4), 90, true},
		},
		"sequence gap": {
			{g(1, 1), 0, false}, {g(1, 2), 30, false}, {g(1, 3), 60, true},
			{g(1, 5), 120, false}, {g(1, 6), 150, false}, {g(1, 7), 180, true},
		},
		"not tracking": {
			{g(1, 1), 0, false}, {g(1, 2), 30, false}, {g(1, 3), 60, true},
			{ctlstream.Message{Session: 1, Seq: 4, State: "lost", Confidence: 0.1}, 90, false},
			{g(1, 5), 120, false},
		},
		"alarm heartbeat": {
			{g(1, 1), 0, false}, {g(1, 2), 30, false}, {g(1, 3), 60, true},
			{ctlstream.Message{Type: ctlstream.TypeHeartbeat, Session: 1, Seq: 4, Alarm: true}, 90, false},
		},
		"quiet heartbeat keeps fresh guidance": {
			{g(1, 1), 0, false}, {g(1, 2), 30, false}, {g(1, 3), 60, true},
			{ctlstream.Message{Type: ctlstream.TypeHeartbeat, Session: 1, Seq: 4}, 160, true},
		},
		"halt latches": {
			{g(1, 1), 0, false}, {g(1, 2), 30, false}, {g(1, 3), 60, true},
			{ctlstream.Message{Type: ctlstream.TypeHalt, Session: 1, Seq: 4, Alarm: true}, 90, false},
			{g(1, 5), 120, false}, {g(1, 6), 150, false}, {g(1, 7), 180, false},
		},
		"restart needs regain": {
			{g(1, 1), 0, false}, {g(1, 2), 30, false}, {g(1, 3), 60, true},
			{g(2, 1), 90, false}, {g(2, 2), 120, false}, {g(2, 3), 150, true},
		},
	}
	for name, steps := range tests {
		t.Run(name, func(t *testing.T) {
			var r ctlstream.Receiver
			for i, st := range steps {
				now := t0.Add(st.after * time.Millisecond)
				if _, err := r.Accept(enc(st.m), now); err != nil {
					t.Fatalf("step %d: %v", i, err)
				}
				if _, err := r.Guidance(now); (err == nil) != st.fresh {
					t.Fatalf("step %d (%s seq %d): Guidance err=%v, want fresh=%v", i, st.m.Type, st.m.Seq, err, st.fresh)
				}
			}
		})
	}
	t.Run("stale by own limit", func(t *testing.T) {
		r := ctlstream.Receiver{StaleAfter: 100 * time.Millisecond}
		for i := uint64(1); i <= 3; i++ {
			if _, err := r.Accept(enc(g(1, i)), t0); err != nil {
				t.Fatal(err)
			}
		}
		if !r.Fresh(t0.Add(100 * time.Millisecond)) {
			t.Error("lost at exactly the limit")
		}
		if r.Fresh(t0.Add(101 * time.Millisecond)) {
			t.Error("fresh beyond the receiver's 100 ms limit (sender said 300)")
		}
	})
	t.Run("old sequence dropped", func(t *testing.T) {
		var r ctlstream.Receiver
		for _, s := range []uint64{1, 2, 3} {
			if _, err := r.Accept(enc(g(1, s)), t0); err != nil {
				t.Fatal(err)
			}
		}
		if _, err := r.Accept(enc(g(1, 2)), t0); err == nil {
			t.Error("repeated seq 2 accepted")
		}
		if !r.Fresh(t0) {
			t.Error("a dropped duplicate spoiled fresh guidance")
		}
	})
}

func TestNewUDPRefusesBroadcast(t *testing.T) {
	tests := map[string]struct {
		addr  string
		allow bool
		want  error // nil: accepted
	}{
		"limited broadcast":      {"255.255.255.255:47211", false, ctlstream.ErrBroadcast},
		"multicast":              {"239.1.2.3:47211", false, ctlstream.ErrBroadcast},
		"unspecified":            {"0.0.0.0:47211", false, ctlstream.ErrBroadcast},
		"ipv6 all nodes":         {"[ff02::1]:47211", false, ctlstream.ErrBroadcast},
		"broadcast when allowed": {"255.255.255.255:47211", true, nil},
		"loopback":               {"127.0.0.1:47211", false, nil},
		"default":                {"", false, nil},
		"no host means loopback": {":47211", false, nil},
	}
	for name, tc := range tests {
		t.Run(name, func(t *testing.T) {
			s, err := ctlstream.NewUDP(tc.addr, ctlstream.Options{AllowBroadcast: tc.allow})
			if tc.want == nil {
				if err != nil {
					t.Fatalf("NewUDP(%q) = %v", tc.addr, err)
				}
				s.Close()
				return
			}
			if !errors.Is(err, tc.want) {
				t.Fatalf("NewUDP(%q) = %v, want %v", tc.addr, err, tc.want)
			}
		})
	}
}

func TestNewSerialMissingPort(t *testing.T) {
	if _, err := ctlstream.NewSerial("/dev/hewline-no-such-tty", 115200, ctlstream.Options{}); err == nil {
		t.Fatal("opened a serial port that does not exist")
	}
}

// TestPurePursuit checks κ = 2·y/L² (Coulter 1992, CMU-RI-TR-92-01, the
// relation between the look-ahead distance L, the goal point's lateral
// offset y and the arc's curvature) on worked numbers, and that the goal
// point lies on the arc: x² + (y − r)² = r² with r = 1/κ.
func TestPurePursuit(t *testing.T) {
	tests := map[string]struct {
		forward, lateral float64
		want             float64
	}{
		// L² = 1.5² + 0.5² = 2.5 → κ = 1/2.5 = 0.4 1/m (r = 2.5 m).
		"right of path": {1.5, 0.5, 0.4},
		// L = 2 m (forward √3.75), y = −0.5 → κ = −1/4 = −0.25 (left).
		"left of path":   {math.Sqrt(3.75), -0.5, -0.25},
		"straight ahead": {3, 0, 0},
		// L = 1 m, y = 0.1 → κ = 0.2, r = 5 m.
		"small error": {math.Sqrt(0.99), 0.1, 0.2},
	}
	for name, tc := range tests {
		t.Run(name, func(t *testing.T) {
			k, err := ctlstream.PurePursuitCurvature(tc.forward, tc.lateral)
			if err != nil {
				t.Fatal(err)
			}
			if math.Abs(k-tc.want) > 1e-12 {
				t.Errorf("κ = %v, want %v", k, tc.want)
			}
			if k != 0 {
				r := 1 / k
				if d := tc.forward*tc.forward + (tc.lateral-r)*(tc.lateral-r) - r*r; math.Abs(d) > 1e-9 {
					t.Errorf("goal point off the arc by %v", d)
				}
			}
		})
	}
	if _, err := ctlstream.PurePursuitCurvature(0, 1); !errors.Is(err, ctlstream.ErrNoGoal) {
		t.Errorf("goal beside the vehicle: %v, want ErrNoGoal", err)
	}
}

func TestLineCurvature(t *testing.T) {
	tests := map[string]struct {
		ahead, offset, headingDeg, look float64
		want                            float64
	}{
		// Parallel line 0.5 m right, L = 2 m: y = 0.5 → κ = 2·0.5/4 = 0.25.
		"parallel right": {0, 0.5, 0, 2, 0.25},
		// Measured 0.8 m ahead instead: same line, same goal, same κ.
		"parallel right seen ahead": {0.8, 0.5, 0, 2, 0.25},
		// Line through the vehicle turned 30° right: goal at (L cos θ,
		// L sin θ), κ = 2 sin θ / L = 2·0.5/2 = 0.5.
		"through vehicle turned": {0, 0, 30, 2, 0.5},
		// Line turned 45° left through (1, 0), L = √2; along (cos, −sin)·s:
		// (1 + s/√2)² + s²/2 = 2 → s² + √2·s − 1 = 0 → s = (√6 − √2)/2,
		// goal y = −s/√2 = −(√3 − 1)/2, κ = 2y/L² = −(√3 − 1)/2.
		"turned left seen ahead": {1, 0, -45, math.Sqrt2, -(math.Sqrt(3) - 1) / 2},
		"on the line":            {0, 0, 0, 1.5, 0},
	}
	for name, tc := range tests {
		t.Run(name, func(t *testing.T) {
			k, err := ctlstream.LineCurvature(tc.ahead, tc.offset, tc.headingDeg*math.Pi/180, tc.look)
			if err != nil {
				t.Fatal(err)
			}
			if math.Abs(k-tc.want) > 1e-12 {
				t.Errorf("κ = %v, want %v", k, tc.want)
			}
		})
	}
	// A parallel line farther away than the look-ahead has no goal point.
	if _, err := ctlstream.LineCurvature(0, 3, 0, 2); !errors.Is(err, ctlstream.ErrNoGoal) {
		t.Errorf("line beyond reach: %v, want ErrNoGoal", err)
	}
}

func BenchmarkAppendJSON(b *testing.B) {
	m := tracked(1234, -14.25, 0.91)
	m.Type, m.Seq, m.OffsetMM, m.CurvaturePerM = ctlstream.TypeGuidance, 99999, ptr(-35.5), ptr(0.12)
	m.Sent = time.Unix(1_764_650_000, 0)
	buf := make([]byte, 0, 512)
	b.ReportAllocs()
	for b.Loop() {
		var err error
		buf, err = m.AppendJSON(buf[:0])
		if err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(len(buf)), "bytes/msg")
}

func BenchmarkDecode(b *testing.B) {
	m := tracked(1234, -14.25, 0.91)
	m.Type, m.Seq = ctlstream.TypeGuidance, 99999
	buf, _ := m.AppendJSON(nil)
	b.ReportAllocs()
	for b.Loop() {
		if _, err := ctlstream.Decode(buf); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkSend(b *testing.B) {
	s := ctlstream.NewWriter(discard{}, ctlstream.Options{Session: 1})
	m := tracked(1, -14.25, 0.91)
	b.ReportAllocs()
	for b.Loop() {
		if err := s.Send(m); err != nil {
			b.Fatal(err)
		}
	}
}

type discard struct{}

func (discard) Write(p []byte) (int, error) { return len(p), nil }

func TestFromEstimate(t *testing.T) {
	tests := map[string]struct {
		e        guidance.Estimate
		floor    *ctlstream.Floor
		tracking bool
		curv     *float64
	}{
		"holding": {
			e:        guidance.Estimate{T: time.Second, State: guidance.Holding, Tracking: true, OffsetPx: 12, HeadingDeg: 1, Confidence: 0.8},
			tracking: true,
		},
		// 500 mm right, parallel, seen 800 mm ahead, look-ahead 2 m:
		// κ = 2·0.5/2² = 0.25 1/m (Coulter 1992).
		"holding calibrated": {
			e:        guidance.Estimate{T: time.Second, State: guidance.Holding, Tracking: true, OffsetPx: 12, Confidence: 0.8},
			floor:    &ctlstream.Floor{OffsetMM: 500, AheadMM: 800, LookAheadMM: 2000},
			tracking: true, curv: ptr(0.25),
		},
		"lost keeps offsets out": {
			e:     guidance.Estimate{T: time.Second, State: guidance.Lost, Alarm: true, OffsetPx: 99, Reason: "no line"},
			floor: &ctlstream.Floor{OffsetMM: 500, LookAheadMM: 2000},
		},
		"alarm wins over tracking": {
			e: guidance.Estimate{State: guidance.Holding, Tracking: true, Alarm: true, OffsetPx: 5},
		},
	}
	for name, tc := range tests {
		t.Run(name, func(t *testing.T) {
			m := ctlstream.FromEstimate(tc.e, 30)
			if tc.floor != nil {
				if err := m.SetFloor(*tc.floor); err != nil {
					t.Fatal(err)
				}
			}
			b, err := m.AppendJSON(nil)
			if err != nil {
				t.Fatal(err)
			}
			got, err := ctlstream.Decode(b)
			if err != nil {
				t.Fatal(err)
			}
			if got.Tracking != tc.tracking || got.State != tc.e.State.String() || got.CaptureT != tc.e.T || got.Frame != 30 {
				t.Fatalf("message %+v", got)
			}
			if !tc.tracking && (got.OffsetPx != 0 || got.OffsetMM != nil || got.CurvaturePerM != nil) {
				t.Errorf("untrusted estimate leaked offsets: %+v", got)
			}
			if tc.curv != nil && (got.CurvaturePerM == nil || math.Abs(*got.CurvaturePerM-*tc.curv) > 1e-4) {
				t.Errorf("curvature %v, want %v", got.CurvaturePerM, *tc.curv)
			}
		})
	}
	m := ctlstream.FromEstimate(guidance.Estimate{State: guidance.Holding, Tracking: true}, 1)
	if err := m.SetFloor(ctlstream.Floor{OffsetMM: math.NaN()}); !errors.Is(err, ctlstream.ErrInvalid) {
		t.Errorf("SetFloor(NaN) = %v", err)
	}
}

// TestHeartbeatRealClock runs the heartbeat goroutine on a real ticker over
// loopback UDP. It checks order and spacing (never closer than the
// interval), not speed: the upper bound is only a generous deadline.
func TestHeartbeatRealClock(t *testing.T) {
	pc := listen(t)
	s, err := ctlstream.NewUDP(pc.LocalAddr().String(), ctlstream.Options{Heartbeat: 20 * time.Millisecond})
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	tick := time.NewTicker(5 * time.Millisecond)
	done := make(chan struct{})
	go func() {
		defer close(done)
		s.Run(ctx, tick.C, nil)
	}()
	defer func() { cancel(); tick.Stop(); <-done; s.Close() }()
	var r ctlstream.Receiver
	var prev ctlstream.Message
	for i := 0; i < 4; i++ {
		m, err := r.Receive(pc, time.Now().Add(10*time.Second), nil)
		if err != nil {
			t.Fatal(err)
		}
		if m.Type != ctlstream.TypeHeartbeat || !m.Alarm {
			t.Fatalf("got %+v, want an alarm heartbeat (no frame ever sent)", m)
		}
		if i > 0 {
			if m.Seq != prev.Seq+1 {
				t.Fatalf("seq %d after %d", m.Seq, prev.Seq)
			}
			if gap := m.Sent.Sub(prev.Sent); gap < 20*time.Millisecond {
				t.Fatalf("heartbeats %v apart, interval 20 ms", gap)
			}
		}
		prev = m
	}
	if r.Fresh(time.Now()) {
		t.Error("heartbeats alone gave fresh guidance")
	}
}

// TestUDPNoListener: with nobody listening, sends may fail (ICMP port
// unreachable on loopback) but the sender keeps working for when the
// controller comes up.
func TestUDPNoListener(t *testing.T) {
	pc, err := net.ListenPacket("udp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	addr := pc.LocalAddr().String()
	pc.Close()
	s, err := ctlstream.NewUDP(addr, ctlstream.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	var failed int
	for i := 0; i < 5; i++ {
		if err := s.Send(tracked(i, 0, 0.9)); err != nil {
			failed++
			if errors.Is(err, ctlstream.ErrHalted) || errors.Is(err, ctlstream.ErrInvalid) {
				t.Fatalf("send %d: %v", i, err)
			}
		}
	}
	t.Logf("%d of 5 sends reported the missing receiver", failed)
	if runtime.GOOS == "linux" && failed == 0 {
		t.Error("no send told the caller that nobody listens (Linux loopback answers with ICMP port unreachable)")
	}
	pc2, err := net.ListenPacket("udp", addr)
	if err != nil {
		t.Skipf("port %s taken again meanwhile: %v", addr, err)
	}
	defer pc2.Close()
	// The first send may still report the refusal of an earlier message,
	// but it must get through.
	if err := s.Send(tracked(5, 0, 0.9)); err != nil && !errors.Is(err, ctlstream.ErrRefused) {
		t.Fatal(err)
	}
	var r ctlstream.Receiver
	m, err := r.Receive(pc2, time.Now().Add(5*time.Second), nil)
	if err != nil || m.Frame != 5 {
		t.Fatalf("after the receiver came up: %+v, %v", m, err)
	}
}

// TestLatency: a frame older than StaleAfter when sent must not steer, and
// the receiver counts the sender's latency into the age of guidance.
func TestLatency(t *testing.T) {
	var w lines
	c := newClock()
	s := ctlstream.NewWriter(&w, ctlstream.Options{Now: c.Now, Session: 2, StaleAfter: 300 * time.Millisecond})
	var r ctlstream.Receiver
	send := func(frame int, age time.Duration) ctlstream.Message {
		t.Helper()
		m := tracked(frame, 5, 0.9)
		m.CapturedAt = c.Now().Add(-age)
		if err := s.Send(m); err != nil {
			t.Fatal(err)
		}
		msgs := w.decoded(t)
		got := msgs[len(msgs)-1]
		if _, err := r.Accept(w.msg[len(w.msg)-1], c.Now()); err != nil {
			t.Fatal(err)
		}
		return got
	}
	for i := 0; i < 3; i++ {
		c.Add(33 * time.Millisecond)
		if m := send(i, 40*time.Millisecond); !m.Tracking || m.LatencyMS == nil || *m.LatencyMS != 40 {
			t.Fatalf("frame %d: %+v", i, m)
		}
	}
	if !r.Fresh(c.Now()) {
		t.Fatal("fresh guidance with 40 ms latency declared lost")
	}
	// 40 ms latency + 261 ms since arrival = 301 ms > 300 ms.
	if r.Fresh(c.Now().Add(261 * time.Millisecond)) {
		t.Error("latency not counted into the age of guidance")
	}
	if !r.Fresh(c.Now().Add(259 * time.Millisecond)) {
		t.Error("lost before latency + age reached the limit")
	}
	c.Add(33 * time.Millisecond)
	if m := send(3, 350*time.Millisecond); m.Tracking || m.OffsetPx != 0 || !strings.Contains(m.Reason, "350 ms old") {
		t.Errorf("350 ms old frame sent as %+v, want withheld", m)
	}
}
